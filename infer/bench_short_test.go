package infer

import (
	"edgewise/likelihood"
	"os"
	"path/filepath"
	"testing"
)

// Many short records against one long record of the same number of
// events: the per-record cost must be O(events) with small constants
// (issue: 10^6 records of 2 events took 71 s and 956 MB in inspect). The
// benchmarks read the file and make the library calls of `edgewise
// inspect` with its defaults (summary with bootstrap intervals, bootstrap
// of F, the Holm family of checks with a calibrated shape test, the
// stationarity test, the bound rule); compare ns/event and B/op of
//
//	go test -run '^$' -bench 'Inspect(Short|One)' -benchtime 3x -benchmem ./infer

const shortRecords = 1_000_000

// benchFile writes records of the shipped 4-state ring to a CSV file in a
// temporary folder and returns its path.
func benchFile(b *testing.B, records, events int) string {
	return writeBenchFile(b, recSimulate(b, recModel(b, "../testdata/ring4.toml"), 1, records, events))
}

// writeBenchFile writes d as CSV in a temporary folder and returns the
// file's path.
func writeBenchFile(b *testing.B, d *likelihood.Data) string {
	path := filepath.Join(b.TempDir(), "r.csv")
	f, err := os.Create(path)
	if err != nil {
		b.Fatal(err)
	}
	if err := WriteRecords(f, d); err != nil {
		b.Fatal(err)
	}
	if err := f.Close(); err != nil {
		b.Fatal(err)
	}
	return path
}

func benchInspectFile(b *testing.B, records, events int) {
	path := benchFile(b, records, events)
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		d, _, err := ReadFile(path, ReadOptions{})
		if err != nil {
			b.Fatal(err)
		}
		if err := d.PutFirst("+", "-"); err != nil {
			b.Fatal(err)
		}
		s, err := Summarize(d, SummaryOptions{Seed: 1, DiffusionBoot: DefaultDiffusionBoot})
		if err != nil {
			b.Fatal(err)
		}
		EffectiveAffinity(d, uint8(s.Plus), uint8(s.Minus), AffinityOptions{Bootstrap: DefaultDiffusionBoot, Seed: 1})
		co := CheckOptions{Plus: "+", Minus: "-", Seed: 1}
		if p := &s.Pooled; p.Pairs[s.Plus][s.Plus]+p.Pairs[s.Minus][s.Minus] <= 1_000_000 {
			co.ShapeResamples = 199
		}
		AssumptionChecks(d, co)
		StationarityTest(d)
		CheckBounds(d, BoundConditions{})
	}
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/float64(records*events), "ns/event")
}

// BenchmarkInspectShortRecords: 10^6 records of 2 events.
func BenchmarkInspectShortRecords(b *testing.B) { benchInspectFile(b, shortRecords, 2) }

// BenchmarkInspectOneRecord: the same number of events in one record.
func BenchmarkInspectOneRecord(b *testing.B) { benchInspectFile(b, 1, 2*shortRecords) }

// benchSummarize times Summarize on data read by ReadFile (so that the
// events lie in memory as the reader puts them: one slice cut into
// records).
func benchSummarize(b *testing.B, records, events int) {
	d, _, err := ReadFile(benchFile(b, records, events), ReadOptions{})
	if err != nil {
		b.Fatal(err)
	}
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		if _, err := Summarize(d, SummaryOptions{Seed: 1, DiffusionBoot: DefaultDiffusionBoot}); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/float64(records*events), "ns/event")
}

// BenchmarkSummarizeShortRecords: the summary (inspect's defaults) of 10^6
// records of 2 events in memory;
//
//	go test -run '^$' -bench 'Summarize(Short|One)' -benchtime 3x -benchmem ./infer
func BenchmarkSummarizeShortRecords(b *testing.B) { benchSummarize(b, shortRecords, 2) }

// BenchmarkSummarizeOneRecord: the same number of events in one record.
func BenchmarkSummarizeOneRecord(b *testing.B) { benchSummarize(b, 1, 2*shortRecords) }

func benchRead(b *testing.B, records, events int) {
	path := benchFile(b, records, events)
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		if _, _, err := ReadFile(path, ReadOptions{}); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/float64(records*events), "ns/event")
}

// BenchmarkReadShortRecords: the reader on 10^6 records of 2 events
// (CSV with a record column);
//
//	go test -run '^$' -bench 'Read(Short|One)' -benchtime 3x -benchmem ./infer
func BenchmarkReadShortRecords(b *testing.B) { benchRead(b, shortRecords, 2) }

// BenchmarkReadOneRecord: the same number of events in one record.
func BenchmarkReadOneRecord(b *testing.B) { benchRead(b, 1, 2*shortRecords) }
