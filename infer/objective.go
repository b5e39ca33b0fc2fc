package infer

import (
	"errors"
	"fmt"
	"math"
	"sync"

	"edgewise/likelihood"
	"edgewise/models"
)

// softSpan is the half-width, in natural-log units, of the range a rate
// without an upper bound can take around its centre: ln x = c + A tanh((u - c)/A)
// with A = softSpan keeps every rate within a factor e^46 (about 1e20) of
// the centre c, so that no trial step of the optimiser can overflow a rate,
// while within a factor e^10 of the centre the map is the identity to 5%.
const softSpan = 46.0

// coord maps one free parameter between the optimiser's unconstrained
// coordinate u and its value x.
//
//   - rate with no upper bound: x = lo + exp(c + A tanh((u - c)/A)),
//     A = softSpan, c the log of the start value above lo;
//   - rate with a finite upper bound, and every detection probability:
//     x = lo + (hi - lo) / (1 + exp(-u)).
//
// Both maps are smooth and strictly increasing, so a bound is never
// crossed and never reached: a parameter that runs to a bound shows as u
// running away, which Fit reports.
type coord struct {
	lo, hi  float64
	logSoft bool
	c       float64
}

func (c coord) x(u float64) float64 {
	if c.logSoft {
		return c.lo + math.Exp(c.c+softSpan*math.Tanh((u-c.c)/softSpan))
	}
	return c.lo + (c.hi-c.lo)/(1+math.Exp(-u))
}

// dx returns dx/du at u.
func (c coord) dx(u float64) float64 {
	if c.logSoft {
		t := math.Tanh((u - c.c) / softSpan)
		return math.Exp(c.c+softSpan*t) * (1 - t*t)
	}
	s := 1 / (1 + math.Exp(-u))
	return (c.hi - c.lo) * s * (1 - s)
}

// u inverts x; x must lie strictly inside (lo, hi).
func (c coord) u(x float64) float64 {
	if c.logSoft {
		z := (math.Log(x-c.lo) - c.c) / softSpan
		z = math.Max(-1+1e-15, math.Min(1-1e-15, z))
		return c.c + softSpan*math.Atanh(z)
	}
	p := (x - c.lo) / (c.hi - c.lo)
	return math.Log(p) - math.Log1p(-p)
}

// saturated reports how close x(u) is to the end of its range: 0 at the
// centre, 1 at a bound (or at the soft limit of an unbounded rate).
func (c coord) saturated(u float64) float64 {
	if c.logSoft {
		return math.Abs(math.Tanh((u - c.c) / softSpan))
	}
	s := 1 / (1 + math.Exp(-u))
	return math.Abs(2*s - 1)
}

// objective is -ln L / n of a data set under a model, as a function of
// the optimiser's coordinates u. It is safe for concurrent use: every
// evaluation builds its own evaluator from the model's network at x(u).
type objective struct {
	model  *models.Model
	data   *likelihood.Data
	opt    likelihood.Options
	coords []coord
	n      float64 // scale: the number of gaps (at least 1)
	jac    *models.Jacobian
	fixed  map[int]float64 // coordinates held at a value (profiles)
}

// newObjective prepares the objective of m on d. start is the vector of
// free-parameter values the soft centres are taken from.
func newObjective(m *models.Model, d *likelihood.Data, opt likelihood.Options, start []float64) (*objective, error) {
	lo, hi := m.Bounds()
	free := m.Free()
	ob := &objective{model: m, data: d, opt: opt, coords: make([]coord, len(free))}
	for j, name := range free {
		p := paramByName(m, name)
		c := coord{lo: lo[j], hi: hi[j]}
		if p.Kind == models.RateParam && math.IsInf(hi[j], 1) {
			c.logSoft = true
			c.c = math.Log(start[j] - lo[j])
		} else if p.Kind == models.DetectParam && c.hi > 1 {
			c.hi = 1
		}
		if !(start[j] > c.lo && start[j] < c.hi) {
			return nil, fmt.Errorf("parameter %s: start value %g is not strictly inside its bounds (%g, %g)", name, start[j], c.lo, c.hi)
		}
		ob.coords[j] = c
	}
	gaps := d.Events() - len(d.Records)
	ob.n = math.Max(1, float64(gaps))
	jac, err := m.Jacobian(start)
	if err != nil {
		return nil, err
	}
	ob.jac = jac // the log-rate part does not depend on x
	return ob, nil
}

func paramByName(m *models.Model, name string) models.Param {
	for _, p := range m.Params {
		if p.Name == name {
			return p
		}
	}
	return models.Param{}
}

// xOf maps optimiser coordinates to parameter values.
func (ob *objective) xOf(u []float64) []float64 {
	x := make([]float64, len(u))
	for j, c := range ob.coords {
		x[j] = c.x(u[j])
	}
	return x
}

// uOf maps parameter values to optimiser coordinates.
func (ob *objective) uOf(x []float64) []float64 {
	u := make([]float64, len(x))
	for j, c := range ob.coords {
		u[j] = c.u(x[j])
	}
	return u
}

// errEval marks a parameter vector at which the likelihood could not be
// evaluated (a rate out of range, a singular hidden generator, data the
// model calls impossible).
var errEval = errors.New("likelihood cannot be evaluated here")

// logLikX returns ln L and d ln L / d x at parameter values x.
func (ob *objective) logLikX(x []float64, grad bool, workers int) (float64, []float64, error) {
	net, err := ob.model.Network(x)
	if err != nil {
		return math.NaN(), nil, fmt.Errorf("%w: %v", errEval, err)
	}
	opt := ob.opt
	opt.Workers = workers
	ev, err := likelihood.NewNetworkEvaluator(net, opt)
	if err != nil {
		return math.NaN(), nil, fmt.Errorf("%w: %v", errEval, err)
	}
	if !grad {
		ll, err := ev.LogLik(ob.data)
		if err != nil {
			return math.NaN(), nil, fmt.Errorf("%w: %v", errEval, err)
		}
		return ll, nil, nil
	}
	ll, g, err := ev.Gradient(ob.data)
	if err != nil {
		return math.NaN(), nil, fmt.Errorf("%w: %v", errEval, err)
	}
	if len(ob.jac.LogRate) != len(g.LogRate) || len(ob.jac.Detect) != len(g.Detect) {
		return math.NaN(), nil, errors.New("model Jacobian does not match the network")
	}
	gx := make([]float64, len(x))
	for j := range gx {
		for t, row := range ob.jac.LogRate {
			if row[j] != 0 {
				gx[j] += g.LogRate[t] * row[j] / x[j]
			}
		}
		for l, row := range ob.jac.Detect {
			if row[j] != 0 {
				gx[j] += g.Detect[l] * row[j]
			}
		}
	}
	return ll, gx, nil
}

// evalCache holds the last point of one optimisation run, so that the
// optimiser's separate requests for f and its gradient at the same point
// cost one evaluation. One per run: not shared between goroutines.
type evalCache struct {
	ob      *objective
	workers int
	free    []int // optimised coordinates (others held by ob.fixed / base)
	base    []float64
	u       []float64
	f       float64
	g       []float64
	err     error
	evals   int
	bestF   float64
	bestU   []float64
	mu      sync.Mutex
	penalty float64 // f returned where ln L cannot be evaluated
	// extra, when not nil, is a term added to f (in the same units, -ln
	// L / n) with its gradient with respect to the full u vector: the
	// constraint terms of an augmented Lagrangian (leastsigma.go). An
	// error counts as a point where ln L cannot be evaluated.
	extra func(u []float64) (float64, []float64, error)
}

func newEvalCache(ob *objective, base []float64, free []int, workers int) *evalCache {
	return &evalCache{ob: ob, workers: workers, free: free, base: append([]float64(nil), base...), bestF: math.Inf(1), penalty: math.Inf(1)}
}

// full returns the full u vector for the optimised sub-vector v.
func (ec *evalCache) full(v []float64) []float64 {
	u := append([]float64(nil), ec.base...)
	for i, j := range ec.free {
		u[j] = v[i]
	}
	return u
}

// at evaluates f = -ln L / n and its gradient in the optimised
// coordinates at v, or returns the cached values.
func (ec *evalCache) at(v []float64) (float64, []float64) {
	ec.mu.Lock()
	defer ec.mu.Unlock()
	if ec.u != nil && equalVec(ec.u, v) {
		return ec.f, ec.g
	}
	ec.u = append(ec.u[:0], v...)
	u := ec.full(v)
	x := ec.ob.xOf(u)
	ll, gx, err := ec.ob.logLikX(x, true, ec.workers)
	ec.evals++
	ec.g = make([]float64, len(v))
	if err != nil || math.IsNaN(ll) || math.IsInf(ll, 0) {
		ec.err = err
		// A finite, large value: the line search backs off. Its gradient
		// is zero, so it is never taken for a stationary point: the
		// search has to step back into the evaluable region.
		if math.IsInf(ec.penalty, 1) {
			ec.f = 1e300
		} else {
			ec.f = ec.penalty
		}
		return ec.f, ec.g
	}
	ec.f = -ll / ec.ob.n
	for i, j := range ec.free {
		ec.g[i] = -gx[j] * ec.ob.coords[j].dx(u[j]) / ec.ob.n
	}
	if ec.extra != nil {
		fe, ge, err := ec.extra(u)
		if err != nil || math.IsNaN(fe) || math.IsInf(fe, 0) {
			ec.err = err
			clear(ec.g)
			ec.f = math.Min(1e300, ec.penalty)
			return ec.f, ec.g
		}
		ec.f += fe
		for i, j := range ec.free {
			ec.g[i] += ge[j]
		}
	}
	if ec.f < ec.bestF {
		ec.bestF = ec.f
		ec.bestU = append(ec.bestU[:0], u...)
	}
	return ec.f, ec.g
}

func equalVec(a, b []float64) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i] != b[i] {
			return false
		}
	}
	return true
}
