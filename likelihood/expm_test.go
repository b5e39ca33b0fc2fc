package likelihood

import (
	"math"
	"math/rand/v2"
	"testing"

	"edgewise/models"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/stat/distuv"
)

// coreMaxRel is max|a - b| / max|b| (norm-wise relative difference).
func coreMaxRel(a, b *mat.Dense) float64 {
	var d mat.Dense
	d.Sub(a, b)
	return mat.Norm(&d, math.Inf(1)) / mat.Norm(b, math.Inf(1))
}

// coreD0 returns the D0 of a network.
func coreD0(t *testing.T, net *models.Network) *mat.Dense {
	t.Helper()
	k, err := NewKernels(net)
	if err != nil {
		t.Fatal(err)
	}
	return k.D0
}

// coreIrreversibleRing is the N-state ring 0 -> 1 -> ... -> N-1 -> 0 with
// every rate k, one-way edges, and "+" on N-1 -> 0.
func coreIrreversibleRing(n int, k float64) *models.Network {
	net := &models.Network{Labels: []models.Label{{Name: "+", Detect: 1}}}
	if n == 2 {
		// One edge carries both steps: A -> B hidden, B -> A visible.
		net.States = []string{"A", "B"}
		net.Edges = []models.Edge{{From: 0, To: 1, Rate: [2]float64{k, k}, Label: [2]int{models.Hidden, 0}}}
		return net
	}
	for i := 0; i < n; i++ {
		net.States = append(net.States, string(rune('A'+i)))
		lab := models.Hidden
		if i == n-1 {
			lab = 0
		}
		net.Edges = append(net.Edges, models.Edge{From: i, To: (i + 1) % n, Rate: [2]float64{k, 0}, Label: [2]int{lab, models.Hidden}})
	}
	return net
}

// coreEqualRing is the N-state reversible ring with all rates 1 and
// labels on edge 0 detected with probability p.
func coreEqualRing(n int, p float64) *models.Network {
	net := &models.Network{Labels: []models.Label{{Name: "+", Detect: p}, {Name: "-", Detect: p}}}
	for i := 0; i < n; i++ {
		net.States = append(net.States, string(rune('A'+i)))
		net.Edges = append(net.Edges, models.Edge{From: i, To: (i + 1) % n, Rate: [2]float64{1, 1}, Label: [2]int{models.Hidden, models.Hidden}})
	}
	net.Edges[0].Label = [2]int{0, 1}
	return net
}

// coreTwoBlocks is blockdiag(B, B) for a 3x3 sub-generator B: every
// eigenvalue is exactly double.
func coreTwoBlocks() *mat.Dense {
	b := []float64{
		-3, 1, 1,
		0.5, -2, 1,
		1, 0.25, -1.5,
	}
	a := mat.NewDense(6, 6, nil)
	for i := 0; i < 3; i++ {
		for j := 0; j < 3; j++ {
			a.Set(i, j, b[3*i+j])
			a.Set(i+3, j+3, b[3*i+j])
		}
	}
	return a
}

// TestExpRoutesAgree: spectral (with its fallback), Pade (gonum
// mat.Dense.Exp, Higham 2005) and uniformisation are three independent
// routes to exp(D0 t) and to int_lo^hi exp(D0 s) ds; they agree to 1e-10
// norm-wise relative on random, stiff (rates over 6 decades) and nearly
// degenerate matrices. 1e-10 is about cond(V) eps with cond(V) <= 1e6
// (the automatic rule's bound), far above Pade's and uniformisation's
// own errors (~1e-15 for these sizes).
func TestExpRoutesAgree(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	type mcase struct {
		name string
		a    *mat.Dense
	}
	var cases []mcase
	for i := 0; i < 5; i++ {
		cases = append(cases, mcase{"random", coreD0(t, coreRandomNet(rng, 3+i, i, 2, 0.7+0.06*float64(i)))})
	}
	for i := 0; i < 3; i++ {
		cases = append(cases, mcase{"stiff", coreD0(t, coreRandomNet(rng, 4+i, 2, 6, 1))})
	}
	cases = append(cases,
		mcase{"equal-ring", coreD0(t, coreEqualRing(6, 1))},
		mcase{"near-degenerate-ring", coreD0(t, coreEqualRing(6, 1e-9))},
		mcase{"two-blocks", coreTwoBlocks()},
		mcase{"irreversible-ring", coreD0(t, coreIrreversibleRing(5, 2))},
	)
	for _, c := range cases {
		pa, err := NewPropagator(c.a, ExpPade)
		if err != nil {
			t.Fatal(err)
		}
		pu, err := NewPropagator(c.a, ExpUniform)
		if err != nil {
			t.Fatal(err)
		}
		pauto, err := NewPropagator(c.a, ExpAuto)
		if err != nil {
			t.Fatal(err)
		}
		routes := []*Propagator{pu, pauto}
		if ps, err := NewPropagator(c.a, ExpSpectral); err == nil {
			if cond, _ := ps.Condition(); cond < SpectralMaxCond {
				routes = append(routes, ps)
			}
		}
		for _, tm := range []float64{1e-3, 0.1, 1, 10} {
			var want mat.Dense
			if err := pa.Exp(&want, tm); err != nil {
				t.Fatal(err)
			}
			for _, p := range routes {
				var got mat.Dense
				if err := p.Exp(&got, tm); err != nil {
					t.Fatal(err)
				}
				if r := coreMaxRel(&got, &want); r > 1e-10 {
					t.Errorf("%s: exp(A %g) by %v differs from Pade by %.2g", c.name, tm, p.Method(), r)
				}
			}
			var iw mat.Dense
			if err := pa.Integral(&iw, tm, 1.5*tm+0.01); err != nil {
				t.Fatal(err)
			}
			for _, p := range routes {
				var got mat.Dense
				if err := p.Integral(&got, tm, 1.5*tm+0.01); err != nil {
					t.Fatal(err)
				}
				if r := coreMaxRel(&got, &iw); r > 1e-10 {
					t.Errorf("%s: integral over [%g, %g] by %v differs from Pade by %.2g", c.name, tm, 1.5*tm+0.01, p.Method(), r)
				}
			}
		}
	}
}

// TestExpFallback: the automatic rule keeps the spectral route for a
// well-conditioned matrix with separated eigenvalues and falls back to
// Pade for a defective matrix (irreversible equal-rate ring: one
// eigenvalue of multiplicity N with a single eigenvector), for exactly
// repeated eigenvalues (two identical blocks) and for nearly coincident
// ones (equal-rate ring with detection 1e-9, so that D0 is nearly the
// circulant generator with its double eigenvalues).
func TestExpFallback(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 6))
	p, err := NewPropagator(coreD0(t, coreRandomNet(rng, 4, 1, 1, 1)), ExpAuto)
	if err != nil {
		t.Fatal(err)
	}
	if p.Method() != ExpSpectral {
		cond, gap := p.Condition()
		t.Errorf("random network: route %v (cond %g, gap %g), want spectral", p.Method(), cond, gap)
	}
	for name, a := range map[string]*mat.Dense{
		"irreversible-ring":    coreD0(t, coreIrreversibleRing(4, 1)),
		"two-blocks":           coreTwoBlocks(),
		"near-degenerate-ring": coreD0(t, coreEqualRing(6, 1e-9)),
	} {
		p, err := NewPropagator(a, ExpAuto)
		if err != nil {
			t.Fatal(err)
		}
		if p.Method() != ExpPade {
			cond, gap := p.Condition()
			t.Errorf("%s: route %v (cond %g, gap %g), want the Pade fallback", name, p.Method(), cond, gap)
		}
	}
	// The evaluator reports the fallback too and then cannot use the fast path.
	ev, err := NewNetworkEvaluator(coreIrreversibleRing(4, 1), Options{})
	if err != nil {
		t.Fatal(err)
	}
	if ev.Method() != ExpPade || ev.Fast() {
		t.Errorf("irreversible ring: evaluator route %v, fast %v; want pade, general", ev.Method(), ev.Fast())
	}
}

// TestErlangRing: for a totally irreversible N-state ring with all rates
// k, psi_{+->+}(t) = [exp(D0 t)]_{to(+), from(+)} k is the Erlang(N, k)
// density k^N t^{N-1} e^{-kt}/(N-1)! (design notes, section 8; standard
// phase-type result), here from gonum's distuv.Gamma. D0 is a single
// Jordan block, the hardest case for the spectral route; the automatic
// route (Pade fallback) and uniformisation are checked, to 1e-10 relative
// (Pade's error on a 2x2-scaled Jordan block is ~1e-15). The
// log-likelihood of simulated gaps, one of them made 1000 time units
// longer, is then the sum of ln Erlang densities.
func TestErlangRing(t *testing.T) {
	const k = 1.7
	for _, n := range []int{2, 3, 5} {
		net := coreIrreversibleRing(n, k)
		d0 := coreD0(t, net)
		erl := distuv.Gamma{Alpha: float64(n), Beta: k}
		for _, m := range []ExpMethod{ExpAuto, ExpUniform} {
			p, err := NewPropagator(d0, m)
			if err != nil {
				t.Fatal(err)
			}
			for _, tm := range []float64{0.05, 0.5, 1, 3, 10} {
				var e mat.Dense
				if err := p.Exp(&e, tm); err != nil {
					t.Fatal(err)
				}
				got := e.At(0, n-1) * k // to(+) = 0, from(+) = N-1
				if want := erl.Prob(tm); coreRelErr(got, want, 1e-300) > 1e-10 {
					t.Errorf("N=%d %v: psi(%g) = %.15g, Erlang %.15g", n, p.Method(), tm, got, want)
				}
			}
		}
		d := coreSimulate(t, net, uint64(n), 2, 200, 0)
		// A pause of 1000 time units (psi ~ e^{-1700}, far below the
		// smallest double): the dense route's shift keeps it finite.
		r := &d.Records[1]
		for i := 100; i < len(r.Time); i++ {
			r.Time[i] += 1000
		}
		got, err := LogLik(net, d, Options{})
		if err != nil {
			t.Fatal(err)
		}
		want := 0.0
		for _, r := range d.Records {
			for i := 1; i < len(r.Time); i++ {
				want += erl.LogProb(r.Time[i] - r.Time[i-1])
			}
		}
		if coreRelErr(got, want, 1) > 1e-10 {
			t.Errorf("N=%d: ln L = %.15g, sum of ln Erlang densities %.15g", n, got, want)
		}
	}
}
