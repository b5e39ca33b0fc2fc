package infer

import (
	"math"
	"os"
	"path/filepath"
	"testing"
)

var flBenchNs = []int{5, 20, 100}

// BenchmarkFluctuationTest10M is the count-stopped test (n = 5, 20, 100,
// 200 bootstrap replicates each) on 10^7 events in memory.
//
//	go test -run '^$' -bench Fluct -benchtime 3x -benchmem ./infer
func BenchmarkFluctuationTest10M(b *testing.B) {
	net := flRing([]float64{3, 2, 1.5}, []float64{0.5, 0.4, 0.6})
	d := flSimulate(b, net, 2_500_000, 4, 1)
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		if _, err := FluctuationTest(d, flBenchNs, FluctOptions{Seed: 1}); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/float64(d.Events()), "ns/event")
}

// BenchmarkFluctuationFixedTime10M is the same with the fixed-time
// contrast.
func BenchmarkFluctuationFixedTime10M(b *testing.B) {
	net := flRing([]float64{3, 2, 1.5}, []float64{0.5, 0.4, 0.6})
	d := flSimulate(b, net, 2_500_000, 4, 1)
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		if _, err := FluctuationTest(d, flBenchNs, FluctOptions{Seed: 1, FixedTime: true}); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/float64(d.Events()), "ns/event")
}

// BenchmarkReadSummaryFluct10M is the whole path of `edgewise fluct`
// without bounds: read a CSV file of 10^7 events (1e-6 clock), summarise
// it and run the fluctuation test with the fixed-time contrast. Peak
// memory: run the test binary under /usr/bin/time -v.
func BenchmarkReadSummaryFluct10M(b *testing.B) {
	net := flRing([]float64{3, 2, 1.5}, []float64{0.5, 0.4, 0.6})
	src := flSimulate(b, net, 2_500_000, 4, 1)
	for i := range src.Records {
		src.Records[i].ID = string(rune('1' + i))
		for k, t := range src.Records[i].Time {
			src.Records[i].Time[k] = math.Round(t/1e-6) * 1e-6
		}
	}
	path := filepath.Join(b.TempDir(), "big.csv")
	f, err := os.Create(path)
	if err != nil {
		b.Fatal(err)
	}
	if err := WriteRecords(f, src); err != nil {
		b.Fatal(err)
	}
	if err := f.Close(); err != nil {
		b.Fatal(err)
	}
	n := src.Events()
	src = nil
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		d, _, err := ReadFile(path, ReadOptions{})
		if err != nil {
			b.Fatal(err)
		}
		if _, err := Summarize(d, SummaryOptions{}); err != nil {
			b.Fatal(err)
		}
		if _, err := FluctuationTest(d, flBenchNs, FluctOptions{Seed: 1, FixedTime: true}); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/float64(n), "ns/event")
}
