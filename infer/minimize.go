package infer

import (
	"context"
	"errors"
	"fmt"
	"math"

	"gonum.org/v1/gonum/floats"
	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/optimize"
)

// runOutcome is the end of one local optimisation.
type runOutcome struct {
	U         []float64 // full optimiser coordinates at the end
	F         float64   // -ln L / n there
	GradNorm  float64   // infinity norm of d(-ln L)/du there (nats per unit u)
	Iter      int       // BFGS iterations
	Evals     int       // likelihood evaluations
	Converged bool
	Status    string // how the run ended, in words
	Err       error  // last evaluation error, when the run met one
}

// localOptions tunes one local optimisation.
type localOptions struct {
	MaxIter int
	// GradTol is the convergence threshold on the infinity norm of the
	// gradient of -ln L in the optimiser's coordinates (nats per unit).
	GradTol float64
}

// minimizeLocal runs BFGS (gonum/optimize, More-Thuente line search, exact
// gradient) on ec from the optimised sub-vector v0. When pre is not nil the
// search runs in coordinates z with v = v0 + pre z, pre an approximate
// inverse square root of the Hessian (a preconditioner: BFGS then starts
// from a near-exact curvature model and needs few steps).
func minimizeLocal(ctx context.Context, ec *evalCache, v0 []float64, pre *mat.Dense, lo localOptions) runOutcome {
	dim := len(v0)
	toV := func(z []float64) []float64 {
		if pre == nil {
			return z
		}
		v := append([]float64(nil), v0...)
		zv := mat.NewVecDense(dim, append([]float64(nil), z...))
		var pv mat.VecDense
		pv.MulVec(pre, zv)
		for i := range v {
			v[i] += pv.AtVec(i)
		}
		return v
	}
	gradZ := func(g []float64) []float64 {
		if pre == nil {
			return g
		}
		var out mat.VecDense
		out.MulVec(pre.T(), mat.NewVecDense(dim, g))
		return out.RawVector().Data
	}
	z0 := append([]float64(nil), v0...)
	if pre != nil {
		z0 = make([]float64, dim)
	}
	f0, _ := ec.at(v0)
	if f0 >= 1e299 {
		return runOutcome{U: ec.full(v0), F: math.Inf(1), GradNorm: math.NaN(), Evals: ec.evals, Status: "the likelihood cannot be evaluated at the start", Err: ec.err}
	}
	ec.penalty = f0 + 1e4 // a value no step can prefer
	tolScaled := lo.GradTol / ec.ob.n
	if pre != nil {
		if out, ok := unitStepBFGS(ctx, ec, toV, gradZ, dim, tolScaled, lo); ok {
			return out
		}
	}
	prob := optimize.Problem{
		Func: func(z []float64) float64 {
			f, _ := ec.at(toV(z))
			return f
		},
		Grad: func(grad, z []float64) {
			_, g := ec.at(toV(z))
			copy(grad, gradZ(g))
		},
		Status: func() (optimize.Status, error) {
			if ctx != nil && ctx.Err() != nil {
				return optimize.Failure, ctx.Err()
			}
			return optimize.NotTerminated, nil
		},
	}
	// Convergence is judged on the gradient in v (not z): the threshold
	// has a meaning in nats per unit of the optimiser's coordinates.
	conv := &gradConverger{ec: ec, toV: toV, tol: tolScaled}
	set := &optimize.Settings{
		MajorIterations:   lo.MaxIter,
		FuncEvaluations:   maxEvals(lo.MaxIter),
		GradientThreshold: 0,
		Converger:         conv,
	}
	res, err := optimize.Minimize(prob, z0, set, &optimize.BFGS{Linesearcher: &optimize.MoreThuente{}})
	out := runOutcome{Evals: ec.evals, Err: ec.err}
	var zEnd []float64
	if res != nil {
		zEnd = res.X
		out.Iter = res.MajorIterations
	} else {
		zEnd = z0
	}
	vEnd := toV(zEnd)
	fEnd, gEnd := ec.at(vEnd)
	out.U = ec.full(vEnd)
	out.F = fEnd
	out.GradNorm = floats.Norm(gEnd, math.Inf(1)) * ec.ob.n
	out.Evals = ec.evals
	switch {
	case ctx != nil && ctx.Err() != nil:
		out.Status = "interrupted"
	case out.GradNorm <= lo.GradTol:
		out.Converged = true
		out.Status = "converged"
	case res != nil && res.Status == optimize.IterationLimit:
		out.Status = "iteration cap reached"
	case res != nil && res.Status == optimize.FunctionEvaluationLimit:
		out.Status = "evaluation cap reached"
	case res != nil && res.Status == optimize.FunctionConvergence && out.GradNorm <= 100*lo.GradTol:
		out.Converged = true
		out.Status = "converged (ln L no longer improves)"
	case res != nil && res.Status == optimize.FunctionConvergence:
		out.Status = fmt.Sprintf("stalled: ln L improved by less than %g nats over %d iterations with the gradient still %.3g", stallNats, stallIters, out.GradNorm)
	case err != nil && errors.Is(err, optimize.ErrLinesearcherFailure) && out.GradNorm <= 100*lo.GradTol:
		// The line search can no longer improve f in floating point:
		// the point is a maximum to the precision of ln L.
		out.Converged = true
		out.Status = "converged (to the precision of ln L)"
	case err != nil:
		out.Status = "stopped: " + err.Error()
	default:
		out.Status = "stopped before the gradient threshold"
	}
	return out
}

// Stall and evaluation limits of one local search: a search whose ln L
// improves by less than stallNats over stallIters iterations stops (on a
// ridge, or where rounding hides the slope), and no search makes more than
// maxEvals(maxIter) evaluations (each can be costly where the rates are
// extreme and the exponentials fall back to slower routes).
const (
	stallNats  = 1e-6
	stallIters = 30
)

func maxEvals(maxIter int) int { return 5 * maxIter }

// gradConverger stops when the gradient's infinity norm in the optimised
// coordinates is below tol, or when f (-ln L per gap) has improved by
// less than stallNats in all over the last stallIters iterations.
type gradConverger struct {
	ec   *evalCache
	toV  func([]float64) []float64
	tol  float64
	n    int
	hist []float64
}

func (c *gradConverger) Init(int) { c.n, c.hist = 0, c.hist[:0] }

func (c *gradConverger) Converged(loc *optimize.Location) optimize.Status {
	f, g := c.ec.at(c.toV(loc.X))
	if floats.Norm(g, math.Inf(1)) <= c.tol {
		return optimize.GradientThreshold
	}
	c.n++
	c.hist = append(c.hist, f)
	if k := len(c.hist); k > stallIters && (c.hist[k-1-stallIters]-f)*c.ec.ob.n < stallNats {
		return optimize.FunctionConvergence
	}
	return optimize.NotTerminated
}

// unitStepBFGS is BFGS in preconditioned coordinates z with the identity
// as the initial inverse Hessian and the unit step tried first (Armijo
// backtracking by halving): near the maximum, where the preconditioner is
// close to the inverse square root of the Hessian, each step is nearly a
// Newton step, so a refinement takes a few evaluations. It reports false
// when it fails to converge in 30 steps (the caller then runs the general
// search from the start).
func unitStepBFGS(ctx context.Context, ec *evalCache, toV func([]float64) []float64, gradZ func([]float64) []float64, dim int, tol float64, lo localOptions) (runOutcome, bool) {
	h := mat.NewSymDense(dim, nil)
	for i := 0; i < dim; i++ {
		h.SetSym(i, i, 1)
	}
	z := make([]float64, dim)
	f, gv := ec.at(toV(z))
	g := gradZ(gv)
	finish := func(status string, conv bool, it int) runOutcome {
		f, gv := ec.at(toV(z))
		return runOutcome{U: ec.full(toV(z)), F: f, GradNorm: floats.Norm(gv, math.Inf(1)) * ec.ob.n, Iter: it, Evals: ec.evals, Converged: conv, Status: status, Err: ec.err}
	}
	for it := 0; it < 30; it++ {
		if floats.Norm(gv, math.Inf(1)) <= tol {
			return finish("converged", true, it), true
		}
		if ctx != nil && ctx.Err() != nil {
			return finish("interrupted", false, it), true
		}
		var d mat.VecDense
		d.MulVec(h, mat.NewVecDense(dim, g))
		d.ScaleVec(-1, &d)
		slope := floats.Dot(g, d.RawVector().Data)
		if slope >= 0 {
			return runOutcome{}, false
		}
		t := 1.0
		var zn, gn, gvn []float64
		var fn float64
		accepted := false
		for ls := 0; ls < 30; ls++ {
			zn = make([]float64, dim)
			floats.AddScaledTo(zn, z, t, d.RawVector().Data)
			fn, gvn = ec.at(toV(zn))
			if fn <= f+1e-4*t*slope {
				accepted = true
				break
			}
			t /= 2
		}
		if !accepted {
			if floats.Norm(gv, math.Inf(1)) <= 100*tol {
				return finish("converged (to the precision of ln L)", true, it), true
			}
			return runOutcome{}, false
		}
		gn = gradZ(gvn)
		sv := make([]float64, dim)
		yv := make([]float64, dim)
		floats.SubTo(sv, zn, z)
		floats.SubTo(yv, gn, g)
		if sy := floats.Dot(sv, yv); sy > 1e-300 {
			sVec, yVec := mat.NewVecDense(dim, sv), mat.NewVecDense(dim, yv)
			var hy mat.VecDense
			hy.MulVec(h, yVec)
			yhy := mat.Dot(yVec, &hy)
			h.SymRankOne(h, (1+yhy/sy)/sy, sVec)
			h.RankTwo(h, -1/sy, &hy, sVec)
		}
		z, f, g, gv = zn, fn, gn, append([]float64(nil), gvn...)
	}
	return runOutcome{}, false
}

// invSqrt returns V diag(lambda^-1/2) for the eigenpairs of the symmetric
// h, eigenvalues floored at 1e-6 of the largest (a preconditioner: an
// approximate inverse square root of a Hessian); nil when h has no
// positive eigenvalue or cannot be decomposed.
func invSqrt(h *mat.SymDense) *mat.Dense {
	var es mat.EigenSym
	if !es.Factorize(h, true) {
		return nil
	}
	lam := es.Values(nil)
	var vec mat.Dense
	es.VectorsTo(&vec)
	lmax := 0.0
	for _, l := range lam {
		lmax = math.Max(lmax, l)
	}
	if !(lmax > 0) {
		return nil
	}
	n := len(lam)
	pre := mat.NewDense(n, n, nil)
	for k, l := range lam {
		s := 1 / math.Sqrt(math.Max(l, 1e-6*lmax))
		for i := 0; i < n; i++ {
			pre.Set(i, k, vec.At(i, k)*s)
		}
	}
	return pre
}
