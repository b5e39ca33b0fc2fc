package infer

import (
	"testing"
)

// Comparing candidates (target: 6 candidates on 10^6 events in at most
// 60 s on 2 cores):
//
//	go test -run '^$' -bench CompareSix -benchtime 1x ./infer
func BenchmarkCompareSix1M(b *testing.B) {
	truth := readSpec(b, "../testdata/compare/truth-twocycle.toml")
	d := truthData(b, truth, 77, 1, 1_000_000)
	fams, err := Families(FamilyOptions{Rings: StateRange{Min: 3, Max: 4}, Chords: StateRange{Min: 4, Max: 4}, Loops: StateRange{Min: 3, Max: 3}})
	if err != nil {
		b.Fatal(err)
	}
	var cands []Candidate
	for _, m := range fams {
		cands = append(cands, Candidate{Name: m.Name, Model: m})
	}
	cands = append(cands, Candidate{Name: "twocycle", Model: readSpec(b, "../testdata/compare/twocycle.toml")})
	if len(cands) > 6 {
		cands = cands[len(cands)-6:]
	}
	b.ResetTimer()
	cpu0 := processCPU()
	for i := 0; i < b.N; i++ {
		res, err := Compare(cands, d, CompareOptions{Fit: FitOptions{Starts: 4, Seed: 1}})
		if err != nil {
			b.Fatal(err)
		}
		b.ReportMetric(float64(len(res.Ranked)), "candidates")
	}
	b.ReportMetric((processCPU()-cpu0).Seconds()/float64(b.N), "cpu-s/op")
}
