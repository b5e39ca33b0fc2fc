package infer

import (
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"edgewise/likelihood"
	"edgewise/models"
)

// sharedPlusRing is the reference case of the bound rule: a 4-state ring
// A -> B -> C -> D -> A whose edges A-B and C-D both carry "+" forward and
// "-" backward, so each label sits on two directed edges and the label
// sequence is not first-order Markov. The rates (from a random search for
// a large F*J/sigma) make the exact F*J 1.7 times the true sigma:
// stated as a lower bound it would rule the true network out.
func sharedPlusRing() *models.Network {
	h := models.Hidden
	u := []float64{0.32, 2.61, 2.94, 0.59}
	w := []float64{0.25, 0.6, 1.64, 2.33}
	net := &models.Network{States: []string{"A", "B", "C", "D"}, Labels: []models.Label{{Name: "+", Detect: 1}, {Name: "-", Detect: 1}}}
	for i := 0; i < 4; i++ {
		lab := [2]int{h, h}
		if i == 0 || i == 2 {
			lab = [2]int{0, 1}
		}
		net.Edges = append(net.Edges, models.Edge{From: i, To: (i + 1) % 4, Rate: [2]float64{u[i], w[i]}, Label: lab})
	}
	return net
}

// TestBoundsWithheldSharedLabel reconstructs the reference case (a 4-state
// ring with '+' on two of its edges; design section 8: a label on several
// edges can make F*J exceed sigma): the data's F*J exceeds the true sigma
// by many standard errors, the data's own Markov-order test (Anderson and
// Goodman, Ann. Math. Stat. 28, 89 (1957)) rejects at far below
// MarkovWithholdLevel, and EntropyBounds, told nothing about the labels,
// withholds every bound with that reason. J, F and D are still given.
func TestBoundsWithheldSharedLabel(t *testing.T) {
	net := sharedPlusRing()
	pi, err := net.Stationary()
	if err != nil {
		t.Fatal(err)
	}
	sigma := net.EntropyProduction(pi)
	k, err := likelihood.NewKernels(net)
	if err != nil {
		t.Fatal(err)
	}
	pr, err := likelihood.NewPredictor(k, likelihood.Instrument{})
	if err != nil {
		t.Fatal(err)
	}
	jx, _, err := pr.Current([]float64{1, -1})
	if err != nil {
		t.Fatal(err)
	}
	fjx := pr.EffectiveAffinity(0, 1) * jx // exact, from the stationary pair law
	t.Logf("exact: sigma %.5f, F*J %.5f (ratio %.2f)", sigma, fjx, fjx/sigma)
	if !(fjx > 1.5*sigma) {
		t.Fatalf("the reference case should have F*J above sigma: %.5f vs %.5f", fjx, sigma)
	}
	d := recSimulate(t, net, 11, 2, 25000)
	b, err := EntropyBounds(d, BoundOptions{})
	if err != nil {
		t.Fatal(err)
	}
	fj := b.F.Value * b.J.Value
	se := math.Sqrt(b.J.Value*b.J.Value*b.F.SE*b.F.SE + b.F.Value*b.F.Value*b.J.SE*b.J.SE)
	t.Logf("sigma %.4f; data F*J %.4f (SE about %.4f); Markov G %.1f on %d df, p %.3g", sigma, fj, se, b.Validity.Markov.Stat, b.Validity.Markov.DF, b.Validity.Markov.P)
	if !(math.Abs(fj-fjx) < 4*se) {
		t.Errorf("data F*J %.5f, exact %.5f (SE %.5f)", fj, fjx, se)
	}
	if b.Claimed || b.Validity.Hold || !b.Validity.Tested || !(b.Validity.Markov.P < 1e-10) {
		t.Fatalf("bounds not withheld: %+v", b.Validity)
	}
	if !strings.Contains(b.Reason, "not a first-order Markov chain") || !strings.Contains(b.Reason, "p = ") {
		t.Errorf("reason %q", b.Reason)
	}
	for name, e := range map[string]Estimate{"F*J": b.FJ, "J^2/D": b.TUR, "sequence": b.Sequence, "waiting time": b.WaitingTime, "transition": b.Transition} {
		if !e.Undefined || !math.IsNaN(e.Value) || !math.IsNaN(e.Lo) || !strings.Contains(e.Note, "withheld") {
			t.Errorf("%s given: %+v", name, e)
		}
	}
	if b.J.Undefined || b.D.Undefined || math.IsNaN(b.F.Value) {
		t.Errorf("J, D or F missing: %+v %+v %+v", b.J, b.D, b.F)
	}
}

// TestBoundsValidRule: each instrument fact withholds the bounds with its
// own reason, a non-rejecting Markov test lets them hold with its p among
// the stated assumptions, a rejection at just below the level withholds
// them and one just above does not.
func TestBoundsValidRule(t *testing.T) {
	ok := TestResult{Stat: 3, DF: 4, P: 0.56, N: 1000}
	if v := BoundsValid(&ok, BoundConditions{}); !v.Hold || v.Reason() != "" || !strings.Contains(strings.Join(v.Assumes, "; "), "p = 0.56") {
		t.Errorf("valid data: %+v", v)
	}
	for _, c := range []struct {
		cond BoundConditions
		want string
	}{
		{BoundConditions{MultiEdge: true}, "several directed edges"},
		{BoundConditions{DetectForward: 0.9, DetectBackward: 0.8}, "different probabilities"},
		{BoundConditions{DeadTime: 0.01}, "dead time"},
	} {
		v := BoundsValid(&ok, c.cond)
		if v.Hold || !strings.Contains(v.Reason(), c.want) {
			t.Errorf("%+v: %+v", c.cond, v)
		}
	}
	if v := BoundsValid(&ok, BoundConditions{DetectForward: 0.9, DetectBackward: 0.9}); !v.Hold {
		t.Errorf("equal detection withheld: %+v", v)
	}
	for _, c := range []struct {
		p    float64
		hold bool
	}{{0.999 * MarkovWithholdLevel, false}, {1.001 * MarkovWithholdLevel, true}, {math.NaN(), true}} {
		m := TestResult{Stat: 20, DF: 4, P: c.p}
		if v := BoundsValid(&m, BoundConditions{}); v.Hold != c.hold {
			t.Errorf("Markov p %g: hold %v, want %v (%+v)", c.p, v.Hold, c.hold, v)
		}
	}
	if v := BoundsValid(nil, BoundConditions{}); !v.Hold || v.Tested {
		t.Errorf("no data: %+v", v)
	}
}

// TestBoundsHoldOnRing: on a ring with one labelled edge the labels are
// first-order Markov, the test does not withhold the bounds, and they are
// given with the test's p beside them.
func TestBoundsHoldOnRing(t *testing.T) {
	u, w, _ := flSmallRing()
	d := flSimulate(t, flRing(u, w), 20000, 2, 21)
	b, err := EntropyBounds(d, BoundOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if !b.Claimed || !b.Validity.Tested || b.FJ.Undefined {
		t.Fatalf("ring: %+v; F*J %+v", b.Validity, b.FJ)
	}
	if !strings.Contains(strings.Join(b.Validity.Assumes, "; "), "Markov-order test p =") {
		t.Errorf("assumptions do not state the test's p: %v", b.Validity.Assumes)
	}
}

// TestHolm: the adjusted p-values of a hand-worked example, and, for
// random families, the same rejections as Holm's sequential procedure
// (reject H_(1) if p_(1) <= a/m, then H_(2) if p_(2) <= a/(m-1), ...,
// stopping at the first failure; Holm, Scand. J. Stat. 6, 65 (1979)),
// another route to the same decisions.
func TestHolm(t *testing.T) {
	got := Holm([]float64{0.01, 0.04, 0.03, math.NaN(), 0.005})
	want := []float64{0.03, 0.06, 0.06, math.NaN(), 0.02}
	for i := range want {
		if !(math.Abs(got[i]-want[i]) < 1e-15 || (math.IsNaN(got[i]) && math.IsNaN(want[i]))) {
			t.Errorf("Holm %v, want %v", got, want)
			break
		}
	}
	rng := rand.New(rand.NewPCG(1, 1))
	for it := 0; it < 2000; it++ {
		m := 1 + rng.IntN(8)
		ps := make([]float64, m)
		for i := range ps {
			ps[i] = math.Pow(rng.Float64(), 1+3*rng.Float64())
		}
		a := []float64{0.01, 0.05, 0.1}[rng.IntN(3)]
		adj := Holm(ps)
		// Sequential procedure.
		order := make([]int, m)
		for i := range order {
			order[i] = i
		}
		for i := 1; i < m; i++ {
			for j := i; j > 0 && ps[order[j]] < ps[order[j-1]]; j-- {
				order[j], order[j-1] = order[j-1], order[j]
			}
		}
		rej := make([]bool, m)
		for k, i := range order {
			if ps[i] > a/float64(m-k) {
				break
			}
			rej[i] = true
		}
		for i := range ps {
			if (adj[i] <= a) != rej[i] || adj[i] < ps[i] {
				t.Fatalf("p %v at %g: adjusted %v, sequential %v", ps, a, adj, rej)
			}
		}
	}
}

// TestSummaryTooFewEvents: two events (issue of the reliability review:
// rate 0 with interval [0, 0], activity interval [-9.6, 29.6]): each rate
// and the activity take the Garwood interval of their count, never
// negative and never of zero width (count 0 over T: [0, 3.689/T], Garwood,
// Biometrika 28, 437 (1936)); J and D are withheld with "too few events".
func TestSummaryTooFewEvents(t *testing.T) {
	d := &likelihood.Data{Labels: []string{"+", "-"}, Records: []likelihood.Record{{Time: []float64{0, 1.3}, Label: []uint8{0, 1}, End: math.NaN()}}}
	s, err := Summarize(d, SummaryOptions{})
	if err != nil {
		t.Fatal(err)
	}
	p := s.Pooled
	for name, e := range map[string]Estimate{"rate(+)": p.Rates[0], "rate(-)": p.Rates[1], "activity": p.Activity} {
		if !(e.Lo >= 0) || !(e.Hi > e.Lo) || !strings.Contains(e.Method, "Garwood") || !strings.Contains(e.Note, "Poisson") {
			t.Errorf("%s: %+v", name, e)
		}
	}
	if hi := p.Rates[0].Hi * p.Duration; math.Abs(hi-3.6888794541139354) > 1e-10 {
		t.Errorf("count 0: upper limit %.12g, want 3.68888 (SciPy, reference-smallcount.json)", hi)
	}
	for name, e := range map[string]Estimate{"J": p.Current, "D": p.Diffusion, "Fano": p.Fano} {
		if !e.Undefined || !math.IsNaN(e.Value) || !strings.HasPrefix(e.Note, "too few events") {
			t.Errorf("%s: %+v", name, e)
		}
	}
}
