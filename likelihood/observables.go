package likelihood

import (
	"errors"
	"fmt"
	"math"

	"edgewise/models"

	"gonum.org/v1/gonum/mat"
)

// Predictor holds the predicted observables of one network seen through one
// detection process: per-label detection probabilities (in Kernels) and a
// dead time delta (in Instrument). It answers the questions a data set
// answers model-free, so that model and data can be compared on equal terms.
//
// # Detection model
//
// After a detected event the chain evolves under the full generator L for
// the dead time delta (every event in it is lost), then under D0 until the
// next detected event. From the state right after an event (the post-event
// state), the next event carries label l' and leaves the chain in state j
// with probability
//
//	(M_l')_ij = [exp(L delta) (-D0)^{-1} D_l']_ij,
//
// so M = sum_l M_l is a stochastic matrix on post-event states and the
// detected events form a Markov renewal process. Without dead time
// M_l = (-D0)^{-1} D_l.
//
// # Conventions
//
//   - phi is the stationary law of M: the law of the post-event state of a
//     stationary event (phi M = phi, sum phi = 1).
//   - The stationary label law is r_l = phi M_l 1 (fraction of events that
//     carry l), and the post-l state law is alpha_l = phi M_l / r_l.
//   - P(l'|l) = alpha_l M_l' 1: the embedded visible chain, the stationary
//     probability that an l event is followed by an l' event. When each
//     label sits on one directed edge the post-event state is known from
//     the label and the label sequence is a Markov chain with this
//     transition matrix (for any detection probability and dead time);
//     with labels on several edges it is not Markov, and P(l'|l) is the
//     stationary pair law only.
//   - psi_{l->l'}(t) = alpha_l exp(L delta) exp(D0 (t - delta)) D_l' 1 for
//     t >= delta and 0 for t < delta, in 1/time; it integrates to P(l'|l).
//   - The mean gap between events is delta + phi exp(L delta) (-D0)^{-1} 1
//     (time units) and the event rate of label l is r_l / (mean gap), in
//     1/time (renewal-reward theorem); without dead time it equals
//     pi D_l 1.
//
// A label that never occurs (no transition with a positive rate) has
// r_l = 0, a zero row in Transition and a zero post-event law.
//
// Frame-limited timestamps (Instrument.Frame) do not change which events are
// detected, so the Predictor ignores the frame length: psi is the density of
// the exact gap.
//
// A Predictor is immutable after construction and safe for concurrent use;
// the Kernels it was built from must not be modified afterwards.
type Predictor struct {
	k     *Kernels
	delta float64
	n, nl int

	e  *mat.Dense   // exp(L delta), identity when delta = 0
	ea *mat.Dense   // exp(L delta) (-D0)^{-1}
	g1 *mat.Dense   // exp(L delta) [delta A + A^2], A = (-D0)^{-1}
	g2 *mat.Dense   // exp(L delta) [delta^2 A + 2 delta A^2 + 2 A^3]
	m  []*mat.Dense // M_l = exp(L delta) A D_l

	pi      []float64   // stationary law of L
	phi     []float64   // stationary post-event law
	r       []float64   // stationary label law
	alpha   [][]float64 // post-l state law
	p       [][]float64 // P(l'|l)
	meanGap float64
	support []int // states that can follow an event (non-zero columns of some D_l)
	rev     []int // reverse label (edges reversed), or -1
}

// NewPredictor builds the predictor of the kernels k under the instrument in.
// It fails when in is invalid, when D0 is singular (some states never reach
// a visible transition) or when the post-event chain has no unique
// stationary law.
func NewPredictor(k *Kernels, in Instrument) (*Predictor, error) {
	if k == nil {
		return nil, errors.New("likelihood: predictor: nil kernels")
	}
	if err := in.Validate(); err != nil {
		return nil, fmt.Errorf("likelihood: predictor: %w", err)
	}
	n, nl := k.N, len(k.D)
	p := &Predictor{k: k, delta: in.DeadTime, n: n, nl: nl}

	// A = (-D0)^{-1}, by subtraction-free elimination.
	absorb := make([]float64, n) // visible (absorbing) rate out of each state
	for l := range k.D {
		for i, x := range obsTimesOnes(k.D[l]) {
			absorb[i] += x
		}
	}
	a, err := obsMSolve(k.D0, absorb, obsIdentity(n))
	if err != nil {
		return nil, fmt.Errorf("likelihood: predictor: %w", err)
	}

	// E = exp(L delta).
	p.e = obsIdentity(n)
	if p.delta > 0 {
		if err := expScaled(p.e, k.L, p.delta); err != nil {
			return nil, fmt.Errorf("likelihood: predictor: %w", err)
		}
		obsClampNeg(p.e)
	}
	p.ea = mat.NewDense(n, n, nil)
	p.ea.Mul(p.e, a)

	// G1 = E (delta A + A^2), G2 = E (delta^2 A + 2 delta A^2 + 2 A^3):
	// E times integral of (delta+s)^k exp(D0 s) ds over s > 0, k = 1, 2.
	var a2, a3 mat.Dense
	a2.Mul(a, a)
	a3.Mul(&a2, a)
	var t1, t2 mat.Dense
	t1.Scale(p.delta, a)
	t1.Add(&t1, &a2)
	p.g1 = mat.NewDense(n, n, nil)
	p.g1.Mul(p.e, &t1)
	t2.Scale(p.delta*p.delta, a)
	var tmp mat.Dense
	tmp.Scale(2*p.delta, &a2)
	t2.Add(&t2, &tmp)
	tmp.Scale(2, &a3)
	t2.Add(&t2, &tmp)
	p.g2 = mat.NewDense(n, n, nil)
	p.g2.Mul(p.e, &t2)

	p.m = make([]*mat.Dense, nl)
	msum := mat.NewDense(n, n, nil)
	inSupport := make([]bool, n)
	for l := range k.D {
		p.m[l] = mat.NewDense(n, n, nil)
		p.m[l].Mul(p.ea, k.D[l])
		obsClampNeg(p.m[l])
		msum.Add(msum, p.m[l])
		for j := 0; j < n; j++ {
			for i := 0; i < n; i++ {
				if k.D[l].At(i, j) > 0 {
					inSupport[j] = true
				}
			}
		}
	}
	for j, ok := range inSupport {
		if ok {
			p.support = append(p.support, j)
		}
	}
	if len(p.support) == 0 {
		return nil, errors.New("likelihood: predictor: no visible transition with a positive rate")
	}

	// phi: stationary law of M, by GTH with a recurrent state (the target of
	// a visible transition) placed first.
	rows := make([][]float64, n)
	for i := range rows {
		rows[i] = mat.Row(nil, i, msum)
	}
	phi, err := obsStationaryDTMC(rows, p.support[0])
	if err != nil {
		return nil, fmt.Errorf("likelihood: predictor: post-event chain: %w", err)
	}
	p.phi = phi

	p.r = make([]float64, nl)
	p.alpha = make([][]float64, nl)
	for l := 0; l < nl; l++ {
		v := obsRowTimes(phi, p.m[l])
		s := obsSum(v)
		p.r[l] = s
		if s > 0 {
			for i := range v {
				v[i] /= s
			}
		}
		p.alpha[l] = v
	}
	h := make([][]float64, nl) // h_l = M_l 1
	for l := 0; l < nl; l++ {
		h[l] = obsTimesOnes(p.m[l])
	}
	p.p = make([][]float64, nl)
	for l := 0; l < nl; l++ {
		p.p[l] = make([]float64, nl)
		if p.r[l] == 0 {
			continue
		}
		for l2 := 0; l2 < nl; l2++ {
			p.p[l][l2] = obsDot(p.alpha[l], h[l2])
		}
	}
	p.meanGap = p.delta + obsDot(obsRowTimes(phi, p.ea), obsOnes(n))
	if !(p.meanGap > 0) || math.IsInf(p.meanGap, 0) {
		return nil, fmt.Errorf("likelihood: predictor: mean gap %g is not a positive finite time", p.meanGap)
	}
	p.rev = obsReverseLabels(k)
	lrows := make([][]float64, n)
	for i := range lrows {
		lrows[i] = mat.Row(nil, i, k.L)
	}
	if p.pi, err = obsStationaryDTMC(lrows, 0); err != nil {
		return nil, fmt.Errorf("likelihood: predictor: stationary law: %w", err)
	}
	return p, nil
}

// NumLabels returns the number of labels.
func (p *Predictor) NumLabels() int { return p.nl }

// DeadTime returns the dead time delta the predictor was built with.
func (p *Predictor) DeadTime() float64 { return p.delta }

// Transition returns P(l'|l) as a fresh nl x nl slice: row l is the law of
// the label of the event after an l event. Rows sum to 1, except the zero
// row of a label that never occurs.
func (p *Predictor) Transition() [][]float64 {
	out := make([][]float64, p.nl)
	for l := range out {
		out[l] = append([]float64(nil), p.p[l]...)
	}
	return out
}

// Embedded returns a copy of M_l = exp(L delta) (-D0)^{-1} D_l: from the
// post-event state i, the probability that the next detected event carries
// label l and leaves the chain in state j. It panics if l is not a label
// index.
func (p *Predictor) Embedded(l int) *mat.Dense { return mat.DenseCopyOf(p.m[l]) }

// PostEventLaw returns alpha_l, the law of the state right after a
// stationary l event (before the dead time runs). It is zero for a label
// that never occurs. It panics if l is not a label index.
func (p *Predictor) PostEventLaw(l int) []float64 { return append([]float64(nil), p.alpha[l]...) }

// StationaryPostEvent returns phi, the law of the post-event state of a
// stationary event, whatever its label.
func (p *Predictor) StationaryPostEvent() []float64 { return append([]float64(nil), p.phi...) }

// LabelLaw returns r_l, the stationary law of the label sequence: the
// fraction of detected events that carry label l. It sums to 1.
func (p *Predictor) LabelLaw() []float64 { return append([]float64(nil), p.r...) }

// Stationary returns pi, the stationary law of the network (pi L = 0).
func (p *Predictor) Stationary() []float64 { return append([]float64(nil), p.pi...) }

// MeanGap returns the mean time between consecutive detected events,
// delta + phi exp(L delta) (-D0)^{-1} 1, in time units.
func (p *Predictor) MeanGap() float64 { return p.meanGap }

// Rates returns the stationary rate of each label in 1/time: r_l divided by
// the mean gap (renewal-reward theorem). Without dead time it equals
// sum_i pi_i (D_l 1)_i.
func (p *Predictor) Rates() []float64 {
	out := make([]float64, p.nl)
	for l := range out {
		out[l] = p.r[l] / p.meanGap
	}
	return out
}

// Reverse returns the label whose directed edges are exactly the reversed
// edges of label l, or -1 when there is none. It panics if l is not a label
// index.
func (p *Predictor) Reverse(l int) int { return p.rev[l] }

// EffectiveAffinity returns F = ln[P(plus|plus) / P(minus|minus)] in k_B T,
// the effective affinity of a single visible edge whose two directions carry
// the labels plus and minus. It is +Inf when P(minus|minus) = 0 <
// P(plus|plus) (for instance a one-way edge: minus never occurs), -Inf in
// the mirror case, and NaN when both are 0 (F is then undefined, as for a
// two-state network). The formula is evaluated for any two labels; its
// meaning as an affinity needs them to be each other's reverse. It panics if
// plus or minus is not a label index.
//
// F is a ratio of sums of products of rates, so a network with rates of
// 1e300 and 1e-300 has a finite F whose P(minus|minus) underflows. When
// every label sits on one directed edge and there is no dead time, both
// probabilities are computed in log space (logTransition), which gives F
// to full relative accuracy over the whole float64 range of rates.
// Otherwise F comes from Transition, and a probability that is 0 there but
// positive in exact arithmetic (a path exists) makes F NaN: not computable
// in float64, never an infinite value standing for a finite one.
func (p *Predictor) EffectiveAffinity(plus, minus int) float64 {
	if la, ok := p.logTransition(plus, plus); ok {
		lb, _ := p.logTransition(minus, minus)
		inf := math.Inf(-1)
		switch {
		case la == inf && lb == inf:
			return math.NaN()
		case lb == inf:
			return math.Inf(1)
		case la == inf:
			return math.Inf(-1)
		}
		return la - lb
	}
	a, b := p.p[plus][plus], p.p[minus][minus]
	if (a == 0 && p.canFollow(plus, plus)) || (b == 0 && p.canFollow(minus, minus)) {
		return math.NaN()
	}
	switch {
	case a == 0 && b == 0:
		return math.NaN()
	case b == 0:
		return math.Inf(1)
	case a == 0:
		return math.Inf(-1)
	}
	return math.Log(a) - math.Log(b)
}

// Current returns the visible current J = sum_l q_l nu_l (nu_l the rate of
// label l, so J is in 1/time) of the counting process c(t) = sum_l q_l N_l(t)
// and its diffusion coefficient D, Var c(t) ~ 2 D t (in 1/time). For a
// single visible edge use q = +1 on the plus label and -1 on the minus
// label.
//
// Both come from the scaled cumulant generating function lambda(s): the
// detected events form a Markov renewal process with Laplace-transformed
// kernel
//
//	K(s, lambda) = e^{-lambda delta} exp(L delta) (lambda - D0)^{-1} sum_l e^{s q_l} D_l,
//
// and lambda(s) is the root of rho(K(s, lambda)) = 1, rho the Perron root.
// J = d lambda/ds and D = (1/2) d^2 lambda/ds^2 at s = 0 follow exactly by implicit
// differentiation, with first- and second-order perturbation of the Perron
// root of M = K(0, 0) (group inverse of I - M). Without dead time they
// coincide with the derivatives of the largest eigenvalue of the tilted
// generator D0 + sum_l e^{s q_l} D_l.
//
// J is a difference of label rates, so its relative accuracy is about
// 1e-16 sum_l |q_l| nu_l / |J|: near stalling it loses the digits that
// cancel.
func (p *Predictor) Current(q []float64) (J, D float64, err error) {
	if err := p.checkWeights(q); err != nil {
		return 0, 0, err
	}
	n := p.n
	dq := mat.NewDense(n, n, nil)
	dq2 := mat.NewDense(n, n, nil)
	dall := mat.NewDense(n, n, nil)
	var tmp mat.Dense
	for l, x := range q {
		dall.Add(dall, p.k.D[l])
		if x == 0 {
			continue
		}
		tmp.Scale(x, p.k.D[l])
		dq.Add(dq, &tmp)
		tmp.Scale(x*x, p.k.D[l])
		dq2.Add(dq2, &tmp)
	}
	mul := func(a, b mat.Matrix) *mat.Dense {
		var c mat.Dense
		c.Mul(a, b)
		return &c
	}
	ks := mul(p.ea, dq)
	kss := mul(p.ea, dq2)
	kl := mul(p.g1, dall)
	kl.Scale(-1, kl)
	kll := mul(p.g2, dall)
	ksl := mul(p.g1, dq)
	ksl.Scale(-1, ksl)

	// Fundamental matrix Z = (I - M + 1 phi)^{-1}: r = Z b solves
	// (I - M) r = b with phi r = 0 whenever phi b = 0.
	msum := mat.NewDense(n, n, nil)
	for _, m := range p.m {
		msum.Add(msum, m)
	}
	zinv := obsIdentity(n)
	zinv.Sub(zinv, msum)
	for i := 0; i < n; i++ {
		for j := 0; j < n; j++ {
			zinv.Set(i, j, zinv.At(i, j)+p.phi[j])
		}
	}
	var lu mat.LU
	lu.Factorize(zinv)
	if c := lu.Cond(); !(c < 1e14) {
		return 0, 0, fmt.Errorf("likelihood: current: fundamental matrix of the post-event chain is singular (condition %.3g)", c)
	}
	ones := obsOnes(n)
	phiK1 := func(k *mat.Dense) float64 { return obsDot(obsRowTimes(p.phi, k), ones) }
	solve := func(k *mat.Dense, rho float64) ([]float64, error) {
		b := obsTimesOnes(k)
		for i := range b {
			b[i] -= rho
		}
		x := mat.NewVecDense(n, nil)
		if err := lu.SolveVecTo(x, false, mat.NewVecDense(n, b)); err != nil {
			var cond mat.Condition
			if !errors.As(err, &cond) {
				return nil, err
			}
		}
		return x.RawVector().Data, nil
	}
	rhoS := phiK1(ks)
	rhoL := phiK1(kl) // = -mean gap
	rs, err := solve(ks, rhoS)
	if err != nil {
		return 0, 0, fmt.Errorf("likelihood: current: %w", err)
	}
	rl, err := solve(kl, rhoL)
	if err != nil {
		return 0, 0, fmt.Errorf("likelihood: current: %w", err)
	}
	phiKr := func(k *mat.Dense, r []float64) float64 { return obsDot(obsRowTimes(p.phi, k), r) }
	rhoSS := phiK1(kss) + 2*phiKr(ks, rs)
	rhoSL := phiK1(ksl) + phiKr(ks, rl) + phiKr(kl, rs)
	rhoLL := phiK1(kll) + 2*phiKr(kl, rl)
	if !(rhoL < 0) {
		return 0, 0, fmt.Errorf("likelihood: current: d rho / d lambda = %g, want < 0", rhoL)
	}
	d1 := -rhoS / rhoL
	d2 := -(rhoSS + 2*rhoSL*d1 + rhoLL*d1*d1) / rhoL
	return d1, d2 / 2, nil
}

// SCGF returns the scaled cumulant generating function
// lambda(s) = lim_{t->inf} (1/t) ln E[exp(s c(t))] of the counting process
// c(t) = sum_l q_l N_l(t), in 1/time. Without dead time it is the largest
// eigenvalue of the tilted generator L(s) = D0 + sum_l e^{s q_l} D_l; with
// a dead time it is the root lambda of rho(K(s, lambda)) = 1 (see Current),
// found by bisection to machine precision. lambda(0) = 0, lambda'(0) = J.
func (p *Predictor) SCGF(s float64, q []float64) (float64, error) {
	if err := p.checkWeights(q); err != nil {
		return 0, err
	}
	if math.IsNaN(s) || math.IsInf(s, 0) {
		return 0, fmt.Errorf("likelihood: scgf: s = %v is not finite", s)
	}
	ds := p.tiltedD(s, q)
	if p.delta == 0 {
		var g mat.Dense
		g.Add(p.k.D0, ds)
		return obsPerronReal(&g)
	}
	return p.scgfRenewal(ds)
}

// tiltedD returns sum_l e^{s q_l} D_l.
func (p *Predictor) tiltedD(s float64, q []float64) *mat.Dense {
	ds := mat.NewDense(p.n, p.n, nil)
	var tmp mat.Dense
	for l, x := range q {
		tmp.Scale(math.Exp(s*x), p.k.D[l])
		ds.Add(ds, &tmp)
	}
	return ds
}

// scgfRenewal solves rho(K(lambda)) = 1 for lambda, with
// K(lambda) = e^{-lambda delta} exp(L delta) (lambda - D0)^{-1} ds.
// rho is decreasing in lambda on (a, inf), a the spectral abscissa of D0.
func (p *Predictor) scgfRenewal(ds *mat.Dense) (float64, error) {
	n := p.n
	rho := func(lam float64) (float64, bool) {
		var m mat.Dense
		m.Scale(-1, p.k.D0)
		for i := 0; i < n; i++ {
			m.Set(i, i, m.At(i, i)+lam)
		}
		var lu mat.LU
		lu.Factorize(&m)
		if !(lu.Cond() < 1e14) {
			return 0, false
		}
		var rr mat.Dense
		if err := lu.SolveTo(&rr, false, ds); err != nil {
			var cond mat.Condition
			if !errors.As(err, &cond) {
				return 0, false
			}
		}
		var k mat.Dense
		k.Mul(p.e, &rr)
		k.Scale(math.Exp(-lam*p.delta), &k)
		v, err := obsPerronReal(&k)
		if err != nil {
			return 0, false
		}
		return v, true
	}
	abscissa, err := obsPerronReal(p.k.D0)
	if err != nil {
		return 0, fmt.Errorf("likelihood: scgf: %w", err)
	}
	// Bracket [lo, hi] with rho(lo) > 1 > rho(hi).
	scale := 1.0
	for i := 0; i < n; i++ {
		scale = math.Max(scale, -p.k.D0.At(i, i))
	}
	hi := 0.0
	for it := 0; ; it++ {
		v, ok := rho(hi)
		if ok && v < 1 {
			break
		}
		if it > 200 {
			return 0, errors.New("likelihood: scgf: no upper bracket")
		}
		hi += scale
		scale *= 2
	}
	// Walk lo geometrically down towards the abscissa until rho(lo) > 1.
	lo := hi
	for {
		lo = abscissa + (lo-abscissa)/2
		if lo-abscissa < 1e-13*math.Max(1, math.Abs(abscissa)) {
			return 0, errors.New("likelihood: scgf: no root above the spectral abscissa of D0")
		}
		if v, ok := rho(lo); ok && v > 1 {
			break
		}
	}
	for it := 0; it < 200 && hi-lo > 4e-16*math.Max(1, math.Abs(lo)); it++ {
		mid := lo + (hi-lo)/2
		if mid == lo || mid == hi {
			break
		}
		v, ok := rho(mid)
		if !ok || v > 1 {
			lo = mid
		} else {
			hi = mid
		}
	}
	return lo + (hi-lo)/2, nil
}

// checkWeights validates a per-label weight vector.
func (p *Predictor) checkWeights(q []float64) error {
	if len(q) != p.nl {
		return fmt.Errorf("likelihood: %d label weights for %d labels", len(q), p.nl)
	}
	for l, x := range q {
		if math.IsNaN(x) || math.IsInf(x, 0) {
			return fmt.Errorf("likelihood: weight %v of label %q is not finite", x, p.k.Labels[l])
		}
	}
	return nil
}

// obsPerronReal returns the largest real part among the eigenvalues of a,
// which for an irreducible Metzler or non-negative matrix is its real,
// simple Perron root.
func obsPerronReal(a mat.Matrix) (float64, error) {
	var eig mat.Eigen
	if !eig.Factorize(a, mat.EigenNone) {
		return 0, errors.New("eigenvalue decomposition failed")
	}
	best := math.Inf(-1)
	for _, v := range eig.Values(nil) {
		if real(v) > best {
			best = real(v)
		}
	}
	return best, nil
}

// obsStationaryDTMC returns the stationary law of the stochastic matrix
// rows (row i = transition probabilities out of i) by the
// Grassmann-Taksar-Heyman reduction on the off-diagonal entries; the same
// reduction gives the stationary law of a generator (rows = rates). The
// state first must be recurrent; transient states get probability 0.
func obsStationaryDTMC(rows [][]float64, first int) ([]float64, error) {
	k := len(rows)
	perm := make([]int, 0, k) // perm[new] = old
	perm = append(perm, first)
	for i := 0; i < k; i++ {
		if i != first {
			perm = append(perm, i)
		}
	}
	a := make([][]float64, k)
	for i := range a {
		a[i] = make([]float64, k)
		for j := range a[i] {
			if i != j {
				a[i][j] = math.Max(0, rows[perm[i]][perm[j]])
			}
		}
	}
	x, bad := models.GTH(a)
	if bad >= 0 {
		return nil, fmt.Errorf("no unique stationary law (state %d is closed after reduction)", perm[bad])
	}
	if x == nil {
		return nil, fmt.Errorf("no unique stationary law (normalisation failed)")
	}
	out := make([]float64, k)
	for i := range x {
		out[perm[i]] = x[i]
	}
	return out, nil
}

// obsMSolve solves (-D0) X = R for a sub-generator D0 and a non-negative
// right-hand side R, where absorb[i] = -sum_j D0_ij >= 0 is the rate at
// which state i leaves the transient set. It is Gaussian elimination in
// the order 0, 1, ..., with every pivot recomputed as the sum of the
// remaining outflows (absorb plus off-diagonal rates), as in the
// Grassmann-Taksar-Heyman reduction: the elimination and the back
// substitution add and multiply non-negative numbers only, so each entry
// of X keeps high relative accuracy however stiff the rates. It fails when
// a pivot vanishes (a closed set of states never leaves).
func obsMSolve(d0 *mat.Dense, absorb []float64, r *mat.Dense) (*mat.Dense, error) {
	n, _ := d0.Dims()
	_, m := r.Dims()
	h := make([][]float64, n)
	for i := range h {
		h[i] = make([]float64, n)
		for k := 0; k < n; k++ {
			if k != i {
				h[i][k] = math.Max(0, d0.At(i, k))
			}
		}
	}
	av := append([]float64(nil), absorb...)
	x := mat.DenseCopyOf(r)
	piv := make([]float64, n)
	for s := 0; s < n; s++ {
		d := av[s]
		for k := s + 1; k < n; k++ {
			d += h[s][k]
		}
		if !(d > 0) {
			return nil, fmt.Errorf("-D0 is singular: state %d (with the states before it) never reaches a visible transition", s)
		}
		piv[s] = d
		for i := s + 1; i < n; i++ {
			f := h[i][s] / d
			if f == 0 {
				continue
			}
			for k := s + 1; k < n; k++ {
				if k != i {
					h[i][k] += f * h[s][k]
				}
			}
			av[i] += f * av[s]
			for j := 0; j < m; j++ {
				x.Set(i, j, x.At(i, j)+f*x.At(s, j))
			}
		}
	}
	for s := n - 1; s >= 0; s-- {
		for j := 0; j < m; j++ {
			v := x.At(s, j)
			for k := s + 1; k < n; k++ {
				v += h[s][k] * x.At(k, j)
			}
			x.Set(s, j, v/piv[s])
		}
	}
	return x, nil
}

// obsReverseLabels maps each label to the label carried by exactly its
// reversed directed edges, or -1. Directed edges are (edge, direction):
// with parallel edges, the reverse of a jump along one channel runs back
// along the same channel, not along its parallel neighbour.
func obsReverseLabels(k *Kernels) []int {
	rev := make([]int, len(k.Edges))
	set := func(l int, flip bool) map[[2]int]bool {
		s := make(map[[2]int]bool, len(k.Edges[l]))
		for _, t := range k.Edges[l] {
			if flip {
				s[[2]int{t.Edge, 1 - t.Dir}] = true
			} else {
				s[[2]int{t.Edge, t.Dir}] = true
			}
		}
		return s
	}
	for l := range rev {
		rev[l] = -1
		if len(k.Edges[l]) == 0 {
			continue
		}
		want := set(l, true)
		for l2 := range k.Edges {
			have := set(l2, false)
			if l2 == l || len(have) != len(want) {
				continue
			}
			ok := true
			for e := range have {
				if !want[e] {
					ok = false
					break
				}
			}
			if ok {
				rev[l] = l2
				break
			}
		}
	}
	return rev
}

func obsIdentity(n int) *mat.Dense {
	m := mat.NewDense(n, n, nil)
	for i := 0; i < n; i++ {
		m.Set(i, i, 1)
	}
	return m
}

// obsClampNeg sets to zero the entries of a that are negative by rounding
// (a is non-negative in exact arithmetic).
func obsClampNeg(a *mat.Dense) {
	r, c := a.Dims()
	for i := 0; i < r; i++ {
		for j := 0; j < c; j++ {
			if a.At(i, j) < 0 {
				a.Set(i, j, 0)
			}
		}
	}
}

func obsOnes(n int) []float64 {
	v := make([]float64, n)
	for i := range v {
		v[i] = 1
	}
	return v
}

func obsSum(v []float64) float64 {
	s := 0.0
	for _, x := range v {
		s += x
	}
	return s
}

func obsDot(a, b []float64) float64 {
	s := 0.0
	for i := range a {
		s += a[i] * b[i]
	}
	return s
}

// obsRowTimes returns the row vector v a.
func obsRowTimes(v []float64, a mat.Matrix) []float64 {
	_, c := a.Dims()
	out := make([]float64, c)
	for i, x := range v {
		if x == 0 {
			continue
		}
		for j := 0; j < c; j++ {
			out[j] += x * a.At(i, j)
		}
	}
	return out
}

// obsTimesOnes returns the row sums a 1.
func obsTimesOnes(a mat.Matrix) []float64 {
	r, c := a.Dims()
	out := make([]float64, r)
	for i := 0; i < r; i++ {
		for j := 0; j < c; j++ {
			out[i] += a.At(i, j)
		}
	}
	return out
}
