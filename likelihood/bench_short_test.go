package likelihood

import (
	"runtime"
	"testing"
)

// Many short records (thousands of short single-molecule traces are a real
// case) against one record of the same number of events: ln L must cost
// O(events) with small per-record constants. The records are laid out as
// the records reader lays them (one slice of times and one of labels, cut
// into records):
//
//	go test -run '^$' -bench 'LogLik(Short|One)' -benchtime 5x ./likelihood

const shortRecords = 1_000_000

// coreContiguous simulates nrec records of nev events of net and lays them
// out in two shared slices.
func coreContiguous(b *testing.B, nrec, nev int) *Data {
	d := coreSimulate(b, coreRing4(), 1, nrec, nev, 0)
	times := make([]float64, 0, d.Events())
	labels := make([]uint8, 0, d.Events())
	for i := range d.Records {
		r := &d.Records[i]
		k := len(times)
		times = append(times, r.Time...)
		labels = append(labels, r.Label...)
		r.Time, r.Label = times[k:len(times):len(times)], labels[k:len(labels):len(labels)]
	}
	return d
}

func benchShort(b *testing.B, nrec, nev int, perRecord bool) {
	d := coreContiguous(b, nrec, nev)
	ev, err := NewNetworkEvaluator(coreRing4(), Options{Workers: 1})
	if err != nil {
		b.Fatal(err)
	}
	runtime.GC()
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		if perRecord {
			_, err = ev.RecordLogLiks(d)
		} else {
			_, err = ev.LogLik(d)
		}
		if err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/float64(d.Events()), "ns/event")
}

// BenchmarkLogLikShortRecords: 10^6 records of 2 events, one worker.
func BenchmarkLogLikShortRecords(b *testing.B) { benchShort(b, shortRecords, 2, false) }

// BenchmarkLogLikOneRecord: the same number of events in one record.
func BenchmarkLogLikOneRecord(b *testing.B) { benchShort(b, 1, 2*shortRecords, false) }

// BenchmarkRecordLogLiksShortRecords: per-record values of the short records.
func BenchmarkRecordLogLiksShortRecords(b *testing.B) { benchShort(b, shortRecords, 2, true) }
