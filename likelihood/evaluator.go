package likelihood

import (
	"errors"
	"fmt"
	"math"

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
	// directed edge, or on parallel edges in the same direction, so that
	// the state after each event is known; and the spectral route in
	// use), else the general one.
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
	single := true // every label on one ordered pair of states
	for _, ts := range k.Edges {
		if len(ts) == 0 {
			single = false
		}
		for _, t := range ts {
			single = single && t.From == ts[0].From && t.To == ts[0].To
		}
	}
	switch opt.Path {
	case PathAuto:
		e.fast = single && e.sp != nil
	case PathFast:
		if !single {
			return nil, errors.New("likelihood: fast path needs every label on exactly one directed edge (or on parallel edges in the same direction)")
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
