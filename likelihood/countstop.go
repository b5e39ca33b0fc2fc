package likelihood

import (
	"errors"
	"fmt"
	"math"
)

// CountDist is the law of an integer-valued current c, conditioned on an
// event of probability Weight.
type CountDist struct {
	C      []int     // values of c, consecutive and increasing
	P      []float64 // P[i] = Pr(c = C[i] | event); sums to 1 when Weight > 0, else all 0
	Weight float64   // probability of the conditioning event; 1 when unconditioned
}

// LawTail bounds the probability mass an exact law of c leaves out: the
// Poisson tail of the fixed-time law's uniformisation sum, and, in every
// law, the values of c whose probability is below the float64 range
// (stored as 0). A count that a law gives probability 0 is therefore
// improbable, not impossible, unless it lies outside [-n, n] of a
// count-stopped window.
const LawTail = fixedTimeTail

// Prob returns Pr(c | event), 0 outside the support.
func (d CountDist) Prob(c int) float64 {
	if len(d.C) == 0 {
		return 0
	}
	i := c - d.C[0]
	if i < 0 || i >= len(d.P) {
		return 0
	}
	return d.P[i]
}

// Mean returns the mean of c.
func (d CountDist) Mean() float64 {
	m := 0.0
	for i, c := range d.C {
		m += float64(c) * d.P[i]
	}
	return m
}

// Var returns the variance of c.
func (d CountDist) Var() float64 {
	m := d.Mean()
	v := 0.0
	for i, c := range d.C {
		x := float64(c) - m
		v += x * x * d.P[i]
	}
	return v
}

// LogRatio returns, for each c > 0 with both Pr(c) and Pr(-c) above floor,
// the fluctuation log-ratio ln[Pr(c) / Pr(-c)].
func (d CountDist) LogRatio(floor float64) (c []int, r []float64) {
	for i, x := range d.C {
		if x <= 0 {
			continue
		}
		a, b := d.P[i], d.Prob(-x)
		if a > floor && b > floor {
			c = append(c, x)
			r = append(r, math.Log(a)-math.Log(b))
		}
	}
	return c, r
}

// CountStopped returns the exact law of the current c = sum_k q_{l_k} over
// a window of n consecutive detected events l_1, ..., l_n of the stationary
// label sequence. The window's first event is a stationary event: its label
// and post-event state have the joint law phi M_l1 (phi the stationary
// post-event law of the event before it); each later event follows with the
// kernels M_l (see Predictor). So c counts all n events and the window spans
// n - 1 gaps.
//
// With postSelect the law is conditioned on the first label being the
// reverse of the last one (l_1 = Reverse(l_n)); Weight is then the
// probability of that event. For a single visible edge (q = +1, -1) whose
// label sequence is Markov (each label on one directed edge, any detection
// probability and dead time), the post-selected law obeys
// ln[P_n(c)/P_n(-c)] = F c exactly for every n, F = EffectiveAffinity.
//
// The computation is a dynamic programme over (post-event state, c) on the
// states that can follow an event, with cost O(n * n(qmax - qmin) * nnz(M)).
// n must be >= 1 (>= 2 with postSelect), len(q) the number of labels.
func (p *Predictor) CountStopped(n int, q []int, postSelect bool) (CountDist, error) {
	if err := p.checkCount(n, q); err != nil {
		return CountDist{}, err
	}
	w := p.newWindow(q)
	if !postSelect {
		all := make([]int, 0, p.nl)
		for l := 0; l < p.nl; l++ {
			all = append(all, l)
		}
		return w.finish(w.run(n, all), n, all), nil
	}
	if n < 2 {
		return CountDist{}, fmt.Errorf("likelihood: count-stopped: post-selection needs n >= 2, got %d", n)
	}
	acc := make([]float64, w.width(n))
	found := false
	for a := 0; a < p.nl; a++ {
		b := p.rev[a]
		if b < 0 {
			continue
		}
		found = true
		if p.r[a] == 0 {
			continue
		}
		d := w.finish(w.run(n, []int{a}), n, []int{b})
		for i := range acc {
			acc[i] += d.P[i] * d.Weight
		}
	}
	if !found {
		return CountDist{}, errors.New("likelihood: count-stopped: post-selection needs a label whose reverse is also a label")
	}
	return obsNormalize(acc, n*w.qlo), nil
}

// CountStoppedEnds returns the count-stopped law of c split by the first
// and last labels of the window: out[a][b] is the law of c given l_1 = a
// and l_n = b, with Weight = Pr(l_1 = a, l_n = b). For a single visible
// edge with a Markov label sequence the window and its time reverse give
//
//	ln[Pr(c, a, b) / Pr(-c, rev b, rev a)] = F (c - (s_a + s_b)/2) + ln(r_a / r_{rev b}),
//
// s = +-1 the sign of a label and r the stationary label law: the boundary
// term that keeps the raw law from obeying ln[P_n(c)/P_n(-c)] = F c at
// finite n. n must be >= 1.
func (p *Predictor) CountStoppedEnds(n int, q []int) ([][]CountDist, error) {
	if err := p.checkCount(n, q); err != nil {
		return nil, err
	}
	w := p.newWindow(q)
	out := make([][]CountDist, p.nl)
	for a := 0; a < p.nl; a++ {
		out[a] = make([]CountDist, p.nl)
		st := w.run(n, []int{a})
		for b := 0; b < p.nl; b++ {
			out[a][b] = w.finish(st, n, []int{b})
		}
	}
	return out, nil
}

func (p *Predictor) checkCount(n int, q []int) error {
	if n < 1 {
		return fmt.Errorf("likelihood: count-stopped: window of %d events, want >= 1", n)
	}
	if len(q) != p.nl {
		return fmt.Errorf("likelihood: count-stopped: %d label weights for %d labels", len(q), p.nl)
	}
	lo, hi := 0, 0
	for _, x := range q {
		lo, hi = min(lo, x), max(hi, x)
	}
	if cells := (float64(n)*float64(hi-lo) + 1) * float64(max(len(p.support), 1)); cells > obsMaxCells {
		return fmt.Errorf("likelihood: count-stopped: n = %d with weights in [%d, %d] over %d post-event states needs %.3g cells per working array, more than %d (%d MiB)", n, lo, hi, len(p.support), cells, obsMaxCells, obsMaxCells*8>>20)
	}
	return nil
}

// obsMaxCells caps the size of the dynamic programmes of CountStopped and
// FixedTime: values of c times states, per working array. A programme
// holds two such arrays of float64 (current and next), so the cap is
// 2 * 8 * 2^24 bytes = 256 MiB of working memory (the dead-time fixed-time
// programme, which keeps four arrays per event layer, is capped on its
// total at the same figure).
const obsMaxCells = 1 << 24

// obsEntry is one non-zero entry of M_l restricted to the post-event states.
type obsEntry struct {
	i, j int
	v    float64
}

// obsWindow holds M_l restricted to the states that can follow an event.
type obsWindow struct {
	q        []int
	qlo, qhi int
	ns       int          // number of post-event states
	init     [][]float64  // per label: phi M_l on the post-event states
	ent      [][]obsEntry // per label: non-zero entries of M_l
	h        [][]float64  // per label: M_l 1 on the post-event states
}

func (p *Predictor) newWindow(q []int) *obsWindow {
	w := &obsWindow{q: q, ns: len(p.support)}
	for _, x := range q {
		w.qlo, w.qhi = min(w.qlo, x), max(w.qhi, x)
	}
	w.init = make([][]float64, p.nl)
	w.ent = make([][]obsEntry, p.nl)
	w.h = make([][]float64, p.nl)
	for l := 0; l < p.nl; l++ {
		full := obsRowTimes(p.phi, p.m[l])
		w.init[l] = make([]float64, w.ns)
		w.h[l] = make([]float64, w.ns)
		for a, i := range p.support {
			w.init[l][a] = full[i]
			for b, j := range p.support {
				if v := p.m[l].At(i, j); v > 0 {
					w.ent[l] = append(w.ent[l], obsEntry{a, b, v})
					w.h[l][a] += v
				}
			}
		}
	}
	return w
}

// width is the number of c values for a window of n events.
func (w *obsWindow) width(n int) int { return n*(w.qhi-w.qlo) + 1 }

// obsState is the joint law of (c, post-event state) after some events:
// v[(c - base)*ns + i], with c in [lo, hi].
type obsState struct {
	v      []float64
	base   int
	lo, hi int
	firsts []int
}

// run returns the law after n-1 events of a window whose first label is in
// firsts.
func (w *obsWindow) run(n int, firsts []int) obsState {
	base := n * w.qlo
	size := w.width(n) * w.ns
	cur := make([]float64, size)
	lo, hi := math.MaxInt, math.MinInt
	for _, a := range firsts {
		c := w.q[a]
		lo, hi = min(lo, c), max(hi, c)
		row := cur[(c-base)*w.ns:]
		for i, x := range w.init[a] {
			row[i] += x
		}
	}
	next := make([]float64, size)
	for k := 2; k < n; k++ {
		clear(next[(lo+w.qlo-base)*w.ns : (hi+w.qhi-base+1)*w.ns])
		for c := lo; c <= hi; c++ {
			row := cur[(c-base)*w.ns : (c-base+1)*w.ns]
			if obsZero(row) {
				continue
			}
			for l, es := range w.ent {
				out := next[(c+w.q[l]-base)*w.ns:]
				for _, e := range es {
					out[e.j] += row[e.i] * e.v
				}
			}
		}
		cur, next = next, cur
		lo, hi = lo+w.qlo, hi+w.qhi
	}
	return obsState{v: cur, base: base, lo: lo, hi: hi, firsts: firsts}
}

// finish applies the last event of the window, restricted to the labels in
// lasts, and returns the normalised law with its weight. For n = 1 the
// single event is both first and last.
func (w *obsWindow) finish(st obsState, n int, lasts []int) CountDist {
	acc := make([]float64, w.width(n))
	if n == 1 {
		for _, b := range lasts {
			for _, a := range st.firsts {
				if a != b {
					continue
				}
				c := w.q[a]
				acc[c-st.base] += obsSum(w.init[a])
			}
		}
		return obsNormalize(acc, st.base)
	}
	for c := st.lo; c <= st.hi; c++ {
		row := st.v[(c-st.base)*w.ns : (c-st.base+1)*w.ns]
		for _, b := range lasts {
			acc[c+w.q[b]-st.base] += obsDot(row, w.h[b])
		}
	}
	return obsNormalize(acc, st.base)
}

// obsNormalize turns unnormalised masses over c = base, base+1, ... into a
// CountDist whose Weight is their total.
func obsNormalize(acc []float64, base int) CountDist {
	d := CountDist{C: make([]int, len(acc)), P: acc}
	for i := range acc {
		d.C[i] = base + i
	}
	d.Weight = obsSum(acc)
	if d.Weight > 0 {
		for i := range acc {
			acc[i] /= d.Weight
		}
	}
	return d
}

// SlopePoint is one pair of opposite currents c > 0 and -c of a
// fluctuation plot: the probabilities (or window counts) Pos at c and Neg
// at -c.
type SlopePoint struct {
	C        float64
	Pos, Neg float64
}

// SymmetrySlope returns the binomial maximum-likelihood slope of
// ln[P(c)/P(-c)] = s c through the origin, the one definition of the
// fluctuation slope shared by data and models: s solves
//
//	g(s) = sum_c c [Pos_c - (Pos_c + Neg_c) sigma(s c)] = 0,   sigma(x) = 1/(1 + e^{-x}),
//
// the score of Pos_c ~ Binomial(Pos_c + Neg_c, sigma(s c)) independent
// over c. With window counts it is the data's maximum-likelihood slope;
// with a model's exact probabilities it is the value that slope tends to
// as the number of windows grows (the estimand). info is
// sum_c c^2 (Pos_c + Neg_c) sigma (1 - sigma) at the root (the observed
// information for counts). g decreases strictly in s, so the root is
// bracketed and found by Newton steps kept inside the bracket (bisection
// when a step leaves it). ok is false, and s is +Inf, -Inf or NaN, when
// every point has weight on one side only (the maximum is at infinity) or
// there is no point.
func SymmetrySlope(pts []SlopePoint) (s, info float64, ok bool) {
	var sp, sn float64
	for _, p := range pts {
		sp += p.C * p.Pos
		sn += p.C * p.Neg
	}
	switch {
	case sp == 0 && sn == 0:
		return math.NaN(), math.NaN(), false
	case sn == 0:
		return math.Inf(1), 0, false
	case sp == 0:
		return math.Inf(-1), 0, false
	}
	score := func(s float64) (g, h float64) {
		for _, p := range pts {
			m := p.Pos + p.Neg
			if m == 0 {
				continue
			}
			pr := 1 / (1 + math.Exp(-s*p.C))
			g += p.C * (p.Pos - m*pr)
			h += p.C * p.C * m * pr * (1 - pr)
		}
		return g, h
	}
	lo, hi := -1.0, 1.0
	for g, _ := score(lo); g < 0; g, _ = score(lo) {
		lo *= 2
	}
	for g, _ := score(hi); g > 0; g, _ = score(hi) {
		hi *= 2
	}
	s = (lo + hi) / 2
	for it := 0; it < 200 && hi-lo > 1e-14*math.Max(1, math.Abs(s)); it++ {
		g, h := score(s)
		if g > 0 {
			lo = s
		} else {
			hi = s
		}
		next := s + g/h
		if !(next > lo && next < hi) || h == 0 {
			next = (lo + hi) / 2
		}
		if math.Abs(next-s) < 1e-15*math.Max(1, math.Abs(s)) {
			s = next
			break
		}
		s = next
	}
	_, info = score(s)
	return s, info, true
}

// SlopeEstimand is a law's value of the fluctuation slope that the data
// estimate (SymmetrySlope over the window counts), with what a test of
// data against it needs.
type SlopeEstimand struct {
	// Slope is SymmetrySlope of the law's probabilities (k_BT per unit of
	// c); +Inf, -Inf or NaN when undefined (Defined false).
	Slope   float64
	Defined bool
	// ScoreVar is E[u^2] per window, u the window's contribution to the
	// score at Slope (u = c (1 - sigma(s c)) for a window with current
	// c > 0, -|c| sigma(s |c|) for c < 0, 0 for c = 0); over W independent
	// windows the data's score at Slope has mean 0 and variance W ScoreVar.
	ScoreVar float64
	// Info is sum_{c>0} c^2 (P(c) + P(-c)) sigma (1 - sigma), the
	// expected information per window, and SlopeVar = ScoreVar / Info^2
	// the variance per window of the data's slope (sandwich form: it
	// holds also where ln[P(c)/P(-c)] is not linear in c), so that the
	// slope of W windows has standard error sqrt(SlopeVar / W).
	Info, SlopeVar float64
}

// SlopeEstimand returns the law's value of the binomial maximum-likelihood
// fluctuation slope (SymmetrySlope over the pairs c > 0, -c of d) with its
// per-window score and slope variances. For the count-stopped law of
// windows of n events (CountStopped) it is the slope the data's windows
// of n events estimate; for the post-selected law, the post-selected
// slope; for FixedTime, the fixed-time slope. A least-squares fit through
// ln[P(c)/P(-c)] is a different estimand and differs from the data's slope
// wherever ln[P(c)/P(-c)] is not linear in c.
func (d CountDist) SlopeEstimand() SlopeEstimand {
	var pts []SlopePoint
	for i, c := range d.C {
		if c <= 0 {
			continue
		}
		pts = append(pts, SlopePoint{C: float64(c), Pos: d.P[i], Neg: d.Prob(-c)})
	}
	s, info, ok := SymmetrySlope(pts)
	e := SlopeEstimand{Slope: s, Defined: ok, Info: info, ScoreVar: math.NaN(), SlopeVar: math.NaN()}
	if !ok {
		return e
	}
	var u2 float64
	for _, p := range pts {
		pr := 1 / (1 + math.Exp(-s*p.C))
		u2 += p.C * p.C * (p.Pos*(1-pr)*(1-pr) + p.Neg*pr*pr)
	}
	e.ScoreVar = u2
	e.SlopeVar = u2 / (info * info)
	return e
}
