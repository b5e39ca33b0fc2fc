package infer

import (
	"flag"
	"math"
	"math/rand/v2"
	"testing"

	"edgewise/models"
)

var nestedReps = flag.Int("nested-reps", 0, "replicates of TestNestedNullUniform (0: the CI size, 12)")

// Under the null (records from a 4-state ring), the likelihood-ratio
// p-value of the ring against the ring with a chord (a sub-graph: the
// chord's two rates at zero, a boundary point, so the chi-bar-square
// mixture of Self and Liang, JASA 82, 605 (1987) applies) is uniform: a
// one-sample KS test of the (randomised at LR = 0) p-values does not
// reject. CI: 12 replicates
// (a gross miscalibration, e.g. the plain chi-square on 2 df, or p-values
// piled at 1, is caught); the long run: go test ./infer -run
// NestedNullUniform -v -timeout 60m -args -nested-reps 100.
func TestNestedNullUniform(t *testing.T) {
	reps := *nestedReps
	if reps == 0 {
		reps = 12
	}
	fams, err := Families(FamilyOptions{Rings: StateRange{Min: 4, Max: 4}, Chords: StateRange{Min: 4, Max: 4}})
	if err != nil {
		t.Fatal(err)
	}
	ring, chord := fams[0], fams[1]
	if ring.Name != "ring4" || chord.Name != "ring4+chord(A,C)" {
		t.Fatalf("families: %s, %s", ring.Name, chord.Name)
	}
	var ps []float64
	boundary := 0
	for rep := 0; rep < reps; rep++ {
		rng := rand.New(rand.NewPCG(7, uint64(rep)))
		truth := randomRatesModel(ring, rng)
		d := truthData(t, truth, uint64(500+rep), 1, 3000)
		res, err := Compare([]Candidate{{Name: "ring4", Model: truth}, {Name: "chord", Model: chord}}, d, CompareOptions{Fit: FitOptions{Starts: 2, Seed: uint64(rep), Workers: 2}})
		if err != nil {
			t.Fatal(err)
		}
		if len(res.Nested) != 1 {
			t.Fatalf("nested tests: %+v", res.Nested)
		}
		n := res.Nested[0]
		if n.Boundary > 0 {
			boundary++
		}
		// LR = 0 is the mixture's atom (weight 2^-k when df = k): its
		// p-value is 1, and a randomised one, uniform on [1 - 2^-k, 1],
		// makes the p-values uniform under the null (the usual
		// randomisation of discrete tests; common practice, no source).
		p := n.P
		if n.LR == 0 && n.DF == n.Boundary {
			p = 1 - math.Pow(2, -float64(n.Boundary))*rng.Float64()
		}
		ps = append(ps, p)
	}
	u, err := UniformityTest(ps)
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("%d replicates (%d with rates tested at 0): KS D = %.3f, p = %.3g; p-values %.3f", reps, boundary, u.KS, u.KSP, ps)
	if u.KSP < 0.001 {
		t.Errorf("nested LR p-values not uniform: KS p = %.3g", u.KSP)
	}
	if boundary != reps {
		t.Errorf("boundary correction applied in %d of %d", boundary, reps)
	}
}

// randomRatesModel returns a copy of m with every free rate drawn
// log-uniformly in [0.3, 3].
func randomRatesModel(m *models.Model, rng *rand.Rand) *models.Model {
	mm := *m
	mm.Params = append([]models.Param(nil), m.Params...)
	for i := range mm.Params {
		if mm.Params[i].Kind == models.RateParam && !mm.Params[i].Fixed {
			mm.Params[i].Value = 0.3 * math.Pow(10, rng.Float64())
		}
	}
	return &mm
}
