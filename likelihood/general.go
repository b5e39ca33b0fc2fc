package likelihood

import (
	"errors"
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"
)

// stepInfo describes step s of the general recursion of a record.
type stepInfo struct {
	k      int // event index (len(Time) for the censored end)
	lab    int // kernel label, -1 for the censored end (D = identity)
	lo, hi float64
	useG   bool // apply exp(L delta) before exp(D0 t)
}

// generalSteps returns the number of steps of record rec and a function
// that describes step s. Steps: the first event (StartStationary only),
// events 2..n, and the censored end when End is known and later than the
// last event plus the dead time.
func (e *Evaluator) generalSteps(rec *Record, lm *[256]int16, nLab int) (int, func(s int) (stepInfo, error), error) {
	n := rec.Len()
	off := 1
	if e.opt.Start == StartStationary {
		off = 0
	}
	steps := n - off
	hasEnd := false
	if !math.IsNaN(rec.End) {
		if !(rec.End >= rec.Time[n-1]) || math.IsInf(rec.End, 0) {
			return 0, nil, fmt.Errorf("likelihood: record %q: end %v is before the last event (%v) or not finite", rec.ID, rec.End, rec.Time[n-1])
		}
		if e.endTime(rec.End, rec.Time[n-1]) > 0 {
			hasEnd = true
			steps++
		}
	}
	info := func(s int) (stepInfo, error) {
		k := s + off
		if k == n {
			if !hasEnd {
				return stepInfo{}, errors.New("likelihood: internal error: step beyond the record")
			}
			t := e.endTime(rec.End, rec.Time[n-1])
			return stepInfo{k: n, lab: -1, lo: t, hi: t, useG: e.g != nil}, nil
		}
		l := lm[rec.Label[k]]
		if l < 0 {
			return stepInfo{}, fmt.Errorf("likelihood: record %q event %d: label index %d is not in the data's label table (%d labels)", rec.ID, k+1, rec.Label[k], nLab)
		}
		if k == 0 {
			g := rec.Time[0]
			lo, hi, ok := e.firstInterval(g)
			if !ok || math.IsNaN(g) {
				return stepInfo{}, fmt.Errorf("likelihood: record %q event 1: time %v: a stationary start needs a finite time >= 0", rec.ID, g)
			}
			return stepInfo{k: 0, lab: int(l), lo: lo, hi: hi}, nil
		}
		g := rec.Time[k] - rec.Time[k-1]
		lo, hi, ok := e.interval(g, true)
		if !ok {
			return stepInfo{}, gapError(rec, k, g, e.delta)
		}
		return stepInfo{k: k, lab: int(l), lo: lo, hi: hi, useG: e.g != nil}, nil
	}
	return steps, info, nil
}

// coefCacheMax bounds the spectral route's per-goroutine cache of frame
// interval coefficients.
const coefCacheMax = 1 << 16

// coefs fills ws.z (and ws.dz when wantD) with the spectral block
// coefficients of the interval [lo, hi] (lo == hi: exact time) and returns
// the shift. Frame intervals repeat, so they are cached by exact value:
// each costs N complex exponentials, more than a map lookup.
func (e *Evaluator) coefs(ws *work, lo, hi float64, wantD bool) float64 {
	s := e.sp
	var dz []float64
	if wantD {
		dz = ws.dz
	}
	if lo == hi {
		return s.coefExact(lo, ws.z, dz)
	}
	if ws.ccache == nil {
		return s.coefInterval(lo, hi, ws.z, dz)
	}
	n := e.n
	key := [2]float64{lo, hi}
	c, ok := ws.ccache[key]
	if !ok {
		c = make([]float64, 2*n+1)
		c[2*n] = s.coefInterval(lo, hi, c[:n], c[n:2*n])
		if len(ws.ccache) >= coefCacheMax {
			clear(ws.ccache)
		}
		ws.ccache[key] = c
	}
	copy(ws.z, c[:n])
	if wantD {
		copy(ws.dz, c[n:2*n])
	}
	return c[2*n]
}

// propRow sets out = x E(lo, hi) where E is exp(D0 t) (lo == hi) or the
// integral over [lo, hi]. On the spectral route it leaves x W in ws.u0 and
// the block coefficients in ws.z (and ws.dz when wantD).
//
// The result is scaled by e^{-shift}, shift = lmax lo on the spectral
// route and dshift lo on the dense one (lo = t for an exact time), so that
// long gaps do not underflow; the caller adds shift to ln L.
func (e *Evaluator) propRow(ws *work, out, x []float64, lo, hi float64, wantD bool) (shift float64, err error) {
	n := e.n
	if s := e.sp; s != nil {
		shift = e.coefs(ws, lo, hi, wantD)
		rowTimes(ws.u0, x, s.w, n)
		copy(ws.u, ws.u0)
		s.rowBlock(ws.u, ws.z)
		rowTimes(out, ws.u, s.wi, n)
		return shift, nil
	}
	m, err := e.denseE(ws, lo, hi)
	if err != nil {
		return 0, err
	}
	rowTimes(out, x, m, n)
	return e.dshift * lo, nil
}

// propCol sets out = E(lo, hi) b. On the spectral route it leaves
// W^{-1} b in ws.v (before the block product) and uses the coefficients
// already in ws.z when haveZ.
func (e *Evaluator) propCol(ws *work, out, b []float64, lo, hi float64, haveZ bool) error {
	n := e.n
	if s := e.sp; s != nil {
		if !haveZ {
			e.coefs(ws, lo, hi, false)
		}
		timesCol(ws.v, s.wi, b, n)
		copy(ws.y, ws.v)
		s.colBlock(ws.y, ws.z)
		timesCol(out, s.w, ws.y, n)
		return nil
	}
	m, err := e.denseE(ws, lo, hi)
	if err != nil {
		return err
	}
	timesCol(out, m, b, n)
	return nil
}

// denseCacheMax bounds the dense route's per-goroutine cache of
// exponentials by interval (camera-frame data repeat a few values).
const denseCacheMax = 4096

// denseE returns E(lo, hi) on the dense route, scaled by e^{-dshift lo}
// and cached by exact interval: for an exact time t (lo == hi) the shifted
// exp((D0 - dshift I) t); for an interval
//
//	e^{-dshift lo} int_lo^hi exp(D0 s) ds = exp((D0 - dshift I) lo) I(w),
//	I(w) = int_0^w exp(D0 u) du,  w = hi - lo,
//
// both factors bounded, so that a frame far out neither underflows nor
// loses digits in the subnormal range (the caller adds dshift lo to ln L).
// The factors are cached under (lo, lo) and (0, w), the same keys as an
// exact time lo and a box [0, w], which have the same values.
func (e *Evaluator) denseE(ws *work, lo, hi float64) ([]float64, error) {
	return shiftedE(ws.cache, ws.emat, e.n, e.dprop, e.prop, lo, hi)
}

// shiftedE is denseE for a shifted propagator pexp (exp((D0 - s I) t))
// and an unshifted one pint (int_0^w exp(D0 u) du), caching in cache.
func shiftedE(cache map[[2]float64][]float64, emat *mat.Dense, n int, pexp, pint *Propagator, lo, hi float64) ([]float64, error) {
	key := [2]float64{lo, hi}
	if m, ok := cache[key]; ok {
		return m, nil
	}
	var m []float64
	switch {
	case lo == hi:
		if err := pexp.Exp(emat, lo); err != nil {
			return nil, err
		}
		m = append([]float64(nil), emat.RawMatrix().Data...)
	case lo == 0:
		if err := pint.Integral(emat, 0, hi); err != nil {
			return nil, err
		}
		m = append([]float64(nil), emat.RawMatrix().Data...)
	default:
		m1, err := shiftedE(cache, emat, n, pexp, pint, lo, lo)
		if err != nil {
			return nil, err
		}
		m2, err := shiftedE(cache, emat, n, pexp, pint, 0, hi-lo)
		if err != nil {
			return nil, err
		}
		m = make([]float64, n*n)
		for i := 0; i < n; i++ {
			rowTimes(m[i*n:i*n+n], m1[i*n:i*n+n], m2, n)
		}
	}
	if !allFinite(m) {
		return nil, fmt.Errorf("likelihood: exponential over [%v, %v] is not finite", lo, hi)
	}
	if len(cache) >= denseCacheMax {
		clear(cache)
	}
	cache[key] = m
	return m, nil
}

// applyD sets out = x D_l (row) for l >= 0, or copies x for the end step.
func (e *Evaluator) applyDRow(out, x []float64, l int) {
	if l < 0 {
		copy(out, x)
		return
	}
	for j := range out {
		out[j] = 0
	}
	for _, d := range e.dsp[l] {
		out[d.j] += x[d.i] * d.v
	}
}

// applyDCol sets out = D_l b (column) for l >= 0, or copies b.
func (e *Evaluator) applyDCol(out, b []float64, l int) {
	if l < 0 {
		copy(out, b)
		return
	}
	for i := range out {
		out[i] = 0
	}
	for _, d := range e.dsp[l] {
		out[d.i] += d.v * b[d.j]
	}
}

// generalRecord runs the forward recursion of record r:
// alpha_k = alpha_{k-1} exp(L delta) E_k D_{l_k}, scaled to sum 1 at every
// step with ln L accumulating the logs of the scale factors. With the
// gradient it first runs the backward recursion (storing checkpoints),
// then the forward one with the accumulations of gradient.go.
func (e *Evaluator) generalRecord(ws *work, d *Data, lm *[256]int16, r int) error {
	rec := &d.Records[r]
	n := e.n
	steps, info, err := e.generalSteps(rec, lm, len(d.Labels))
	if err != nil {
		return err
	}
	l1 := lm[rec.Label[0]]
	if l1 < 0 {
		return fmt.Errorf("likelihood: record %q event 1: label index %d is not in the data's label table (%d labels)", rec.ID, rec.Label[0], len(d.Labels))
	}
	alpha := ws.alpha
	if err := e.startAlpha(alpha, rec, int(l1)); err != nil {
		return err
	}
	if ws.acc.grad {
		return e.generalGrad(ws, rec, steps, info, int(l1))
	}
	acc := ws.acc
	x := ws.x
	for s := 0; s < steps; s++ {
		st, err := info(s)
		if err != nil {
			return err
		}
		if st.useG {
			rowTimes(x, alpha, e.g, n)
		} else {
			copy(x, alpha)
		}
		lc, err := e.forwardStep(ws, alpha, x, rec, st)
		if err != nil {
			return err
		}
		acc.ll += lc
	}
	return nil
}

// startAlpha sets alpha to the normalised law before the first step of
// record rec, whose first label is l1: pi for a stationary start, else
// w0 D_{l1} normalised.
func (e *Evaluator) startAlpha(alpha []float64, rec *Record, l1 int) error {
	if e.opt.Start == StartStationary {
		copy(alpha, e.pi)
		return nil
	}
	e.applyDRow(alpha, e.w0, l1)
	s := sum(alpha)
	if !(s > 0) {
		return impossible(rec, 0, "first-event probability", s)
	}
	for i := range alpha {
		alpha[i] /= s
	}
	return nil
}

// forwardStep sets alpha to x E(lo, hi) D_l normalised to sum 1 (x =
// alpha exp(L delta), or alpha, prepared by the caller) and returns the log
// of the normalisation, shift included: the step's contribution to ln L.
// Spectral values that lost their accuracy are recomputed by
// uniformisation. It uses ws.alpha2 and ws.u.
func (e *Evaluator) forwardStep(ws *work, alpha, x []float64, rec *Record, st stepInfo) (float64, error) {
	tmp := ws.alpha2
	shift, err := e.propRow(ws, tmp, x, st.lo, st.hi, false)
	if err != nil {
		return 0, err
	}
	if e.sp != nil && e.rowCancels(tmp, ws.u, x, st.lab) {
		if err := e.accurateRow(ws, tmp, x, st.lo, st.hi); err != nil {
			return 0, err
		}
	}
	e.applyDRow(alpha, tmp, st.lab)
	c := sum(alpha)
	if !(c > 0) || c > math.MaxFloat64 {
		return 0, impossible(rec, st.k, "density", c)
	}
	for i := range alpha {
		alpha[i] /= c
	}
	return math.Log(c) + shift, nil
}
