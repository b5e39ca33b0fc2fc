package likelihood

import (
	"fmt"
	"math"
)

// fastTables precomputes, for every (previous, next) pair, the vectors
// a^T W and W^{-1} b and their block products, so that
// psi = a^T exp(D0 tau) b = dot(cf, z(tau)).
func (e *Evaluator) fastTables() {
	n, nl, s := e.n, e.nl, e.sp
	e.from, e.to, e.pw = make([]int, nl), make([]int, nl), make([]float64, nl)
	for l, ts := range e.k.Edges {
		e.from[l], e.to[l] = ts[0].From, ts[0].To
		for _, d := range e.dsp[l] { // parallel edges of one direction add up
			e.pw[l] += d.v
		}
	}
	us := make([][]float64, nl+1) // a^T W
	vs := make([][]float64, nl+1) // W^{-1} b
	for a := 0; a <= nl; a++ {
		var av []float64
		if a < nl {
			av = make([]float64, n)
			if e.g != nil {
				copy(av, e.g[e.to[a]*n:e.to[a]*n+n])
			} else {
				av[e.to[a]] = 1
			}
		} else {
			av = e.pi
		}
		e.avec = append(e.avec, av)
		us[a] = make([]float64, n)
		rowTimes(us[a], av, s.w, n)
	}
	for b := 0; b <= nl; b++ {
		bv := make([]float64, n)
		if b < nl {
			bv[e.from[b]] = e.pw[b]
		} else {
			for i := range bv {
				bv[i] = 1
			}
		}
		e.bvec = append(e.bvec, bv)
		vs[b] = make([]float64, n)
		timesCol(vs[b], s.wi, bv, n)
	}
	e.cf = make([][]float64, (nl+1)*(nl+1))
	for a := 0; a <= nl; a++ {
		for b := 0; b <= nl; b++ {
			e.cf[a*(nl+1)+b] = s.pairCoef(us[a], vs[b])
		}
	}
	kmax := -1
	for _, r := range s.reals {
		if kmax < 0 && r.lam == s.lmax {
			kmax = r.k
			continue
		}
		e.hmu = append(e.hmu, r.lam-s.lmax)
		e.hidx = append(e.hidx, r.k)
	}
	e.hc0 = make([]float64, len(e.cf))
	e.hc = make([][]float64, len(e.cf))
	e.hfloor = make([]float64, len(e.cf))
	for p, c := range e.cf {
		if kmax >= 0 {
			e.hc0[p] = c[kmax]
		}
		for _, k := range e.hidx {
			e.hc[p] = append(e.hc[p], c[k])
		}
		m := 0.0
		for _, v := range c {
			m += math.Abs(v)
		}
		e.hfloor[p] = spectralRelFloor * m
	}
	e.ahat = make([][]complex128, nl+1)
	e.bhat = make([][]complex128, nl+1)
	for a := 0; a <= nl; a++ {
		e.ahat[a] = s.rowHat(us[a])
		e.bhat[a] = s.colHat(vs[a])
	}
}

// pairCoef returns the coefficients c of a^T exp(D0 t) b = sum_k c_k z_k(t)
// (z from coefExact or coefInterval, unshifted) for u = a^T W and
// v = W^{-1} b: c_k = u_k v_k for a real eigenvalue, and for a pair
// (c_k, c_{k+1}) = (u_k v_k + u_{k+1} v_{k+1}, u_k v_{k+1} - u_{k+1} v_k),
// so that the pair contributes c_k Re w + c_{k+1} Im w, w = e^{lambda t}.
func (s *spectral) pairCoef(u, v []float64) []float64 {
	c := make([]float64, s.n)
	s.pairCoefTo(c, u, v)
	return c
}

// pairCoefTo is pairCoef into c.
func (s *spectral) pairCoefTo(c, u, v []float64) {
	for k := 0; k < s.n; k++ {
		switch s.kind[k] {
		case 0:
			c[k] = u[k] * v[k]
		case 1:
			c[k] = u[k]*v[k] + u[k+1]*v[k+1]
			c[k+1] = u[k]*v[k+1] - u[k+1]*v[k]
		}
	}
}

// mantissa scaling bounds for the fast path's running product.
const (
	prodLow  = 0x1p-600
	prodHigh = 0x1p600
)

// fastSegment handles events [k0, k1) of record sg.r on the fast path: the
// pair factors psi(tau_k) for k in [max(k0, 1), k1), plus the stationary
// start when k0 == 0 and the censored end when k1 == n. The running
// product of the (shifted) factors is kept as a mantissa rescaled by
// powers of two, and the shifts lmax tau are summed, so that the loop
// takes no logarithm.
func (e *Evaluator) fastSegment(ws *work, d *Data, lm *[256]int16, sg segment) error {
	rec := &d.Records[sg.r]
	acc := ws.acc
	nl := e.nl
	np1 := nl + 1
	s := e.sp
	z, dz := ws.z, ws.dz
	grad := acc.grad
	tm, lb := rec.Time, rec.Label
	mant, ex, shift := 1.0, 0, 0.0
	// step multiplies in the factor of one pair with the interval [lo, hi].
	step := func(k, pair int, lo, hi float64) error {
		shift += e.coefs(ws, lo, hi, grad)
		c := e.cf[pair]
		f := 0.0
		for i, v := range c {
			f += v * z[i]
		}
		// Exact times: |z_i| <= 1, so f > hfloor settles it cheaply.
		flagged := false
		if !(lo == hi && f > e.hfloor[pair]) && cancels(f, c, z) {
			var err error
			if f, err = e.fastAccurate(ws, pair, lo, hi); err != nil {
				return err
			}
			flagged = true
		}
		if !(f > 0) || f > math.MaxFloat64 {
			return impossible(rec, k, "density", f)
		}
		mant *= f
		if mant < prodLow || mant > prodHigh {
			fr, xe := math.Frexp(mant)
			mant, ex = fr, ex+xe
		}
		if grad && flagged {
			return e.fastFlaggedGrad(ws, pair, f, lo, hi)
		}
		if grad {
			inv := 1 / f
			szp, sdp := acc.sz[pair], acc.szd[pair]
			for i := range z {
				szp[i] += z[i] * inv
				sdp[i] += dz[i] * inv
			}
		}
		return nil
	}
	label := func(k int) (int, error) {
		l := lm[lb[k]]
		if l < 0 {
			return 0, fmt.Errorf("likelihood: record %q event %d: label index %d is not in the data's label table (%d labels)", rec.ID, k+1, lb[k], len(d.Labels))
		}
		return int(l), nil
	}
	n := len(tm)
	if sg.k0 == 0 {
		l, err := label(0)
		if err != nil {
			return err
		}
		if !(e.w0[e.from[l]] > 0) {
			return impossible(rec, 0, "first-event probability", e.w0[e.from[l]])
		}
		if e.opt.Start == StartStationary {
			g := tm[0]
			lo, hi, ok := e.firstInterval(g)
			if !ok || math.IsNaN(g) {
				return fmt.Errorf("likelihood: record %q event 1: time %v: a stationary start needs a finite time >= 0", rec.ID, g)
			}
			if err := step(0, nl*np1+l, lo, hi); err != nil {
				return err
			}
			if grad {
				acc.cnt[l]++
			}
		}
	}
	prev := 0
	k := max(sg.k0, 1)
	if k <= n {
		p, err := label(k - 1)
		if err != nil {
			return err
		}
		prev = p
	}
	if !grad && e.frame == 0 {
		// Hot loop: exact timestamps, value only. psi = e^{shift} (sum over
		// real eigenvalues c_k e^{(l_k - lmax) tau} + sum over pairs
		// e^{(a - lmax) tau} (c_k cos(b tau) + c_{k+1} sin(b tau))).
		pairs, lmx, delta, hmu := s.pairs, s.lmax, e.delta, e.hmu
		sumTau := 0.0
		for ; k < sg.k1; k++ {
			l := int(lm[lb[k]])
			if l < 0 {
				_, err := label(k)
				return err
			}
			g := tm[k] - tm[k-1]
			tau := g - delta
			if !(tau >= 0) || tau > math.MaxFloat64 || g == 0 {
				return gapError(rec, k, g, delta)
			}
			pr := prev*np1 + l
			f := e.hc0[pr]
			hc := e.hc[pr][:len(hmu)]
			for i, mu := range hmu {
				f += hc[i] * math.Exp(mu*tau)
			}
			c := e.cf[pr]
			for _, p := range pairs {
				sn, cs := math.Sincos(p.b * tau)
				f += math.Exp((p.a-lmx)*tau) * (c[p.k]*cs + c[p.k+1]*sn)
			}
			// hfloor[pr] bounds spectralRelFloor * sum |terms| from above
			// (every e^{(lambda - lmax) tau} has modulus <= 1), so a value
			// above it is accurate; below it the exact test decides.
			if !(f > e.hfloor[pr]) && e.hotCancels(f, pr, tau) {
				// The eigen-sum cancelled: recompute entry-wise.
				var err error
				if f, err = e.fastAccurate(ws, pr, tau, tau); err != nil {
					return err
				}
			}
			if !(f > 0) || f > math.MaxFloat64 {
				return impossible(rec, k, "density", f)
			}
			mant *= f
			if mant < prodLow || mant > prodHigh {
				fr, xe := math.Frexp(mant)
				mant, ex = fr, ex+xe
			}
			sumTau += tau
			prev = l
		}
		shift += lmx * sumTau
	}
	for ; k < sg.k1; k++ {
		l := int(lm[lb[k]])
		if l < 0 {
			_, err := label(k)
			return err
		}
		g := tm[k] - tm[k-1]
		lo, hi, ok := e.interval(g, true)
		if !ok {
			return gapError(rec, k, g, e.delta)
		}
		if err := step(k, prev*np1+l, lo, hi); err != nil {
			return err
		}
		if grad {
			acc.cnt[l]++
		}
		prev = l
	}
	if sg.k1 == n && !math.IsNaN(rec.End) {
		t := e.endTime(rec.End, tm[n-1])
		if !(rec.End >= tm[n-1]) || math.IsInf(rec.End, 0) {
			return fmt.Errorf("likelihood: record %q: end %v is before the last event (%v) or not finite", rec.ID, rec.End, tm[n-1])
		}
		if t > 0 {
			last, err := label(n - 1)
			if err != nil {
				return err
			}
			if err := step(n, last*np1+nl, t, t); err != nil {
				return err
			}
		}
	}
	fr, xe := math.Frexp(mant)
	acc.lmant += math.Log(fr) + float64(ex+xe)*math.Ln2 + shift
	if grad {
		return e.flushVanLoan(ws)
	}
	return nil
}

// fastFlaggedGrad accumulates the sensitivities of a fast-path pair factor
// f = a E~(lo, hi) b whose eigen-sum cancelled (f from uniformisation):
// D0 through the Van Loan blocks of the uniformisation factors, and
// exp(L delta) or pi through y = E~ b / f, instead of the eigen sums.
func (e *Evaluator) fastFlaggedGrad(ws *work, pr int, f, lo, hi float64) error {
	n, np1, acc := e.n, e.nl+1, ws.acc
	pa, pb := pr/np1, pr%np1
	a, b := e.avec[pa], e.bvec[pb]
	if err := e.vanLoanEvent(ws, a, b, f, lo, hi, e.accurateMat); err != nil {
		return err
	}
	m, err := e.accurateE(ws, lo, hi)
	if err != nil {
		return err
	}
	y := ws.u
	timesCol(y, m, b, n)
	switch {
	case pa < e.nl && e.g != nil:
		row := acc.sg[e.to[pa]*n : e.to[pa]*n+n]
		for j := range row {
			row[j] += y[j] / f
		}
	case pa == e.nl:
		for j := range acc.gpi {
			acc.gpi[j] += y[j] / f
		}
	}
	return nil
}
