package likelihood

import (
	"errors"
	"fmt"
	"math"
	"runtime"
	"sync"
	"sync/atomic"

	"edgewise/models"

	"gonum.org/v1/gonum/mat"
)

// StartMode chooses how the first event of each record enters the
// likelihood.
type StartMode int

const (
	// StartFirstEvent (the default) conditions each record on its first
	// event: the state right after it has the stationary post-event law
	// given its label, alpha_1 proportional to nu exp(L delta) (-D0)^{-1} D_{l_1},
	// nu the stationary law of the post-event chain; without dead time
	// this is proportional to pi D_{l_1}, pi the stationary law of L. The
	// first event's time and label contribute nothing.
	StartFirstEvent StartMode = iota
	// StartStationary assumes the observation began at time 0 (the clock
	// origin of the record) with the chain in its stationary law pi and the
	// instrument ready (no dead time running), and includes the density of
	// the first event: pi exp(D0 t_1) D_{l_1}; with frames (timestamps are
	// frame starts) the probability pi int_{t_1}^{t_1+F} exp(D0 s) ds D_{l_1}.
	// Record times must be >= 0.
	StartStationary
)

// PathMode chooses between the general forward recursion and the fast path.
type PathMode int

const (
	// PathAuto uses the fast path when it applies (every label on one
	// directed edge and the spectral route in use), else the general one.
	PathAuto PathMode = iota
	// PathGeneral always runs the forward recursion on state vectors.
	PathGeneral
	// PathFast requires the fast path and fails when it does not apply.
	PathFast
)

// Options configures an Evaluator.
type Options struct {
	Start      StartMode
	Instrument Instrument
	// Workers is the number of goroutines; <= 0 means GOMAXPROCS. The
	// result does not depend on it, bit for bit: the data are cut into
	// work items by a rule that depends on the data only, and the
	// per-item results are summed in item order.
	Workers int
	// Method is the route for exp(D0 t); ExpAuto (the default) is spectral
	// with an automatic fallback to Pade.
	Method ExpMethod
	Path   PathMode
}

// Evaluator computes the log-likelihood of data sets, and its gradient,
// for one network under one set of options. Building it costs O(N^3)
// (eigen-decomposition of D0, stationary laws, exp(L delta)); each
// evaluation then costs O(N) per event on the fast path and O(N^2) per
// event on the general path with the spectral route. It is immutable and
// safe for concurrent use.
type Evaluator struct {
	k     *Kernels
	opt   Options
	n, nl int
	prop  *Propagator
	sp    *spectral // non-nil when the spectral route is in use
	// Dense route: exp(D0 t) for exact times is evaluated as
	// e^{dshift t} exp((D0 - dshift I) t), dshift an estimate of the Perron
	// eigenvalue of D0, so that long gaps do not underflow.
	dshift float64
	d0s    *mat.Dense
	dprop  *Propagator
	delta  float64
	frame  float64
	g      []float64  // exp(L delta) row-major, nil without dead time
	pi     []float64  // stationary law of L
	nu     []float64  // stationary post-event law (sum 1)
	w0     []float64  // nu G A: the pre-D law of the first event (StartFirstEvent)
	amat   *mat.Dense // A = (-D0)^{-1}
	kmat   *mat.Dense // K = G A D, the post-event chain
	dsp    [][]dEntry
	fast   bool
	// Fast path tables (labels on one edge each). Pair index
	// p = a*(nl+1) + b, a = previous label (nl: the stationary start),
	// b = next label (nl: the censored end).
	from, to []int
	pw       []float64
	cf       [][]float64 // [pair] f = dot(cf, z)
	// Hot-loop tables: f = hc0[p] + sum_i hc[p][i] e^{hmu[i] tau} + pair terms,
	// hmu the real eigenvalues minus lmax without the Perron one (whose
	// term is the constant hc0).
	hmu  []float64
	hidx []int
	hc0  []float64
	hc   [][]float64
	// hfloor[p] = spectralRelFloor * sum |cf[p]|, an upper bound of the
	// cancellation threshold at any tau >= 0.
	hfloor []float64
	ahat   [][]complex128 // [a] V^T a
	bhat   [][]complex128 // [b] V^{-1} b
	avec   [][]float64    // [a] the pair's row vector a (fast path)
	bvec   [][]float64    // [b] the pair's column vector b (fast path)
	// Spectral route, entry-wise accurate fallback: a value that is a sum
	// of eigen-terms is only absolutely accurate (error ~ eps cond sum
	// |terms|), so a value below spectralRelFloor times the sum of |terms|
	// is recomputed by uniformisation (all terms non-negative), scaled by
	// the same e^{-lmax lo} as the spectral value.
	uexp   *Propagator // uniformisation of D0 - lmax I (exact times)
	uint0  *Propagator // uniformisation of D0 (box integrals over [0, w])
	reach  []bool      // reach[i*n+j]: j reachable from i under D0 (i reaches i)
	need   [][]int     // [l] the distinct source states of D_l
	needTo [][]int     // [l] the distinct target states of D_l
}

// spectralRelFloor: a spectral value f (a pair factor, or an entry of a
// propagated vector on the general path) with f <= spectralRelFloor *
// sum |terms| is recomputed by uniformisation. The spectral error is
// about eps cond(V) sum |terms|, so above the threshold the relative
// error is at most about eps cond(V) / spectralRelFloor (~2e-8 for
// cond(V) ~ 1, the size of the fast path's eigen-sums on small rings),
// and it falls as 1/f above it.
const spectralRelFloor = 1e-8

type dEntry struct {
	i, j int
	v    float64
}

// NewEvaluator prepares the likelihood of the kernels k (from NewKernels,
// not modified afterwards) under opt. It fails when the options are
// invalid, when D0 is singular (some state never reaches a visible
// transition), or when PathFast is asked for and does not apply.
func NewEvaluator(k *Kernels, opt Options) (*Evaluator, error) {
	if k == nil || k.net == nil {
		return nil, errors.New("likelihood: evaluator: kernels must come from NewKernels")
	}
	if err := opt.Instrument.Validate(); err != nil {
		return nil, err
	}
	if opt.Start != StartFirstEvent && opt.Start != StartStationary {
		return nil, fmt.Errorf("likelihood: unknown start mode %d", opt.Start)
	}
	n, nl := k.N, len(k.D)
	e := &Evaluator{k: k, opt: opt, n: n, nl: nl, delta: opt.Instrument.DeadTime, frame: opt.Instrument.Frame}
	prop, err := NewPropagator(k.D0, opt.Method)
	if err != nil {
		return nil, err
	}
	e.prop = prop
	if prop.Method() == ExpSpectral {
		e.sp = prop.spec
		if err := e.spectralFallback(); err != nil {
			return nil, err
		}
	} else if err := e.denseShift(); err != nil {
		return nil, err
	}
	pi, err := k.net.Stationary()
	if err != nil {
		return nil, fmt.Errorf("likelihood: %w", err)
	}
	e.pi = pi
	e.dsp = make([][]dEntry, nl)
	for l, ts := range k.Edges {
		for _, t := range ts {
			e.dsp[l] = append(e.dsp[l], dEntry{t.From, t.To, k.Detect[l] * t.Rate})
		}
	}
	if e.delta > 0 {
		var g mat.Dense
		if err := expScaled(&g, k.L, e.delta); err != nil {
			return nil, err
		}
		e.g = append([]float64(nil), g.RawMatrix().Data...)
	}
	if err := e.startLaw(); err != nil {
		return nil, err
	}
	single := true
	for _, ts := range k.Edges {
		if len(ts) != 1 {
			single = false
		}
	}
	switch opt.Path {
	case PathAuto:
		e.fast = single && e.sp != nil
	case PathFast:
		if !single {
			return nil, errors.New("likelihood: fast path needs every label on exactly one directed edge")
		}
		if e.sp == nil {
			return nil, fmt.Errorf("likelihood: fast path needs the spectral route (in use: %v)", prop.Method())
		}
		e.fast = true
	case PathGeneral:
	default:
		return nil, fmt.Errorf("likelihood: unknown path mode %d", opt.Path)
	}
	if e.fast {
		e.fastTables()
	}
	return e, nil
}

// denseShift prepares the shifted matrix D0 - s I of the dense route, s
// the largest real part of a computed eigenvalue of D0 (clamped at 0).
// The value is exact for any s (e^{s t} is added back to ln L); s only
// has to keep exp((D0 - s I) t) away from underflow and overflow. For a
// defective D0 (a Jordan block of size m at the Perron eigenvalue lmax,
// e.g. an irreversible ring with equal rates) rounding moves the computed
// eigenvalues by about eps^{1/m} |lmax|, so exp((D0 - s I) t) is not
// bounded: it grows like t^{m-1} (the Jordan block) times
// e^{(lmax - s) t}, exponentially only at the rate |lmax - s| ~ eps^{1/m}
// |lmax| (6e-6 |lmax| for m = 3), which is harmless unless |lmax| t is
// beyond ~1e5 (and even then only moves the scale of the shifted matrix).
func (e *Evaluator) denseShift() error {
	var eig mat.Eigen
	s := 0.0
	if eig.Factorize(e.k.D0, mat.EigenNone) {
		s = math.Inf(-1)
		for _, v := range eig.Values(nil) {
			s = math.Max(s, real(v))
		}
		s = math.Min(s, 0)
		if math.IsInf(s, 0) || math.IsNaN(s) {
			s = 0
		}
	}
	e.dshift = s
	e.d0s = mat.DenseCopyOf(e.k.D0)
	for i := 0; i < e.n; i++ {
		e.d0s.Set(i, i, e.d0s.At(i, i)-s)
	}
	p, err := NewPropagator(e.d0s, e.prop.Method())
	if err != nil {
		return err
	}
	e.dprop = p
	return nil
}

// spectralFallback prepares the uniformisation route used for events
// whose spectral value cancels (see spectralRelFloor).
func (e *Evaluator) spectralFallback() error {
	n, s := e.n, e.sp
	d0u := mat.DenseCopyOf(e.k.D0)
	for i := 0; i < n; i++ {
		// lmax >= max_i D0_ii for a Metzler matrix, so the diagonal stays
		// <= 0 (up to rounding, which uniformisation tolerates).
		d0u.Set(i, i, d0u.At(i, i)-s.lmax)
	}
	e.d0s = d0u // for the Van Loan sensitivities of cancelled events
	var err error
	if e.uexp, err = NewPropagator(d0u, ExpUniform); err != nil {
		return err
	}
	if e.uint0, err = NewPropagator(e.k.D0, ExpUniform); err != nil {
		return err
	}
	// Reachability under D0 (Warshall), for structural zeros.
	e.reach = make([]bool, n*n)
	for i := 0; i < n; i++ {
		for j := 0; j < n; j++ {
			e.reach[i*n+j] = i == j || e.k.D0.At(i, j) > 0
		}
	}
	for k := 0; k < n; k++ {
		for i := 0; i < n; i++ {
			if !e.reach[i*n+k] {
				continue
			}
			for j := 0; j < n; j++ {
				if e.reach[k*n+j] {
					e.reach[i*n+j] = true
				}
			}
		}
	}
	e.need = make([][]int, len(e.k.D))
	e.needTo = make([][]int, len(e.k.D))
	for l, ts := range e.k.Edges {
		seen, seenTo := map[int]bool{}, map[int]bool{}
		for _, t := range ts {
			if !seen[t.From] {
				seen[t.From] = true
				e.need[l] = append(e.need[l], t.From)
			}
			if !seenTo[t.To] {
				seenTo[t.To] = true
				e.needTo[l] = append(e.needTo[l], t.To)
			}
		}
	}
	return nil
}

// cancels reports whether a spectral value v = sum_k u_k h_k lost its
// relative accuracy: v <= spectralRelFloor * sum_k |u_k h_k|.
func cancels(v float64, u, h []float64) bool {
	m := 0.0
	for k, x := range u {
		m += math.Abs(x * h[k])
	}
	return !(v > spectralRelFloor*m)
}

// rowCancels checks the spectral row out = u W^{-1} (u = x W B(z), as
// propRow leaves it in ws.u) entry-wise on the states that D_l reads (all
// states for the end step, l < 0): an entry that is structurally zero
// (no state of x's support reaches it under D0) is set to 0; any other
// entry at or below spectralRelFloor times the sum of its |terms| means
// the row lost relative accuracy (true is returned).
func (e *Evaluator) rowCancels(out, u, x []float64, l int) bool {
	n, wi := e.n, e.sp.wi
	bad := false
	check := func(j int) {
		structural := true
		for i, v := range x {
			if v != 0 && e.reach[i*n+j] {
				structural = false
				break
			}
		}
		if structural {
			out[j] = 0
			return
		}
		m := 0.0
		for k, uk := range u {
			m += math.Abs(uk * wi[k*n+j])
		}
		if !(out[j] > spectralRelFloor*m) {
			bad = true
		}
	}
	if l < 0 {
		for j := 0; j < n; j++ {
			check(j)
		}
	} else {
		for _, j := range e.need[l] {
			check(j)
		}
	}
	return bad
}

// colCancels is rowCancels for the spectral column out = W y (y = B(z)
// W^{-1} b, as propCol leaves it in ws.y), before the backward step's
// exp(L delta) (when useG): structural zeros of out are set to 0, and the
// entries need of the step's result (G out, or out) are checked against
// the same combination of the |terms|. mag is scratch space of length n.
func (e *Evaluator) colCancels(out, y, b, mag []float64, useG bool, need []int) bool {
	n, w := e.n, e.sp.w
	for i := 0; i < n; i++ {
		structural := true
		for j, v := range b {
			if v != 0 && e.reach[i*n+j] {
				structural = false
				break
			}
		}
		mag[i] = 0
		if structural {
			out[i] = 0
			continue
		}
		for k, yk := range y {
			mag[i] += math.Abs(w[i*n+k] * yk)
		}
	}
	for _, j := range need {
		v, m := out[j], mag[j]
		if useG {
			v, m = 0, 0
			row := e.g[j*n : j*n+n]
			for i, gv := range row {
				v += gv * out[i]
				m += math.Abs(gv) * mag[i]
			}
		}
		if m > 0 && !(v > spectralRelFloor*m) {
			return true // (m == 0: an exact structural zero)
		}
	}
	return false
}

// accurateE returns E(lo, hi) scaled by e^{-lmax lo} by uniformisation,
// for events whose spectral value cancels (spectral route only).
func (e *Evaluator) accurateE(ws *work, lo, hi float64) ([]float64, error) {
	if ws.ucache == nil {
		ws.ucache = map[[2]float64][]float64{}
	}
	return shiftedE(ws.ucache, ws.emat, e.n, e.uexp, e.uint0, lo, hi)
}

// hotCancels is the exact cancellation test of the fast path's hot loop:
// f <= spectralRelFloor * sum |terms| at the exact time tau.
func (e *Evaluator) hotCancels(f float64, pr int, tau float64) bool {
	s := e.sp
	fa := math.Abs(e.hc0[pr])
	for i, mu := range e.hmu {
		fa += math.Abs(e.hc[pr][i] * math.Exp(mu*tau))
	}
	c := e.cf[pr]
	for _, p := range s.pairs {
		sn, cs := math.Sincos(p.b * tau)
		fa += math.Abs(math.Exp((p.a-s.lmax)*tau) * (c[p.k]*cs + c[p.k+1]*sn))
	}
	return !(f > spectralRelFloor*fa)
}

// fastAccurate returns the pair factor of pair pr over [lo, hi] by
// uniformisation, scaled like the spectral one.
func (e *Evaluator) fastAccurate(ws *work, pr int, lo, hi float64) (float64, error) {
	m, err := e.accurateE(ws, lo, hi)
	if err != nil {
		return 0, err
	}
	np1 := e.nl + 1
	a, b := e.avec[pr/np1], e.bvec[pr%np1]
	timesCol(ws.x, m, b, e.n)
	return dot(a, ws.x), nil
}

// NewNetworkEvaluator builds the kernels of net and an Evaluator.
func NewNetworkEvaluator(net *models.Network, opt Options) (*Evaluator, error) {
	k, err := NewKernels(net)
	if err != nil {
		return nil, err
	}
	return NewEvaluator(k, opt)
}

// Method returns the exponential route in use (after any fallback).
func (e *Evaluator) Method() ExpMethod { return e.prop.Method() }

// Fast reports whether evaluations use the fast path.
func (e *Evaluator) Fast() bool { return e.fast }

// startLaw computes nu, the stationary law of K = G A D (G = exp(L delta),
// A = (-D0)^{-1}, D = sum_l D_l), and w0 = nu G A, by the same
// subtraction-free routes as the Predictor (obsMSolve for A, the GTH
// reduction obsStationaryDTMC for nu), so that both agree entry-wise on
// stiff networks.
func (e *Evaluator) startLaw() error {
	n := e.n
	dsum := mat.NewDense(n, n, nil)
	absorb := make([]float64, n)
	for _, es := range e.dsp {
		for _, d := range es {
			dsum.Set(d.i, d.j, dsum.At(d.i, d.j)+d.v)
			absorb[d.i] += d.v
		}
	}
	a, err := obsMSolve(e.k.D0, absorb, obsIdentity(n))
	if err != nil {
		return fmt.Errorf("likelihood: D0 is singular (some states never reach a visible transition): %w", err)
	}
	ga := mat.NewDense(n, n, nil)
	if e.g != nil {
		ga.Mul(mat.NewDense(n, n, e.g), a)
		obsClampNeg(ga)
	} else {
		ga.Copy(a)
	}
	kk := mat.NewDense(n, n, nil)
	kk.Mul(ga, dsum)
	// GTH needs a recurrent first state: the target of a visible transition.
	first := -1
	for _, es := range e.dsp {
		for _, d := range es {
			if first < 0 && d.v > 0 {
				first = d.j
			}
		}
	}
	if first < 0 {
		return errors.New("likelihood: no visible transition with a positive rate")
	}
	rows := make([][]float64, n)
	for i := range rows {
		rows[i] = mat.Row(nil, i, kk)
	}
	nu, err := obsStationaryDTMC(rows, first)
	if err != nil {
		return fmt.Errorf("likelihood: stationary post-event law: %w", err)
	}
	e.nu = nu
	e.w0 = make([]float64, n)
	rowTimes(e.w0, e.nu, ga.RawMatrix().Data, n)
	e.amat, e.kmat = a, kk
	return nil
}

// fastTables precomputes, for every (previous, next) pair, the vectors
// a^T W and W^{-1} b and their block products, so that
// psi = a^T exp(D0 tau) b = dot(cf, z(tau)).
func (e *Evaluator) fastTables() {
	n, nl, s := e.n, e.nl, e.sp
	e.from, e.to, e.pw = make([]int, nl), make([]int, nl), make([]float64, nl)
	for l, ts := range e.k.Edges {
		e.from[l], e.to[l], e.pw[l] = ts[0].From, ts[0].To, e.dsp[l][0].v
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
			u, v := us[a], vs[b]
			c := make([]float64, n)
			for k := 0; k < n; k++ {
				switch s.kind[k] {
				case 0:
					c[k] = u[k] * v[k]
				case 1:
					c[k] = u[k]*v[k] + u[k+1]*v[k+1]
					c[k+1] = u[k]*v[k+1] - u[k+1]*v[k]
				}
			}
			e.cf[a*(nl+1)+b] = c
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

// LogLik returns the log-likelihood of d (natural log; densities in
// 1/time for exact timestamps, probabilities for frame intervals).
func (e *Evaluator) LogLik(d *Data) (float64, error) {
	acc, err := e.run(d, false, nil)
	if err != nil {
		return math.NaN(), err
	}
	return acc.ll, nil
}

// RecordLogLiks returns each record's contribution to ln L, in the order
// of d.Records (for per-record comparisons and bootstraps over records).
// Their sum equals LogLik up to summation order.
func (e *Evaluator) RecordLogLiks(d *Data) ([]float64, error) {
	if d == nil {
		return nil, errors.New("likelihood: no records")
	}
	out := make([]float64, len(d.Records))
	if _, err := e.run(d, false, out); err != nil {
		return nil, err
	}
	return out, nil
}

// LogLik is a convenience: the log-likelihood of d under net.
func LogLik(net *models.Network, d *Data, opt Options) (float64, error) {
	e, err := NewNetworkEvaluator(net, opt)
	if err != nil {
		return math.NaN(), err
	}
	return e.LogLik(d)
}

// dataLabels maps data label indices to kernel label indices.
func (e *Evaluator) dataLabels(d *Data) ([256]int16, error) {
	var lm [256]int16
	for i := range lm {
		lm[i] = -1
	}
	if len(d.Labels) > 256 {
		return lm, fmt.Errorf("likelihood: %d labels; at most 256", len(d.Labels))
	}
	for i, name := range d.Labels {
		j := -1
		for l, kn := range e.k.Labels {
			if kn == name {
				j = l
			}
		}
		if j < 0 {
			return lm, fmt.Errorf("likelihood: data label %q is not a label of the model (model labels %q)", name, e.k.Labels)
		}
		lm[i] = int16(j)
	}
	return lm, nil
}

// item is one unit of work: whole records (general path) or a range of
// events of one record (fast path). Items depend on the data only.
type item struct {
	segs  []segment
	acc   *accum
	err   error
	parts []float64 // ln L of each segment, when per-record values are wanted
}

type segment struct {
	r      int
	k0, k1 int // events [k0, k1)
}

// itemEvents is the target number of events per work item.
const itemEvents = 1 << 15

func (e *Evaluator) items(d *Data) []item {
	var its []item
	var cur item
	count := 0
	flush := func() {
		if len(cur.segs) > 0 {
			its = append(its, cur)
		}
		cur, count = item{}, 0
	}
	for r := range d.Records {
		n := d.Records[r].Len()
		if e.fast && n > itemEvents {
			flush()
			for k0 := 0; k0 < n; k0 += itemEvents {
				cur.segs = append(cur.segs, segment{r, k0, min(k0+itemEvents, n)})
				flush()
			}
			continue
		}
		cur.segs = append(cur.segs, segment{r, 0, n})
		count += n
		if count >= itemEvents {
			flush()
		}
	}
	flush()
	return its
}

// run evaluates d, with the gradient accumulators when grad is true, and
// adds each record's ln L to perRecord[r] when perRecord is not nil.
func (e *Evaluator) run(d *Data, grad bool, perRecord []float64) (*accum, error) {
	if d == nil || len(d.Records) == 0 {
		return nil, errors.New("likelihood: no records")
	}
	lm, err := e.dataLabels(d)
	if err != nil {
		return nil, err
	}
	for r := range d.Records {
		rec := &d.Records[r]
		if rec.Len() == 0 {
			return nil, fmt.Errorf("likelihood: record %q is empty", rec.ID)
		}
		if len(rec.Label) != len(rec.Time) {
			return nil, fmt.Errorf("likelihood: record %q has %d times and %d labels", rec.ID, len(rec.Time), len(rec.Label))
		}
		if t := rec.Time[0]; math.IsNaN(t) || math.IsInf(t, 0) {
			return nil, fmt.Errorf("likelihood: record %q event 1: time %v is not finite", rec.ID, t)
		}
	}
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
			ws := e.newWork(grad)
			for {
				i := int(next.Add(1)) - 1
				if i >= len(its) {
					return
				}
				it := &its[i]
				it.acc = e.newAccum(grad)
				ws.acc = it.acc
				for _, sg := range it.segs {
					var err error
					var ll0, lm0 float64
					if perRecord != nil {
						// Evaluate the segment from zero, so that its value is exact.
						ll0, lm0 = it.acc.ll, it.acc.lmant
						it.acc.ll, it.acc.lmant = 0, 0
					}
					if e.fast {
						err = e.fastSegment(ws, d, &lm, sg)
					} else {
						err = e.generalRecord(ws, d, &lm, sg.r)
					}
					if err != nil {
						it.err = err
						break
					}
					if perRecord != nil {
						it.parts = append(it.parts, it.acc.ll+it.acc.lmant)
						it.acc.ll, it.acc.lmant = ll0+it.acc.ll, lm0+it.acc.lmant
					}
				}
			}
		}()
	}
	wg.Wait()
	total := e.newAccum(grad)
	for i := range its {
		if its[i].err != nil {
			return nil, its[i].err
		}
		total.add(its[i].acc)
		for j, v := range its[i].parts {
			perRecord[its[i].segs[j].r] += v
		}
	}
	total.ll += total.lmant
	if math.IsNaN(total.ll) || math.IsInf(total.ll, 0) {
		return nil, fmt.Errorf("likelihood: log-likelihood is %v", total.ll)
	}
	return total, nil
}

// accum holds the log-likelihood and the gradient accumulators of a
// work item. All gradient accumulators are sensitivities of ln L:
// sd0 to the entries of D0 (direct), sg to exp(L delta), sd[l][e] to the
// e-th entry of D_l, gw to the start law w0, gpi to pi; p, q, dg are the
// eigen-coordinate sums whose combination gives the sensitivity to D0
// through exp(D0 t) (see gradient.go); sz, szd, cnt are the fast-path
// per-pair sums.
type accum struct {
	ll    float64
	lmant float64 // the fast path's ln L (mantissa, power of two and shifts)
	grad  bool
	sd0   []float64
	sg    []float64
	sd    [][]float64
	gw    []float64
	gpi   []float64
	p, q  []complex128
	dg    []complex128
	sz    [][]float64
	szd   [][]float64
	cnt   []float64
}

func (e *Evaluator) newAccum(grad bool) *accum {
	a := &accum{grad: grad}
	if !grad {
		return a
	}
	n := e.n
	a.sd0 = make([]float64, n*n)
	a.sg = make([]float64, n*n)
	a.sd = make([][]float64, e.nl)
	for l := range a.sd {
		a.sd[l] = make([]float64, len(e.dsp[l]))
	}
	a.gw = make([]float64, n)
	a.gpi = make([]float64, n)
	if e.sp != nil {
		a.p = make([]complex128, n*n)
		a.q = make([]complex128, n*n)
		a.dg = make([]complex128, n)
	}
	if e.fast {
		np := (e.nl + 1) * (e.nl + 1)
		a.sz = make([][]float64, np)
		a.szd = make([][]float64, np)
		for i := range a.sz {
			a.sz[i] = make([]float64, n)
			a.szd[i] = make([]float64, n)
		}
		a.cnt = make([]float64, e.nl)
	}
	return a
}

func addTo[T float64 | complex128](dst, src []T) {
	for i := range src {
		dst[i] += src[i]
	}
}

func (a *accum) add(b *accum) {
	a.ll += b.ll
	a.lmant += b.lmant
	if !a.grad {
		return
	}
	addTo(a.sd0, b.sd0)
	addTo(a.sg, b.sg)
	for l := range a.sd {
		addTo(a.sd[l], b.sd[l])
	}
	addTo(a.gw, b.gw)
	addTo(a.gpi, b.gpi)
	addTo(a.p, b.p)
	addTo(a.q, b.q)
	addTo(a.dg, b.dg)
	for i := range a.sz {
		addTo(a.sz[i], b.sz[i])
		addTo(a.szd[i], b.szd[i])
	}
	addTo(a.cnt, b.cnt)
}

// interval returns the range [lo, hi] of the time spent under D0 for a
// reported gap g, and whether that range is possible:
//
//   - exact timestamps: lo = hi = g - delta (requires g >= delta);
//   - frames of length F: the gap lies in [max(g - F/2, 0), g + F/2],
//     shifted by the dead time and clipped at 0 (requires g + F/2 > delta).
func (e *Evaluator) interval(g float64, dead bool) (lo, hi float64, ok bool) {
	dt := 0.0
	if dead {
		dt = e.delta
	}
	if e.frame == 0 {
		t := g - dt
		return t, t, t >= 0 && !math.IsInf(t, 0)
	}
	if !(g >= 0) || math.IsInf(g, 0) {
		return 0, 0, false
	}
	lo = math.Max(g-e.frame/2, 0) - dt
	hi = g + e.frame/2 - dt
	return math.Max(lo, 0), hi, hi > 0
}

// firstInterval is interval for the first event of a stationary start
// (time t1 after the clock origin 0, no dead time running): exact
// timestamps give [t1, t1]; frames give [t1, t1 + F], since the record
// starts at 0, a frame start, and t1 is the start of the frame holding
// the event.
func (e *Evaluator) firstInterval(t1 float64) (lo, hi float64, ok bool) {
	if !(t1 >= 0) || math.IsInf(t1, 0) {
		return 0, 0, false
	}
	return t1, t1 + e.frame, true
}

// endTime is the time under D0 of the censored end: End - t_n - delta,
// and with frames End - t_n - F/2 - delta (t_n a frame start: the last
// event lies in [t_n, t_n + F), taken at the frame's centre; End is exact).
func (e *Evaluator) endTime(end, tn float64) float64 {
	return end - tn - e.frame/2 - e.delta
}

// gapError describes an impossible or invalid gap.
func gapError(rec *Record, k int, g float64, delta float64) error {
	t := rec.Time[k]
	switch {
	case math.IsNaN(t) || math.IsInf(t, 0):
		return fmt.Errorf("likelihood: record %q event %d: time %v is not finite", rec.ID, k+1, t)
	case k > 0 && (math.IsNaN(rec.Time[k-1]) || math.IsInf(rec.Time[k-1], 0)):
		return fmt.Errorf("likelihood: record %q event %d: time %v is not finite", rec.ID, k, rec.Time[k-1])
	case g < 0:
		return fmt.Errorf("likelihood: record %q event %d: time %v is before the previous event (%v)", rec.ID, k+1, t, t-g)
	}
	return fmt.Errorf("likelihood: record %q event %d: gap %v is shorter than the dead time %v: impossible under the instrument", rec.ID, k+1, g, delta)
}

func impossible(rec *Record, k int, what string, v float64) error {
	if k >= len(rec.Time) {
		return fmt.Errorf("likelihood: record %q: censored end at %v: %s %v: impossible under the model", rec.ID, rec.End, what, v)
	}
	return fmt.Errorf("likelihood: record %q event %d (time %v): %s %v: impossible under the model", rec.ID, k+1, rec.Time[k], what, v)
}

// work holds per-goroutine scratch space.
type work struct {
	acc                 *accum
	z, dz               []float64
	u, u0, x, y, b, v   []float64
	alpha, alpha2, beta []float64
	ah, bh, zh, dh      []complex128
	ck, buf             []float64 // checkpoints and segment buffer of backward vectors
	emat                *mat.Dense
	cache               map[[2]float64][]float64 // dense route: interval -> matrix
	ccache              map[[2]float64][]float64 // spectral route, frames: interval -> z, dz, shift
	vl                  map[[2]float64][]float64 // dense route: interval -> sum a b^T / c
	ucache              map[[2]float64][]float64 // spectral route: accurate fallback matrices
	mag                 []float64                // scratch for colCancels
}

func (e *Evaluator) newWork(grad bool) *work {
	n := e.n
	f := func() []float64 { return make([]float64, n) }
	w := &work{z: f(), dz: f(), u: f(), u0: f(), x: f(), y: f(), b: f(), v: f(), mag: f(),
		alpha: f(), alpha2: f(), beta: f(),
		ah: make([]complex128, n), bh: make([]complex128, n), zh: make([]complex128, n), dh: make([]complex128, n)}
	if e.sp != nil && e.frame > 0 {
		w.ccache = map[[2]float64][]float64{}
	}
	w.emat = mat.NewDense(n, n, nil)
	if e.sp == nil {
		w.cache = map[[2]float64][]float64{}
		if grad {
			w.vl = map[[2]float64][]float64{}
		}
	}
	return w
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
			if !(tau >= 0) || tau > math.MaxFloat64 {
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

// accurateRow sets out = x E(lo, hi) e^{-lmax lo} by uniformisation.
func (e *Evaluator) accurateRow(ws *work, out, x []float64, lo, hi float64) error {
	m, err := e.accurateE(ws, lo, hi)
	if err != nil {
		return err
	}
	rowTimes(out, x, m, e.n)
	return nil
}

func sum(v []float64) float64 {
	s := 0.0
	for _, x := range v {
		s += x
	}
	return s
}

func dot(a, b []float64) float64 {
	s := 0.0
	for i, x := range a {
		s += x * b[i]
	}
	return s
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
	if e.opt.Start == StartStationary {
		copy(alpha, e.pi)
	} else {
		e.applyDRow(alpha, e.w0, int(l1))
		s := sum(alpha)
		if !(s > 0) {
			return impossible(rec, 0, "first-event probability", s)
		}
		for i := range alpha {
			alpha[i] /= s
		}
	}
	if ws.acc.grad {
		return e.generalGrad(ws, rec, steps, info, int(l1))
	}
	acc := ws.acc
	x, tmp := ws.x, ws.alpha2
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
		shift, err := e.propRow(ws, tmp, x, st.lo, st.hi, false)
		if err != nil {
			return err
		}
		if e.sp != nil && e.rowCancels(tmp, ws.u, x, st.lab) {
			if err := e.accurateRow(ws, tmp, x, st.lo, st.hi); err != nil {
				return err
			}
		}
		e.applyDRow(alpha, tmp, st.lab)
		c := sum(alpha)
		if !(c > 0) || c > math.MaxFloat64 {
			return impossible(rec, st.k, "density", c)
		}
		acc.ll += math.Log(c) + shift
		for i := range alpha {
			alpha[i] /= c
		}
	}
	return nil
}
