package infer

import (
	"math"
	"strconv"
	"testing"
)

const benchEvents = 10_000_000

// recBigFile writes 10^7 events of the shipped ring (4 records) as CSV in a
// temporary folder. With clock > 0 the times are rounded to that
// resolution first (an instrument clock; 1e-6 gives about 10 significant
// digits), else written with all the digits a float64 needs (up to 17).
func recBigFile(b *testing.B, clock float64) string {
	d := recSimulate(b, recModel(b, "../testdata/ring3.toml"), 1, 4, benchEvents/4)
	if clock > 0 {
		digits := int(math.Ceil(-math.Log10(clock)))
		for i := range d.Records {
			for k, t := range d.Records[i].Time {
				// Through text, so that the value is the shortest decimal.
				d.Records[i].Time[k], _ = strconv.ParseFloat(strconv.FormatFloat(math.Round(t/clock)*clock, 'f', digits, 64), 64)
			}
		}
	}
	return writeBenchFile(b, d)
}

func benchReadSummarize(b *testing.B, clock float64, summarize bool) {
	path := recBigFile(b, clock)
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		d, _, err := ReadFile(path, ReadOptions{})
		if err != nil {
			b.Fatal(err)
		}
		if summarize {
			if _, err := Summarize(d, SummaryOptions{}); err != nil {
				b.Fatal(err)
			}
		}
	}
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/benchEvents, "ns/event")
}

// BenchmarkReadSummarize10M reads a CSV file of 10^7 events with times on
// a 1e-6 clock and summarises it; also reported per event.
//
//	go test -run '^$' -bench 10M -benchtime 3x -benchmem ./infer
func BenchmarkReadSummarize10M(b *testing.B) { benchReadSummarize(b, 1e-6, true) }

// BenchmarkReadSummarize10MFullDigits is the same with 17-digit times
// (strconv's slower path).
func BenchmarkReadSummarize10MFullDigits(b *testing.B) { benchReadSummarize(b, 0, true) }

// BenchmarkRead10M is the reader alone (1e-6 clock).
func BenchmarkRead10M(b *testing.B) { benchReadSummarize(b, 1e-6, false) }

// BenchmarkSummarize10M is the summary alone on 10^7 events in memory.
func BenchmarkSummarize10M(b *testing.B) {
	d := recSimulate(b, recModel(b, "../testdata/ring3.toml"), 1, 4, benchEvents/4)
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		if _, err := Summarize(d, SummaryOptions{}); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/benchEvents, "ns/event")
}
