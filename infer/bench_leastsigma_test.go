package infer

import (
	"testing"
)

// Benchmark of the least-dissipation profile (target: the sigma profile of
// a 4-state ring on 10^5 events in at most 30 s on 2 cores), the fit
// itself excluded:
//
//	go test -run '^$' -bench 'ProfileSigma' -benchtime 1x ./infer
func BenchmarkProfileSigmaRing4Events100k(b *testing.B) {
	m := readSpec(b, "../testdata/ring4.toml")
	d := truthData(b, m, 99, 1, 100_000)
	res, err := Fit(m, d, FitOptions{Starts: 4, Seed: 1})
	if err != nil {
		b.Fatal(err)
	}
	b.ResetTimer()
	cpu0 := processCPU()
	for i := 0; i < b.N; i++ {
		p, err := ProfileQuantity(res, d, "sigma", QuantityProfileOptions{})
		if err != nil {
			b.Fatal(err)
		}
		ev := 0
		for _, q := range p.Points {
			ev += q.Evals
		}
		b.ReportMetric(float64(len(p.Points)), "points")
		b.ReportMetric(float64(ev), "evals")
		b.ReportMetric(p.Lower, "least-sigma")
	}
	b.ReportMetric((processCPU()-cpu0).Seconds()/float64(b.N), "cpu-s/op")
}
