package likelihood

import (
	"math"
	"math/rand/v2"
	"testing"
)

// TestLogTransitionAgainstMatrix: the log-space elimination gives the same
// ln P(l'|l) as the embedded chain (-D0)^{-1} D_l of the Predictor (an LU
// route), on random networks of 3-7 states with rates over 4 decades and
// detection 1 or 0.8, to 1e-11 relative (both routes are backward stable;
// the LU route's error grows with the condition of D0, about 1e4 here).
func TestLogTransitionAgainstMatrix(t *testing.T) {
	rng := rand.New(rand.NewPCG(8, 9))
	for i := 0; i < 40; i++ {
		det := 1.0
		if i%2 == 1 {
			det = 0.8
		}
		net := coreRandomNet(rng, 3+i%5, i%4, 4, det)
		p := obsPredictor(t, net, 0)
		P := p.Transition()
		for l := 0; l < 2; l++ {
			for l2 := 0; l2 < 2; l2++ {
				lp, ok := p.logTransition(l, l2)
				if !ok {
					t.Fatal("log route did not apply to single-edge labels")
				}
				if math.Abs(math.Exp(lp)-P[l][l2]) > 1e-11*P[l][l2] {
					t.Errorf("net %d: P(%d|%d) log route %.15g, matrix %.15g", i, l2, l, math.Exp(lp), P[l][l2])
				}
			}
		}
	}
	// Not applicable: dead time, or a label on two edges.
	if _, ok := obsPredictor(t, obsRing([]float64{1, 2, 3}, []float64{1, 1, 1}, 1), 0.1).logTransition(0, 0); ok {
		t.Error("log route used with a dead time")
	}
	if _, ok := obsPredictor(t, coreMultiNet(rng, 4, 0, 1, 1), 0).logTransition(0, 0); ok {
		t.Error("log route used for a label on two edges")
	}
}

// TestEffectiveAffinityExtremeRates: rings with rates of 1e300 and 1e-300
// (P(-|-) ~ 1e-600 underflows) give the finite F equal to the cycle
// affinity ln(prod u / prod w), summed in logs (Polettini and Esposito,
// PRL 119, 240601 (2017): F is the cycle affinity of a unicyclic network
// with perfect detection), to 1e-13 relative: F = 1384.26 for the ring
// below, where the matrix route gave +Inf. With labels on two edges (no log
// route) the underflow gives NaN, not an infinite F; a one-way edge still gives
// +Inf.
func TestEffectiveAffinityExtremeRates(t *testing.T) {
	u := []float64{3, 1e300, 1.5}
	w := []float64{0.6, 0.5, 1e-300} // w[j]: rate j -> j-1 (obsRing)
	net := obsRing(u, w, 1)
	want := math.Log(3) + math.Log(1e300) + math.Log(1.5) - math.Log(0.6) - math.Log(0.5) - math.Log(1e-300)
	A := obsCycleAffinity(t, net)
	if math.Abs(A-want) > 1e-13*want {
		t.Fatalf("cycle affinity %.15g, want %.15g", A, want)
	}
	p := obsPredictor(t, net, 0)
	if p.Transition()[1][1] != 0 {
		t.Fatalf("P(-|-) = %g: the case does not underflow, test too weak", p.Transition()[1][1])
	}
	if F := p.EffectiveAffinity(0, 1); math.Abs(F-want) > 1e-13*want {
		t.Errorf("F = %.15g, want %.15g", F, want)
	}
	// Labels on two edges each (+ on A->B and C->D): no log route.
	multi := obsRing([]float64{1e300, 1, 1e300, 1}, []float64{1e-300, 1, 1e-300, 1}, 1)
	multi.Edges[2].Label = [2]int{0, 1}
	pm := obsPredictor(t, multi, 0)
	if pm.Transition()[1][1] != 0 || !pm.canFollow(1, 1) {
		t.Fatalf("multi-edge case: P(-|-) = %g, canFollow %v: test too weak", pm.Transition()[1][1], pm.canFollow(1, 1))
	}
	if F := pm.EffectiveAffinity(0, 1); !math.IsNaN(F) {
		t.Errorf("labels on two edges: F = %g, want NaN (underflow)", F)
	}
	oneWay := obsRing([]float64{3, 2, 1.5}, []float64{0.6, 0, 1}, 1) // no B -> A: "-" never occurs
	for _, dead := range []float64{0, 0.01} {
		if F := obsPredictor(t, oneWay, dead).EffectiveAffinity(0, 1); !math.IsInf(F, 1) {
			t.Errorf("one-way edge, dead time %g: F = %g, want +Inf", dead, F)
		}
	}
}
