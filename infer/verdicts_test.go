package infer

import (
	"strings"
	"testing"
)

// hasReason reports whether one of the reasons contains the fragment.
func hasReason(rs []string, frag string) bool {
	for _, r := range rs {
		if strings.Contains(r, frag) {
			return true
		}
	}
	return false
}

// twoEdgeLabelSpec: a driven 4-state ring whose labels "in" and "out"
// each sit on two of its edges (A->B and C->D, and their reverses).
const twoEdgeLabelSpec = `
name = "two-edge-labels"
states = ["A", "B", "C", "D"]
[[edge]]
between = ["A", "B"]
rates = ["k1", "m1"]
labels = ["in", "out"]
[[edge]]
between = ["B", "C"]
rates = ["k2", "m2"]
[[edge]]
between = ["C", "D"]
rates = ["k3", "m3"]
labels = ["in", "out"]
[[edge]]
between = ["D", "A"]
rates = ["k4", "m4"]
[param.k1]
value = 3.0
[param.m1]
value = 0.5
[param.k2]
value = 0.4
[param.m2]
value = 0.2
[param.k3]
value = 5.0
[param.m3]
value = 1.0
[param.k4]
value = 0.3
[param.m4]
value = 0.1
`

// Records whose labels sit on two edges each are
// not first-order Markov; a ring whose labels each sit on one directed
// edge keeps them first order whatever its rates, so it is ruled out by
// the Markov-order rule (Anderson and Goodman, Ann. Math. Stat. 28, 89
// (1957) for the test; the first-order property of single-edge labels is
// design.md section 7).
func TestVerdictMarkovOrder(t *testing.T) {
	truth := parseSpec(t, twoEdgeLabelSpec)
	d := truthData(t, truth, 31, 1, 20000)
	fams, err := Families(FamilyOptions{Plus: "in", Minus: "out", Rings: StateRange{Min: 3, Max: 3}})
	if err != nil {
		t.Fatal(err)
	}
	res, err := Compare([]Candidate{{Name: fams[0].Name, Model: fams[0]}}, d, CompareOptions{
		Fit:      FitOptions{Starts: 2, Seed: 1, Workers: 2},
		Evidence: EvidenceOptions{Plus: "in", Minus: "out"},
	})
	if err != nil {
		t.Fatal(err)
	}
	if !res.Evidence.NotMarkov {
		t.Fatalf("Markov-order test does not reject on shared labels: p = %.3g", res.Evidence.Markov.P)
	}
	r := res.Ranked[0]
	if r.Consistency == nil || !r.Consistency.MarkovRuledOut || !hasReason(r.Reasons(), "Markov order") {
		t.Errorf("ring not ruled out by the Markov-order rule: %q", r.Reasons())
	}
}

// A known force far from the data's is rejected by the likelihood ratio;
// the true force is not. Ring data (cycle affinity ln 75 = 4.32 k_BT,
// Schnakenberg, Rev. Mod. Phys. 48, 571 (1976): the log-ratio of the
// products of the rates around the cycle).
func TestVerdictKnownForce(t *testing.T) {
	m := parseSpec(t, fitRing3Spec)
	d := truthData(t, m, 32, 1, 10000)
	run := func(force float64) Ranked {
		res, err := Compare([]Candidate{{Name: "ring3", Model: m}}, d, CompareOptions{Fit: FitOptions{Starts: 2, Seed: 1, Workers: 2}, KnownAffinity: &force})
		if err != nil {
			t.Fatal(err)
		}
		return res.Ranked[0]
	}
	far := run(0)
	if !hasReason(far.Reasons(), "known force") {
		t.Errorf("equilibrium imposed on driven data not ruled out: %q", far.Reasons())
	}
	near := run(4.3175) // ln 75
	if hasReason(near.Reasons(), "known force") {
		t.Errorf("the true force ruled out: %q", near.Reasons())
	}
}

// The chi-bar-square mixture: with k = 0 it is the chi-square law; with
// one rate at zero and one extra parameter, P(X >= x) = chi2_1(x)/2 for
// x > 0 (Self and Liang, JASA 82, 605 (1987), case 5); values checked by
// hand from the chi-square survival function.
func TestChiBarSquare(t *testing.T) {
	cases := []struct {
		x     float64
		df, k int
		want  float64
	}{
		{3.841458820694124, 1, 0, 0.05},
		{2.705543454095404, 1, 1, 0.05},  // 0.5 * P(chi2_1 >= 2.7055) = 0.5 * 0.1
		{0, 1, 1, 1},                     // the point mass at 0 counts
		{5.991464547107979, 2, 0, 0.05},  // chi2_2
		{5.991464547107979, 2, 2, 0.125}, // 0.25*0 + 0.5*P(chi2_1>=5.99)=0.5*0.01437 + 0.25*0.05
	}
	for _, c := range cases {
		got := chiBarSquareSF(c.x, c.df, c.k)
		want := c.want
		if c.df == 2 && c.k == 2 {
			want = 0.5*0.014378 + 0.25*0.05
		}
		if d := got - want; d > 1e-5 || d < -1e-5 {
			t.Errorf("x %g df %d k %d: %.6g, want %.6g", c.x, c.df, c.k, got, want)
		}
	}
}

// A known affinity of a named cycle: the ring's cycle A-B-C-A held at 0
// (equilibrium) is rejected on driven data, held at its true value ln 75
// it is not, and the reverse cycle A-C-B-A carries the opposite affinity.
func TestVerdictKnownCycle(t *testing.T) {
	m := parseSpec(t, fitRing3Spec)
	d := truthData(t, m, 33, 1, 10000)
	run := func(k KnownCycle) Ranked {
		res, err := Compare([]Candidate{{Name: "ring3", Model: m}}, d, CompareOptions{Fit: FitOptions{Starts: 2, Seed: 1, Workers: 2}, KnownCycles: []KnownCycle{k}})
		if err != nil {
			t.Fatal(err)
		}
		return res.Ranked[0]
	}
	if r := run(KnownCycle{States: []string{"A", "B", "C", "A"}, Value: 0}); !hasReason(r.Reasons(), "known force") {
		t.Errorf("equilibrium on the named cycle not ruled out: %q", r.Reasons())
	}
	if r := run(KnownCycle{States: []string{"A", "B", "C", "A"}, Value: 4.3175}); hasReason(r.Reasons(), "known force") {
		t.Errorf("the true affinity ruled out: %q", r.Reasons())
	}
	if r := run(KnownCycle{States: []string{"A", "C", "B", "A"}, Value: -4.3175}); hasReason(r.Reasons(), "known force") {
		t.Errorf("the reverse cycle at minus the true affinity ruled out: %q", r.Reasons())
	}
	if r := run(KnownCycle{States: []string{"A", "B", "D", "A"}, Value: 1}); r.Consistency == nil || len(r.Consistency.Checks) == 0 || hasReason(r.Reasons(), "known force") {
		t.Errorf("a cycle the model does not have changed the verdict: %q", r.Reasons())
	}
}
