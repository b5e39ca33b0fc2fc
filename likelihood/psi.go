package likelihood

import (
	"math"

	"gonum.org/v1/gonum/mat"
)

// Psi returns the inter-transition time density psi_{l->l2}(t) at each time
// in t (1/time): the density of the gap from a stationary l event to the
// next detected event, jointly with that event carrying l2,
//
//	psi_{l->l2}(t) = alpha_l exp(L delta) exp(D0 (t - delta)) D_l2 1   for t >= delta,
//	psi_{l->l2}(t) = 0                                                 for t < delta,
//
// with alpha_l the post-l state law (see Predictor). It integrates over t
// to P(l2|l) and holds for labels on several edges too. A NaN time gives
// NaN. Each value costs one matrix exponential (gonum's Pade
// approximation, guarded: a time so large that D0 t overflows is computed
// by halving and squaring, and psi there is 0 to machine precision, as
// exp(D0 t) -> 0). It panics if l or l2 is not a label index.
func (p *Predictor) Psi(l, l2 int, t []float64) []float64 {
	out := make([]float64, len(t))
	v := obsRowTimes(p.alpha[l], p.e) // alpha_l exp(L delta)
	w := obsTimesOnes(p.k.D[l2])      // D_l2 1
	if obsSum(v) == 0 || obsSum(w) == 0 {
		for i, x := range t {
			if math.IsNaN(x) {
				out[i] = math.NaN()
			}
		}
		return out
	}
	var e mat.Dense
	for i, x := range t {
		switch {
		case math.IsNaN(x):
			out[i] = math.NaN()
			continue
		case x < p.delta:
			continue
		case math.IsInf(x, 1):
			continue
		}
		if err := expScaled(&e, p.k.D0, x-p.delta); err != nil {
			// Only a non-finite result can fail here; exp(D0 t) of a
			// sub-generator is bounded by 1, so this does not happen for
			// valid kernels: report the density as not computable.
			out[i] = math.NaN()
			continue
		}
		val := obsDot(obsRowTimes(v, &e), w)
		out[i] = math.Max(0, val)
	}
	return out
}

// PsiMoments returns the first two partial moments of psi_{l->l2},
//
//	m1 = integral t psi_{l->l2}(t) dt   = alpha_l exp(L delta) (delta A + A^2) D_l2 1,
//	m2 = integral t^2 psi_{l->l2}(t) dt = alpha_l exp(L delta) (delta^2 A + 2 delta A^2 + 2 A^3) D_l2 1,
//
// with A = (-D0)^{-1} (integral s^k exp(D0 s) ds = k! A^{k+1}), in time and
// time^2 units. They are joint with the next label: the mean gap of l -> l2
// pairs is m1 / P(l2|l) and its second moment m2 / P(l2|l). It panics if l
// or l2 is not a label index.
func (p *Predictor) PsiMoments(l, l2 int) (m1, m2 float64) {
	w := obsTimesOnes(p.k.D[l2])
	m1 = obsDot(obsRowTimes(p.alpha[l], p.g1), w)
	m2 = obsDot(obsRowTimes(p.alpha[l], p.g2), w)
	return m1, m2
}
