package infer

import (
	"os"
	"testing"

	"edgewise/models"
)

// Fitting benchmarks (targets: a 4-state ring with 8 free rates on 10^6
// events with 8 starts in at most 10 s on 2 cores without profile
// intervals, 60 s with them; a 3-state ring with 6 free rates on 2*10^5
// events, 3 starts, with standard errors, in at most 1 s):
//
//	go test -run '^$' -bench 'Fit' -benchtime 1x ./infer
func benchFit(b *testing.B, path string, events, starts int, profile bool) {
	f, err := os.Open(path)
	if err != nil {
		b.Fatal(err)
	}
	m, err := models.Parse(f, path)
	f.Close()
	if err != nil {
		b.Fatal(err)
	}
	for i := range m.Params {
		m.Params[i].Fixed = false
	}
	d := truthData(b, m, 99, 1, events)
	b.ResetTimer()
	cpu0 := processCPU()
	for i := 0; i < b.N; i++ {
		res, err := Fit(m, d, FitOptions{Starts: starts, Seed: 1, Profile: profile})
		if err != nil {
			b.Fatal(err)
		}
		b.ReportMetric(float64(len(res.Optima)), "optima")
		ev := 0
		for _, s := range res.Starts {
			ev += s.Evals
		}
		b.ReportMetric(float64(ev), "explore-evals")
		rv := 0
		for _, o := range res.Optima {
			rv += o.Evals
		}
		b.ReportMetric(float64(rv), "refine-evals")
	}
	// CPU seconds per fit over all threads: on an idle 2-core machine the
	// wall time is about half of it; other load inflates the wall time.
	b.ReportMetric((processCPU()-cpu0).Seconds()/float64(b.N), "cpu-s/op")
}

func BenchmarkFitRing4Events1M(b *testing.B) {
	benchFit(b, "../testdata/ring4.toml", 1_000_000, 8, false)
}

func BenchmarkFitRing4Events1MProfile(b *testing.B) {
	benchFit(b, "../testdata/ring4.toml", 1_000_000, 8, true)
}

func BenchmarkFitRing3Events200k(b *testing.B) {
	benchFit(b, "../testdata/ring3.toml", 200_000, 3, false)
}
