package likelihood

import (
	"errors"
	"fmt"
	"math"
	"runtime"
	"sync"
	"sync/atomic"
)

// Probability integral transform (PIT) of the gaps, for an absolute test of
// goodness of fit.
//
// Under the model, given everything recorded before an event and the label
// l' of the event itself, the gap tau before it has the conditional
// distribution function
//
//	F(tau) = x [int_0^{tau - delta} exp(D0 s) ds] D_{l'} 1 / x (-D0)^{-1} D_{l'} 1,
//	x = alpha exp(L delta),
//
// alpha the filtered law of the hidden state right after the previous
// event (the normalised forward vector of the likelihood's recursion) and
// delta the dead time (F = 0 for tau <= delta). For labels on single
// directed edges alpha is the unit vector of the previous label's target
// state, and without dead time
//
//	F(tau) = [int_0^tau exp(D0 s) ds]_{to(l), from(l')} / [(-D0)^{-1}]_{to(l), from(l')},
//
// the distribution of the gap given l -> l'. With a stationary start the
// first event's time gets the same transform with alpha = pi and no dead
// time; a record conditioned on its first event gives it none, and the
// censored end of a record (no event) gives none.
//
// u_k = F(tau_k) is a Rosenblatt transform (Rosenblatt, Ann. Math. Stat. 23,
// 470 (1952)): under the model with the true parameters the u_k are
// independent and uniform on (0, 1), whatever the labels. A uniformity test
// of the u's is therefore an absolute test of the model's account of the
// gaps (not of the label sequence, which the transform conditions on).
//
// Frame-limited timestamps make the gap discrete: a reported gap g says
// only that the true gap lies in the likelihood's box [lo, hi] (see the
// package documentation). The transform is then randomised (Brockwell,
// Biometrika 94, 1 (2007)): u = F(lo) + V (F(hi) - F(lo)) with V uniform,
// drawn from a stream fixed by the caller's seed, the record and the event
// (the same for any number of workers). It is uniform exactly when the
// reports follow the box model, so only up to the box approximation that
// the likelihood makes.
//
// Accuracy: on the spectral route u is a sum of eigen-terms, with an
// absolute error of a few units of 1e-16 times cond(V) times the sum of
// the terms' sizes relative to the normaliser. F is summed from expm1
// terms h_k (1 - e^{lambda_k tau}), each of size ~ |h_k lambda_k| tau near 0,
// so the error near 0 shrinks in proportion to the gap (a pair that needs m
// hidden steps has F ~ tau^(m+1) and keeps fewer relative digits, but the
// error stays below about 1e-16 tau sum |h_k lambda_k| / den).
// Where the estimated rounding would exceed 1e-10 the value is computed by
// uniformisation instead (all terms non-negative). On the dense (Pade)
// route F comes from Van Loan's block exponential of the integral.

// PIT holds the probability integral transforms of a data set's gaps.
type PIT struct {
	// U holds one value in [0, 1] per gap, record by record, events in
	// time order.
	U []float64
	// Offsets[r] is the index in U of record r's first value;
	// Offsets[len(Records)] = len(U).
	Offsets []int
	// Randomised is true for frame-limited timestamps (randomised PIT).
	Randomised bool
}

// pitTol is the absolute accuracy asked of a spectral u before the
// uniformisation route takes over.
const pitTol = 1e-10

// pitTables holds what the transforms need from the kernels.
type pitTables struct {
	b, c, vc [][]float64 // [l] D_l 1, (-D0)^{-1} D_l 1, W^{-1} c
	// Fast path, pair p = a*(nl+1) + b (a = nl: the stationary start).
	h     [][]float64 // x exp(D0 t) c_b = sum h_k z_k(t)
	den   []float64   // x c_b
	exact []bool      // eigen-terms too large: use uniformisation
}

func (e *Evaluator) pitTables() *pitTables {
	n, nl := e.n, e.nl
	tb := &pitTables{b: make([][]float64, nl), c: make([][]float64, nl), vc: make([][]float64, nl)}
	a := e.amat.RawMatrix().Data
	for l := 0; l < nl; l++ {
		tb.b[l] = make([]float64, n)
		e.applyDCol(tb.b[l], ones(n), l)
		tb.c[l] = make([]float64, n)
		timesCol(tb.c[l], a, tb.b[l], n)
		if e.sp != nil {
			tb.vc[l] = make([]float64, n)
			timesCol(tb.vc[l], e.sp.wi, tb.c[l], n)
		}
	}
	if !e.fast {
		return tb
	}
	np1 := nl + 1
	tb.h = make([][]float64, np1*np1)
	tb.den = make([]float64, np1*np1)
	tb.exact = make([]bool, np1*np1)
	u := make([]float64, n)
	for pa := 0; pa <= nl; pa++ {
		rowTimes(u, e.avec[pa], e.sp.w, n)
		for pb := 0; pb < nl; pb++ {
			p := pa*np1 + pb
			tb.h[p] = e.sp.pairCoef(u, tb.vc[pb])
			tb.den[p] = dot(e.avec[pa], tb.c[pb])
			tb.exact[p] = !e.pitSpectralOK(tb.h[p], tb.den[p])
		}
	}
	return tb
}

func ones(n int) []float64 {
	v := make([]float64, n)
	for i := range v {
		v[i] = 1
	}
	return v
}

// pitSpectralOK reports whether the eigen-sum with coefficients h can give
// u = sum h (1 - z) / den to pitTol (|1 - z| <= 2 for t >= 0): the
// rounding of the sum is estimated as 8 eps cond(V) sum |h|, an estimate,
// not a bound.
func (e *Evaluator) pitSpectralOK(h []float64, den float64) bool {
	m := 0.0
	for _, v := range h {
		m += math.Abs(v)
	}
	return 8*0x1p-52*e.sp.cond*m <= pitTol*den
}

// pitSpectral returns F(t) = sum_k h_k (1 - e^{lambda_k t}) / den from the
// eigen-coefficients h of the survival numerator x exp(D0 t) c (so that
// sum h = den = x c), with 1 - e^{lambda t} from expm1: one exponential per
// eigenvalue, and an error near 0 that shrinks with t. For a complex pair
// lambda = a + ib, e^{lambda t} - 1 = (e^{at} - 1) cos bt - (1 - cos bt)
// + i e^{at} sin bt, with 1 - cos y = sin^2 y / (1 + cos y) when cos y > 0
// (no cancellation at small y).
func (e *Evaluator) pitSpectral(h []float64, den, t float64) float64 {
	s := e.sp
	f := 0.0
	for _, r := range s.reals {
		f -= h[r.k] * expm1(r.lam*t)
	}
	for _, p := range s.pairs {
		em := expm1(p.a * t)
		sn, cs := math.Sincos(p.b * t)
		omc := 1 - cs
		if cs > 0 {
			omc = sn * sn / (1 + cs)
		}
		f -= h[p.k]*(em*cs-omc) + h[p.k+1]*((em+1)*sn)
	}
	return clamp01(f / den)
}

// expm1 is e^x - 1 for x <= 0: math.Exp(x) - 1 where that loses at most
// a few ulps (x < -1: e^x - 1 lies in (-1, -0.63], no cancellation), and
// math.Expm1 (slower) nearer 0.
func expm1(x float64) float64 {
	if x < -1 {
		return math.Exp(x) - 1
	}
	return math.Expm1(x)
}

func clamp01(u float64) float64 { return math.Min(1, math.Max(0, u)) }

// pitDense returns F(t) = x [int_0^t exp(D0 s) ds] b / den on the dense
// route (Van Loan, cached per interval) or, on the spectral route, by
// uniformisation (all terms non-negative).
func (e *Evaluator) pitDense(ws *work, x, b []float64, den, t float64) (float64, error) {
	if !(t > 0) {
		return 0, nil
	}
	var m []float64
	var err error
	if e.sp != nil {
		m, err = e.accurateE(ws, 0, t)
	} else {
		m, err = e.denseE(ws, 0, t)
	}
	if err != nil {
		return 0, err
	}
	timesCol(ws.y, m, b, e.n)
	return clamp01(dot(x, ws.y) / den), nil
}

// pitDraw returns the uniform variate V in (0, 1) of event k of record r
// for the randomised transform: a SplitMix64 hash (Steele, Lea and Flood,
// OOPSLA 2014) of the seed, the record and the event, so that each event
// has its own draw whatever the order or the number of workers.
func pitDraw(seed uint64, r, k int) float64 {
	mix := func(z uint64) uint64 {
		z += 0x9e3779b97f4a7c15
		z = (z ^ z>>30) * 0xbf58476d1ce4e5b9
		z = (z ^ z>>27) * 0x94d049bb133111eb
		return z ^ z>>31
	}
	h := mix(mix(mix(seed)^uint64(r)) ^ uint64(k))
	return (float64(h>>11) + 0.5) * 0x1p-53
}

// PIT returns the probability integral transform of every gap of d under
// the evaluator's model and options (see the notes above for the formula,
// the randomisation with frame-limited timestamps, which seed fixes, and
// the accuracy). The fast path is used when the evaluator uses it. Errors
// are those of LogLik: a data label the model lacks, an event the model
// cannot produce, a gap shorter than the dead time.
func (e *Evaluator) PIT(d *Data, seed uint64) (*PIT, error) {
	if d == nil || len(d.Records) == 0 {
		return nil, errors.New("likelihood: no records")
	}
	if err := d.Validate(); err != nil {
		return nil, err
	}
	lm, err := e.dataLabels(d)
	if err != nil {
		return nil, err
	}
	skip := 1
	if e.opt.Start == StartStationary {
		skip = 0
	}
	res := &PIT{Offsets: make([]int, len(d.Records)+1), Randomised: e.frame > 0}
	for r := range d.Records {
		res.Offsets[r+1] = res.Offsets[r] + d.Records[r].Len() - skip
	}
	res.U = make([]float64, res.Offsets[len(d.Records)])
	tb := e.pitTables()
	its := e.items(d)
	workers := e.opt.Workers
	if workers <= 0 {
		workers = runtime.GOMAXPROCS(0)
	}
	workers = min(workers, len(its))
	var next atomic.Int64
	var wg sync.WaitGroup
	for w := 0; w < workers; w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			ws := e.newWork(false)
			for {
				i := int(next.Add(1)) - 1
				if i >= len(its) {
					return
				}
				it := &its[i]
				for sg := range it.segments(d) {
					out := res.U[res.Offsets[sg.r]:res.Offsets[sg.r+1]]
					if e.fast {
						it.err = e.pitFast(ws, tb, d, &lm, sg, out, skip, seed)
					} else {
						it.err = e.pitGeneral(ws, tb, d, &lm, sg.r, out, seed)
					}
					if it.err != nil {
						break
					}
				}
			}
		}()
	}
	wg.Wait()
	for i := range its {
		if its[i].err != nil {
			return nil, its[i].err
		}
	}
	return res, nil
}

// pitUniform combines the distribution function at the ends of the
// interval [lo, hi] into u: F(lo) for an exact time, the randomised value
// for a frame box.
func pitUniform(flo, fhi float64, seed uint64, r, k int) float64 {
	return clamp01(flo + pitDraw(seed, r, k)*(fhi-flo))
}

// pitFast fills out (record sg.r's values; index k - skip for event k) for
// events [sg.k0, sg.k1) on the fast path.
func (e *Evaluator) pitFast(ws *work, tb *pitTables, d *Data, lm *[256]int16, sg segment, out []float64, skip int, seed uint64) error {
	rec := &d.Records[sg.r]
	nl := e.nl
	np1 := nl + 1
	tm, lb := rec.Time, rec.Label
	f := func(pr int, t float64) (float64, error) {
		switch {
		case !(t > 0):
			return 0, nil
		case tb.exact[pr]:
			return e.pitDense(ws, e.avec[pr/np1], e.bvec[pr%np1], tb.den[pr], t)
		}
		return e.pitSpectral(tb.h[pr], tb.den[pr], t), nil
	}
	value := func(k, pr int, lo, hi float64) error {
		if !(tb.den[pr] > 0) {
			return impossible(rec, k, "probability of the label given the previous one", tb.den[pr])
		}
		flo, err := f(pr, lo)
		if err != nil || lo == hi {
			out[k-skip] = flo
			return err
		}
		fhi, err := f(pr, hi)
		out[k-skip] = pitUniform(flo, fhi, seed, sg.r, k)
		return err
	}
	if sg.k0 == 0 && skip == 0 {
		lo, hi, ok := e.firstInterval(tm[0])
		if !ok {
			return fmt.Errorf("likelihood: record %q event 1: time %v: a stationary start needs a finite time >= 0", rec.ID, tm[0])
		}
		if err := value(0, nl*np1+int(lm[lb[0]]), lo, hi); err != nil {
			return err
		}
	}
	k := max(sg.k0, 1)
	if k >= sg.k1 {
		return nil
	}
	prev := int(lm[lb[k-1]])
	if e.frame == 0 {
		// Hot loop: exact timestamps.
		delta := e.delta
		for ; k < sg.k1; k++ {
			l := int(lm[lb[k]])
			pr := prev*np1 + l
			g := tm[k] - tm[k-1]
			t := g - delta
			if !(t >= 0) || t > math.MaxFloat64 || g == 0 {
				return gapError(rec, k, g, delta)
			}
			den := tb.den[pr]
			if !(den > 0) {
				return impossible(rec, k, "probability of the label given the previous one", den)
			}
			if tb.exact[pr] || t == 0 {
				u, err := f(pr, t)
				if err != nil {
					return err
				}
				out[k-skip] = u
			} else {
				out[k-skip] = e.pitSpectral(tb.h[pr], den, t)
			}
			prev = l
		}
		return nil
	}
	for ; k < sg.k1; k++ {
		l := int(lm[lb[k]])
		g := tm[k] - tm[k-1]
		lo, hi, ok := e.interval(g, true)
		if !ok {
			return gapError(rec, k, g, e.delta)
		}
		if err := value(k, prev*np1+l, lo, hi); err != nil {
			return err
		}
		prev = l
	}
	return nil
}

// pitGeneral fills out with record r's values by the likelihood's forward
// recursion on the filtered law alpha.
func (e *Evaluator) pitGeneral(ws *work, tb *pitTables, d *Data, lm *[256]int16, r int, out []float64, seed uint64) error {
	rec := &d.Records[r]
	n := e.n
	steps, info, err := e.generalSteps(rec, lm, len(d.Labels))
	if err != nil {
		return err
	}
	alpha := ws.alpha
	if err := e.startAlpha(alpha, rec, int(lm[rec.Label[0]])); err != nil {
		return err
	}
	x := ws.x
	h := make([]float64, n)
	for s := 0; s < steps; s++ {
		st, err := info(s)
		if err != nil {
			return err
		}
		if st.lab < 0 {
			break // the censored end: no event, no transform
		}
		if st.useG {
			rowTimes(x, alpha, e.g, n)
		} else {
			copy(x, alpha)
		}
		den := dot(x, tb.c[st.lab])
		if !(den > 0) {
			return impossible(rec, st.k, "probability of the label given the past", den)
		}
		// The update leaves x W in ws.u0 on the spectral route and x as it was.
		if _, err := e.forwardStep(ws, alpha, x, rec, st); err != nil {
			return err
		}
		spectral := e.sp != nil
		if spectral {
			e.sp.pairCoefTo(h, ws.u0, tb.vc[st.lab])
			spectral = e.pitSpectralOK(h, den)
		}
		f := func(t float64) (float64, error) {
			if spectral && t > 0 {
				return e.pitSpectral(h, den, t), nil
			}
			return e.pitDense(ws, x, tb.b[st.lab], den, t)
		}
		u, err := f(st.lo)
		if err != nil {
			return err
		}
		if st.hi != st.lo {
			fhi, err := f(st.hi)
			if err != nil {
				return err
			}
			u = pitUniform(u, fhi, seed, r, st.k)
		}
		out[s] = u
	}
	return nil
}
