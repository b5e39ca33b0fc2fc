package likelihood

import (
	"math"
	"testing"

	"gonum.org/v1/gonum/integrate/quad"
)

// obsQuadNodes returns composite Gauss-Legendre nodes and weights on
// [a, b]: panels of width at most h with 12 nodes each.
func obsQuadNodes(a, b, h float64) (x, w []float64) {
	panels := int(math.Ceil((b - a) / h))
	px, pw := make([]float64, 12), make([]float64, 12)
	for i := 0; i < panels; i++ {
		lo := a + (b-a)*float64(i)/float64(panels)
		hi := a + (b-a)*float64(i+1)/float64(panels)
		quad.Legendre{}.FixedLocations(px, pw, lo, hi)
		x = append(x, px...)
		w = append(w, pw...)
	}
	return x, w
}

// TestObsPsiIntegrates: each psi_{l->l'} integrates to P(l'|l), and its
// partial moments integral t^k psi dt equal PsiMoments, on every test case
// (dead time, missed events, labels on several edges). Quadrature:
// composite 12-point Gauss-Legendre (gonum integrate/quad) on panels of
// width 0.25 from the dead time delta (where psi jumps) to
// delta + 45/gamma, gamma the slowest decay rate of D0, so that the
// neglected tail is below e^{-45}. psi is analytic on each panel and the
// fastest rate is ~10: a 12-point rule on width 0.25 integrates e^{-10t}
// to ~1e-18 relative (error ~ (h k/2)^24/24!); tolerance 1e-10
// absolute on probabilities, 1e-9 relative on moments.
func TestObsPsiIntegrates(t *testing.T) {
	for _, tc := range obsCases() {
		p := obsPredictor(t, tc.net, tc.delta)
		ab, err := obsPerronReal(p.k.D0)
		if err != nil {
			t.Fatal(err)
		}
		x, w := obsQuadNodes(tc.delta, tc.delta+45/(-ab), 0.25)
		P := p.Transition()
		for l := 0; l < p.NumLabels(); l++ {
			for l2 := 0; l2 < p.NumLabels(); l2++ {
				psi := p.Psi(l, l2, x)
				m0, m1, m2 := 0.0, 0.0, 0.0
				for i := range x {
					m0 += w[i] * psi[i]
					m1 += w[i] * psi[i] * x[i]
					m2 += w[i] * psi[i] * x[i] * x[i]
				}
				if math.Abs(m0-P[l][l2]) > 1e-10 {
					t.Errorf("%s: integral of psi_%d->%d = %.15g, P = %.15g", tc.name, l, l2, m0, P[l][l2])
				}
				e1, e2 := p.PsiMoments(l, l2)
				if !obsClose(m1, e1, 1e-9, 1e-6) || !obsClose(m2, e2, 1e-9, 1e-6) {
					t.Errorf("%s: moments of psi_%d->%d: quadrature %.12g %.12g, closed form %.12g %.12g", tc.name, l, l2, m1, m2, e1, e2)
				}
			}
		}
		// Below the dead time psi vanishes.
		if tc.delta > 0 {
			for _, v := range p.Psi(0, 0, []float64{0, tc.delta / 2, tc.delta * 0.999}) {
				if v != 0 {
					t.Errorf("%s: psi = %g inside the dead time", tc.name, v)
				}
			}
		}
	}
}

// TestObsPsiShape: on a unicyclic ring with perfect detection
// psi_{+->+}(t) / psi_{-->-}(t) = e^F for all t (design.md section 8;
// Polettini and Esposito, PRL 119, 240601 (2017)), to 1e-9 relative over
// t in (0, 10] (Pade exponentials accurate to ~1e-13 relative to their
// norm; both densities are above 1e-6 of their peak there). On the
// two-cycle network, whose cycle B-C-D-B avoids the visible edge, the
// ratio is not constant: it must vary by more than 10% over the same range
// (the premise of the shape test, design.md section 3).
func TestObsPsiShape(t *testing.T) {
	ts := make([]float64, 100)
	for i := range ts {
		ts[i] = 0.1 * float64(i+1)
	}
	ring := obsPredictor(t, obsRing([]float64{3, 2, 4, 1}, []float64{1, 0.5, 1, 2}, 1), 0)
	F := ring.EffectiveAffinity(0, 1)
	pp, mm := ring.Psi(0, 0, ts), ring.Psi(1, 1, ts)
	for i := range ts {
		if r := pp[i] / mm[i]; !obsClose(r, math.Exp(F), 1e-9, 0) {
			t.Errorf("ring: psi++/psi-- at t = %g is %.12g, e^F = %.12g", ts[i], r, math.Exp(F))
		}
	}
	two := obsPredictor(t, obsTwoCycle(1), 0)
	pp, mm = two.Psi(0, 0, ts), two.Psi(1, 1, ts)
	lo, hi := math.Inf(1), math.Inf(-1)
	for i := range ts {
		r := pp[i] / mm[i]
		lo, hi = math.Min(lo, r), math.Max(hi, r)
	}
	if !(hi > 1.1*lo) {
		t.Errorf("two-cycle: psi++/psi-- ranges over [%g, %g]: expected a shape difference", lo, hi)
	}
}
