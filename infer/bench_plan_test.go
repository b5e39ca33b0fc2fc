package infer

import "testing"

// Planning benchmark (target: two 4-state schemes, 200 power replicates
// at 10^4 events, in at most 60 s on 2 cores):
//
//	go test -run '^$' -bench Plan -benchtime 1x ./infer
func BenchmarkPlanTwoCycleVsRing(b *testing.B) {
	mA := readSpec(b, "../testdata/compare/truth-twocycle.toml")
	mB := readSpec(b, "../testdata/compare/ring4.toml")
	b.ResetTimer()
	cpu0 := processCPU()
	for i := 0; i < b.N; i++ {
		res, err := Plan(mA, mB, PlanOptions{Seed: 1, Replicates: 200, Events: []int{10000}})
		if err != nil {
			b.Fatal(err)
		}
		b.ReportMetric(res.Rows[0].Power, "power")
	}
	b.ReportMetric((processCPU()-cpu0).Seconds()/float64(b.N), "cpu-s/op")
}
