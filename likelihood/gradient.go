package likelihood

import (
	"errors"
	"fmt"
	"math"

	"edgewise/models"

	"gonum.org/v1/gonum/mat"
)

// Gradient is the exact gradient of ln L with respect to the network's
// parameters.
type Gradient struct {
	// LogRate[2*e+d] = d ln L / d ln w(edge e, direction d), the index of
	// models.Network.Edges; zero for an absent (one-way) direction.
	LogRate []float64
	// Detect[l] = d ln L / d p_l, the detection probability of label l.
	Detect []float64
}

// Gradient returns ln L of d and its exact gradient (see the package
// documentation for the method).
func (e *Evaluator) Gradient(d *Data) (float64, *Gradient, error) {
	acc, err := e.run(d, true, nil)
	if err != nil {
		return math.NaN(), nil, err
	}
	g, err := e.finalize(acc)
	if err != nil {
		return math.NaN(), nil, err
	}
	return acc.ll, g, nil
}

// LogLikGrad is a convenience: ln L of d under net and its gradient.
func LogLikGrad(net *models.Network, d *Data, opt Options) (float64, *Gradient, error) {
	e, err := NewNetworkEvaluator(net, opt)
	if err != nil {
		return math.NaN(), nil, err
	}
	return e.Gradient(d)
}

// ModelLogLik returns ln L of d under model m at free-parameter values x
// (in the order of m.Free()).
func ModelLogLik(m *models.Model, x []float64, d *Data, opt Options) (float64, error) {
	net, err := m.Network(x)
	if err != nil {
		return math.NaN(), fmt.Errorf("likelihood: %w", err)
	}
	return LogLik(net, d, opt)
}

// ModelLogLikGrad returns ln L of d under model m at x and its gradient
// with respect to x, by the chain rule through m.Jacobian:
//
//	d lnL/d x_j = sum_t (d lnL/d ln w_t) J.LogRate[t][j] / x_j + sum_l (d lnL/d p_l) J.Detect[l][j].
func ModelLogLikGrad(m *models.Model, x []float64, d *Data, opt Options) (float64, []float64, error) {
	net, err := m.Network(x)
	if err != nil {
		return math.NaN(), nil, fmt.Errorf("likelihood: %w", err)
	}
	jac, err := m.Jacobian(x)
	if err != nil {
		return math.NaN(), nil, fmt.Errorf("likelihood: %w", err)
	}
	ll, g, err := LogLikGrad(net, d, opt)
	if err != nil {
		return math.NaN(), nil, err
	}
	if len(jac.LogRate) != len(g.LogRate) || len(jac.Detect) != len(g.Detect) {
		return math.NaN(), nil, errors.New("likelihood: model Jacobian does not match the network")
	}
	gx := make([]float64, len(x))
	for j := range gx {
		for t, row := range jac.LogRate {
			if row[j] != 0 {
				gx[j] += g.LogRate[t] * row[j] / x[j]
			}
		}
		for l, row := range jac.Detect {
			if row[j] != 0 {
				gx[j] += g.Detect[l] * row[j]
			}
		}
	}
	return ll, gx, nil
}

// gradCheckpoint is the number of steps between stored backward vectors:
// memory O(N (n/C + C)) per record instead of O(N n).
const gradCheckpoint = 512

// backStep sets beta <- M beta / scale with M = G E D_l (or E D_l). need
// lists the entries of the result that the recursion reads next (the
// targets of the previous step's label, see needBefore); on the spectral
// route they are checked for cancellation.
func (e *Evaluator) backStep(ws *work, beta []float64, st stepInfo, need []int) error {
	e.applyDCol(ws.b, beta, st.lab)
	out := ws.alpha2
	if err := e.propCol(ws, out, ws.b, st.lo, st.hi, false); err != nil {
		return err
	}
	if e.sp != nil && e.colCancels(out, ws.y, ws.b, ws.mag, st.useG, need) {
		// The eigen-sum cancelled: recompute entry-wise (see spectralRelFloor).
		m, err := e.accurateE(ws, st.lo, st.hi)
		if err != nil {
			return err
		}
		timesCol(out, m, ws.b, e.n)
	}
	if st.useG {
		timesCol(beta, e.g, out, e.n)
	} else {
		copy(beta, out)
	}
	s := sum(beta)
	if !(s > 0) || s > math.MaxFloat64 {
		s = 0
		for _, v := range beta {
			s = math.Max(s, math.Abs(v))
		}
		if !(s > 0) || s > math.MaxFloat64 {
			return fmt.Errorf("backward vector vanished (sum %v)", sum(beta))
		}
	}
	for i := range beta {
		beta[i] /= s
	}
	return nil
}

// needBefore returns the entries of the backward vector before step s
// that the recursion reads: D_l beta reads the targets of l, with l the
// label of step s-1, or of the first event (StartFirstEvent, s = 0);
// nothing reads it before the first step of a stationary start. Only the
// spectral route uses it.
func (e *Evaluator) needBefore(s int, info func(int) (stepInfo, error), l1 int) []int {
	if e.sp == nil {
		return nil
	}
	if s > 0 {
		st, err := info(s - 1)
		if err != nil || st.lab < 0 {
			return nil
		}
		return e.needTo[st.lab]
	}
	if e.opt.Start == StartFirstEvent {
		return e.needTo[l1]
	}
	return nil
}

// generalGrad runs the record's backward recursion (checkpoints every
// gradCheckpoint steps), the start-law terms, then the forward recursion
// with the gradient accumulations. alpha (ws.alpha) holds the start law.
func (e *Evaluator) generalGrad(ws *work, rec *Record, steps int, info func(int) (stepInfo, error), l1 int) error {
	n := e.n
	acc := ws.acc
	cp := gradCheckpoint
	nseg := (steps + cp - 1) / cp
	if cap(ws.ck) < nseg*n {
		ws.ck = make([]float64, nseg*n)
	}
	ck := ws.ck[:nseg*n]
	if cap(ws.buf) < cp*n {
		ws.buf = make([]float64, cp*n)
	}
	buf := ws.buf
	beta := ws.beta
	for i := range beta {
		beta[i] = 1
	}
	for s := steps - 1; s >= 0; s-- {
		m := s / cp
		if s == min((m+1)*cp, steps)-1 {
			copy(ck[m*n:(m+1)*n], beta)
		}
		st, err := info(s)
		if err != nil {
			return err
		}
		if err := e.backStep(ws, beta, st, e.needBefore(s, info, l1)); err != nil {
			return fmt.Errorf("%w (backward recursion: %v)", impossible(rec, st.k, "likelihood", 0), err)
		}
	}
	if e.opt.Start == StartFirstEvent {
		// ln L_r = ln(w0 D_l1 R 1) - ln(w0 D_l1 1); sensitivities to w0 and D_l1.
		at := ws.alpha2
		e.applyDRow(at, e.w0, l1)
		s1 := sum(at)
		c1 := dot(at, beta)
		if !(c1 > 0) {
			return impossible(rec, 0, "likelihood", c1)
		}
		for _, d := range e.dsp[l1] {
			acc.gw[d.i] += d.v*beta[d.j]/c1 - d.v/s1
		}
		for idx, d := range e.dsp[l1] {
			acc.sd[l1][idx] += e.w0[d.i]*beta[d.j]/c1 - e.w0[d.i]/s1
		}
	}
	alpha := ws.alpha
	for m := 0; m < nseg; m++ {
		s0, s1 := m*cp, min((m+1)*cp, steps)
		copy(buf[(s1-1-s0)*n:(s1-s0)*n], ck[m*n:(m+1)*n])
		for s := s1 - 1; s > s0; s-- {
			b := buf[(s-1-s0)*n : (s-s0)*n]
			copy(b, buf[(s-s0)*n:(s-s0+1)*n])
			st, err := info(s)
			if err != nil {
				return err
			}
			if err := e.backStep(ws, b, st, e.needBefore(s, info, l1)); err != nil {
				return fmt.Errorf("%w (backward recursion: %v)", impossible(rec, st.k, "likelihood", 0), err)
			}
		}
		for s := s0; s < s1; s++ {
			st, err := info(s)
			if err != nil {
				return err
			}
			if err := e.forwardGradStep(ws, rec, alpha, buf[(s-s0)*n:(s-s0+1)*n], st); err != nil {
				return err
			}
		}
	}
	return e.flushVanLoan(ws)
}

// forwardGradStep advances alpha over one step and accumulates the
// sensitivities of ln L to D0 (through E), exp(L delta), D_l and pi, with
// beta the normalised backward vector after the step:
//
//	c = (alpha G) E D beta,  d ln L += alpha dG E D beta / c
//	     + (alpha G) dE D beta / c + (alpha G E) dD beta / c.
func (e *Evaluator) forwardGradStep(ws *work, rec *Record, alpha, beta []float64, st stepInfo) error {
	n := e.n
	acc := ws.acc
	x := ws.x
	if st.useG {
		rowTimes(x, alpha, e.g, n)
	} else {
		copy(x, alpha)
	}
	zv := ws.alpha2
	shift, err := e.propRow(ws, zv, x, st.lo, st.hi, true)
	if err != nil {
		return err
	}
	b := ws.b
	e.applyDCol(b, beta, st.lab)
	// Spectral route: the same entry-wise cancellation test as the
	// value-only recursion, so that both give the same ln L; a cancelled
	// step is recomputed by uniformisation (accm non-nil).
	var accm []float64
	if e.sp != nil && e.rowCancels(zv, ws.u, x, st.lab) {
		if accm, err = e.accurateE(ws, st.lo, st.hi); err != nil {
			return err
		}
		rowTimes(zv, x, accm, n)
	}
	c := dot(zv, b)
	if !(c > 0) || c > math.MaxFloat64 {
		return impossible(rec, st.k, "density", c)
	}
	needY := st.useG || st.k == 0 && e.opt.Start == StartStationary
	y := ws.u // reused: y = E b
	if s := e.sp; s != nil && accm != nil {
		// A cancelled step: its sensitivities from the Van Loan blocks of
		// the uniformisation factors (the eigen-coordinate sums would carry
		// the same cancellation), flushed at the end of the record.
		if err := e.vanLoanEvent(ws, x, b, c, st.lo, st.hi, e.accurateMat); err != nil {
			return err
		}
		if needY {
			timesCol(y, accm, b, n)
		}
	} else if s != nil {
		// Eigen coordinates: a^ = V^T a (a = x^T), b^ = V^{-1} b.
		s.rowHatTo(ws.ah, ws.u0)
		timesCol(ws.v, s.wi, b, n)
		s.colHatTo(ws.bh, ws.v)
		s.blockHatTo(ws.zh, ws.z)
		s.blockHatTo(ws.dh, ws.dz)
		ic := complex(1/c, 0)
		bz := ws.dh // reuse after dg: compute dg first
		for k := 0; k < n; k++ {
			acc.dg[k] += ws.ah[k] * ws.bh[k] * ws.dh[k] * ic
		}
		for l := 0; l < n; l++ {
			bz[l] = ws.bh[l] * ws.zh[l]
		}
		for k := 0; k < n; k++ {
			ak := ws.ah[k] * ic
			pk := ak * ws.zh[k]
			prow := acc.p[k*n : k*n+n]
			qrow := acc.q[k*n : k*n+n]
			for l := 0; l < n; l++ {
				prow[l] += pk * ws.bh[l]
				qrow[l] += ak * bz[l]
			}
		}
		if needY {
			copy(ws.y, ws.v)
			s.colBlock(ws.y, ws.z)
			timesCol(y, s.w, ws.y, n)
		}
	} else {
		if err := e.vanLoanEvent(ws, x, b, c, st.lo, st.hi, e.denseMat); err != nil {
			return err
		}
		if needY {
			m, err := e.denseE(ws, st.lo, st.hi)
			if err != nil {
				return err
			}
			timesCol(y, m, b, n)
		}
	}
	if needY {
		if st.useG {
			for i := 0; i < n; i++ {
				if alpha[i] == 0 {
					continue
				}
				f := alpha[i] / c
				row := acc.sg[i*n : i*n+n]
				for j := 0; j < n; j++ {
					row[j] += f * y[j]
				}
			}
		} else {
			for j := 0; j < n; j++ {
				acc.gpi[j] += y[j] / c
			}
		}
	}
	if st.lab >= 0 {
		sd := acc.sd[st.lab]
		for idx, d := range e.dsp[st.lab] {
			sd[idx] += zv[d.i] * beta[d.j] / c
		}
	}
	e.applyDRow(alpha, zv, st.lab)
	cs := sum(alpha)
	if !(cs > 0) || cs > math.MaxFloat64 {
		return impossible(rec, st.k, "density", cs)
	}
	acc.ll += math.Log(cs) + shift
	for i := range alpha {
		alpha[i] /= cs
	}
	return nil
}

// vanLoanEvent adds the Van Loan sums of one event with factor
// c = x E~(lo, hi) b, E~ the shifted factor that get returns (denseE or
// accurateE; shift s = dshift or lmax). Exact time t: X(t, t) += x b^T / c,
// differentiated on D0 - s I over [0, t]. Interval:
// d[e^{D0 lo} I(w)] = (d e^{D0 lo}) I(w) + e^{D0 lo} dI(w), so
// X(lo, lo) += x (I(w) b)^T / c (on D0 - s I over [0, lo]) and
// X(0, w) += (x e^{(D0 - sI) lo}) b^T / c (on D0 over the box [0, w]):
// both sums stay bounded however far out the interval lies. It flushes
// the sums when more than 64 intervals are pending. Uses ws.y and ws.v.
func (e *Evaluator) vanLoanEvent(ws *work, x, b []float64, c, lo, hi float64, get func(*work, float64, float64) ([]float64, error)) error {
	n := e.n
	if ws.vl == nil {
		ws.vl = map[[2]float64][]float64{}
	}
	switch {
	case lo == hi:
		e.vanLoanAdd(ws, lo, lo, x, b, c)
	case lo > 0:
		w := hi - lo
		m1, err := get(ws, lo, lo)
		if err != nil {
			return err
		}
		m2, err := get(ws, 0, w)
		if err != nil {
			return err
		}
		timesCol(ws.y, m2, b, n)
		e.vanLoanAdd(ws, lo, lo, x, ws.y, c)
		rowTimes(ws.v, x, m1, n)
		e.vanLoanAdd(ws, 0, w, ws.v, b, c)
	default:
		e.vanLoanAdd(ws, 0, hi, x, b, c)
	}
	if len(ws.vl) > 64 {
		return e.flushVanLoan(ws)
	}
	return nil
}

// denseMat and accurateMat adapt denseE and accurateE to vanLoanEvent.
func (e *Evaluator) denseMat(ws *work, lo, hi float64) ([]float64, error) {
	return e.denseE(ws, lo, hi)
}

func (e *Evaluator) accurateMat(ws *work, lo, hi float64) ([]float64, error) {
	return e.accurateE(ws, lo, hi)
}

// vanLoanAdd adds x y^T / c to the dense route's Van Loan sum of the
// interval key (lo, hi).
func (e *Evaluator) vanLoanAdd(ws *work, lo, hi float64, x, y []float64, c float64) {
	n := e.n
	key := [2]float64{lo, hi}
	xv, ok := ws.vl[key]
	if !ok {
		xv = make([]float64, n*n)
		ws.vl[key] = xv
	}
	for i := 0; i < n; i++ {
		if x[i] == 0 {
			continue
		}
		f := x[i] / c
		row := xv[i*n : i*n+n]
		for j := 0; j < n; j++ {
			row[j] += f * y[j]
		}
	}
}

// flushVanLoan turns the dense route's per-interval sums X = sum a b^T / c
// into sensitivities to D0: K = int_0^t exp(A^T s) X exp(A^T (t-s)) ds,
// the upper-right block of exp([[A^T, X], [0, A^T]] t) (Van Loan, IEEE
// TAC 23, 395 (1978)), with A = D0 - s I for exact times (key (t, t): X
// was accumulated with the shifted factor c e^{-s t}) and A = D0 for a box
// (key (0, w)): the integral of that over t in [0, w], from the (1,3)
// block of a 3x3 block exponential (see forwardGradStep for how a frame
// interval [lo, hi] is split into these two).
func (e *Evaluator) flushVanLoan(ws *work) error {
	for key, xv := range ws.vl {
		a := e.k.D0
		if key[0] == key[1] {
			a = e.d0s
		}
		k, err := vanLoan(a, xv, key[0], key[1])
		if err != nil {
			return fmt.Errorf("likelihood: gradient over [%v, %v]: %w", key[0], key[1], err)
		}
		for i, v := range k {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return fmt.Errorf("likelihood: Van Loan block exponential over [%v, %v] is not finite", key[0], key[1])
			}
			ws.acc.sd0[i] += v
		}
	}
	clear(ws.vl)
	return nil
}

// vanLoan returns int_0^t exp(A^T s) X exp(A^T (t-s)) ds for lo == hi == t,
// or its integral over t in [lo, hi] otherwise (row-major n x n). The
// evaluator calls the interval form with lo = 0 only (the difference
// h(hi) - h(lo) of two block exponentials would cancel for lo far out).
func vanLoan(a *mat.Dense, xv []float64, lo, hi float64) ([]float64, error) {
	n, _ := a.Dims()
	x := mat.NewDense(n, n, xv)
	if lo == hi {
		big := mat.NewDense(2*n, 2*n, nil)
		for i := 0; i < n; i++ {
			for j := 0; j < n; j++ {
				big.Set(i, j, a.At(j, i)*lo)
				big.Set(n+i, n+j, a.At(j, i)*lo)
				big.Set(i, n+j, x.At(i, j)*lo)
			}
		}
		var eb mat.Dense
		if err := expScaled(&eb, big, 1); err != nil {
			return nil, err
		}
		return mat.DenseCopyOf(eb.Slice(0, n, n, 2*n)).RawMatrix().Data, nil
	}
	h := func(t float64) (*mat.Dense, error) {
		out := mat.NewDense(n, n, nil)
		if t == 0 {
			return out, nil
		}
		big := mat.NewDense(3*n, 3*n, nil)
		for i := 0; i < n; i++ {
			for j := 0; j < n; j++ {
				big.Set(i, j, a.At(j, i)*t)
				big.Set(n+i, n+j, a.At(j, i)*t)
				big.Set(i, n+j, x.At(i, j)*t)
			}
			big.Set(n+i, 2*n+i, t)
		}
		var eb mat.Dense
		if err := expScaled(&eb, big, 1); err != nil {
			return nil, err
		}
		out.Copy(eb.Slice(0, n, 2*n, 3*n))
		return out, nil
	}
	h1, err := h(hi)
	if err != nil {
		return nil, err
	}
	h0, err := h(lo)
	if err != nil {
		return nil, err
	}
	var k mat.Dense
	k.Sub(h1, h0)
	return k.RawMatrix().Data, nil
}

// finalize turns the accumulated sensitivities into the gradient with
// respect to the log-rates and detection probabilities.
func (e *Evaluator) finalize(acc *accum) (*Gradient, error) {
	n, nl := e.n, e.nl
	sd0 := append([]float64(nil), acc.sd0...)
	sg := append([]float64(nil), acc.sg...)
	gpi := append([]float64(nil), acc.gpi...)
	sd := make([][]float64, nl)
	for l := range sd {
		sd[l] = append([]float64(nil), acc.sd[l]...)
	}
	if s := e.sp; s != nil {
		cm := make([]complex128, n*n)
		for k := 0; k < n; k++ {
			for l := 0; l < n; l++ {
				if k == l {
					cm[k*n+k] = acc.dg[k]
				} else {
					cm[k*n+l] = (acc.p[k*n+l] - acc.q[k*n+l]) * s.rdiff[k*n+l]
				}
			}
		}
		if e.fast {
			zs := make([]complex128, n)
			ds := make([]complex128, n)
			y := make([]float64, n)
			for a := 0; a <= nl; a++ {
				for b := 0; b <= nl; b++ {
					pr := a*(nl+1) + b
					s.blockHatTo(zs, acc.sz[pr])
					s.blockHatTo(ds, acc.szd[pr])
					ah, bh := e.ahat[a], e.bhat[b]
					for k := 0; k < n; k++ {
						for l := 0; l < n; l++ {
							if k == l {
								cm[k*n+k] += ah[k] * bh[k] * ds[k]
							} else {
								cm[k*n+l] += ah[k] * bh[l] * (zs[k] - zs[l]) * s.rdiff[k*n+l]
							}
						}
					}
					// y = Re V (zs o bh): the sum of E b / f over the pair's events.
					for i := 0; i < n; i++ {
						var v complex128
						for k := 0; k < n; k++ {
							v += s.v[i*n+k] * zs[k] * bh[k]
						}
						y[i] = real(v)
					}
					switch {
					case a < nl && e.g != nil:
						row := sg[e.to[a]*n : e.to[a]*n+n]
						for j := range row {
							row[j] += y[j]
						}
					case a == nl:
						for j := range gpi {
							gpi[j] += y[j]
						}
					}
				}
			}
			for l := 0; l < nl; l++ {
				for idx := range sd[l] { // each parallel edge of the label's entry
					sd[l][idx] += acc.cnt[l] / e.pw[l]
				}
			}
		}
		// K = Re(V^{-T} C V^T).
		t := make([]complex128, n*n) // C V^T
		for k := 0; k < n; k++ {
			for j := 0; j < n; j++ {
				var v complex128
				for l := 0; l < n; l++ {
					v += cm[k*n+l] * s.v[j*n+l]
				}
				t[k*n+j] = v
			}
		}
		for i := 0; i < n; i++ {
			for j := 0; j < n; j++ {
				var v complex128
				for k := 0; k < n; k++ {
					v += s.vi[k*n+i] * t[k*n+j]
				}
				sd0[i*n+j] += real(v)
			}
		}
	}
	// Start law w0 = nu G A (StartFirstEvent, general path).
	if e.opt.Start == StartFirstEvent && !e.fast {
		if err := e.startGrad(acc.gw, sd0, sg, sd); err != nil {
			return nil, err
		}
	}
	sl := make([]float64, n*n)
	if e.opt.Start == StartStationary {
		// d pi = -(pi dL) M^{-1}, M = L - 1 pi: contribution -pi^T h^T, M h = gpi.
		m := mat.NewDense(n, n, nil)
		for i := 0; i < n; i++ {
			for j := 0; j < n; j++ {
				m.Set(i, j, e.k.L.At(i, j)-e.pi[j])
			}
		}
		var h mat.VecDense
		if err := h.SolveVec(m, mat.NewVecDense(n, gpi)); err != nil {
			return nil, fmt.Errorf("likelihood: gradient of the stationary law: %w", err)
		}
		for i := 0; i < n; i++ {
			for j := 0; j < n; j++ {
				sl[i*n+j] -= e.pi[i] * h.AtVec(j)
			}
		}
	}
	if e.g != nil {
		k, err := vanLoan(e.k.L, sg, e.delta, e.delta)
		if err != nil {
			return nil, fmt.Errorf("likelihood: gradient through the dead time: %w", err)
		}
		addTo(sl, k)
	}
	g := &Gradient{LogRate: make([]float64, 2*len(e.k.net.Edges)), Detect: make([]float64, nl)}
	entry := make([]int, nl) // index into sd[l] by transition order
	for _, t := range e.k.trans {
		i, j, w := t.From, t.To, t.Rate
		v := w*(sl[i*n+j]-sl[i*n+i]) - w*sd0[i*n+i]
		if t.Label == models.Hidden {
			v += w * sd0[i*n+j]
		} else {
			l := t.Label
			p := e.k.Detect[l]
			sdl := sd[l][entry[l]]
			entry[l]++
			v += w * ((1-p)*sd0[i*n+j] + p*sdl)
			g.Detect[l] += w * (sdl - sd0[i*n+j])
		}
		g.LogRate[2*t.Edge+t.Dir] = v
	}
	for _, v := range g.LogRate {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return nil, fmt.Errorf("likelihood: gradient is not finite (%v)", g.LogRate)
		}
	}
	for _, v := range g.Detect {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return nil, fmt.Errorf("likelihood: gradient with respect to the detection probabilities is not finite (%v)", g.Detect)
		}
	}
	return g, nil
}

// startGrad adds the sensitivities through the start law w0 = nu G A,
// nu the stationary law of K = G A D, given gw = d ln L / d w0:
//
//	dw0 gw = d nu r + nu dG q + w0 dD0 q,    q = A gw, r = G q,
//	d nu r = nu dK h,  h = (I - K + 1 nu)^{-1} r,
//	nu dK h = nu dG (A D h) + w0 dD0 (A D h) + sum_l w0 dD_l h.
func (e *Evaluator) startGrad(gw, sd0, sg []float64, sd [][]float64) error {
	n := e.n
	allZero := true
	for _, v := range gw {
		if v != 0 {
			allZero = false
		}
	}
	if allZero {
		return nil
	}
	q := make([]float64, n)
	timesCol(q, e.amat.RawMatrix().Data, gw, n)
	r := make([]float64, n)
	if e.g != nil {
		timesCol(r, e.g, q, n)
	} else {
		copy(r, q)
	}
	z := mat.NewDense(n, n, nil)
	for i := 0; i < n; i++ {
		for j := 0; j < n; j++ {
			v := -e.kmat.At(i, j) + e.nu[j]
			if i == j {
				v++
			}
			z.Set(i, j, v)
		}
	}
	var hv mat.VecDense
	if err := hv.SolveVec(z, mat.NewVecDense(n, r)); err != nil {
		return fmt.Errorf("likelihood: gradient of the post-event law: %w", err)
	}
	h := hv.RawVector().Data
	dh := make([]float64, n)
	for l := range e.dsp {
		for _, d := range e.dsp[l] {
			dh[d.i] += d.v * h[d.j]
		}
	}
	adh := make([]float64, n)
	timesCol(adh, e.amat.RawMatrix().Data, dh, n)
	for j := range q {
		q[j] += adh[j]
	}
	for i := 0; i < n; i++ {
		for j := 0; j < n; j++ {
			sd0[i*n+j] += e.w0[i] * q[j]
			if e.g != nil {
				sg[i*n+j] += e.nu[i] * q[j]
			}
		}
	}
	for l := range e.dsp {
		for idx, d := range e.dsp[l] {
			sd[l][idx] += e.w0[d.i] * h[d.j]
		}
	}
	return nil
}
