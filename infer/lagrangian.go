package infer

import (
	"context"
	"fmt"
	"math"
	"slices"
	"strings"

	"edgewise/likelihood"
	"edgewise/models"
)

// The augmented-Lagrangian route of a quantity profile (see the notes in
// leastsigma.go for the method and the choice of it).

// alMu0 is the starting penalty weight mu, in nats per squared standard
// error of T(q): ten times the curvature of ln L along the constraint, so
// that each multiplier update shrinks the violation by about 1 + mu = 11.
const alMu0 = 10.0

// alTol is the violation |c| (in standard errors of T(q)) at which the
// multiplier iteration stops. The point is then the exact constrained
// maximum at a value of q within alTol standard errors of s; the Newton
// projection onto q = s that follows changes ln L by -nu (q - s) to first
// order, which is the change of ln L_p itself, so ln L_p(s) is met to
// second order: about alTol^2/2 = 5e-7 nats, the profile's curvature
// being one nat per squared standard error. A tighter alTol would fight
// the inner search's own gradient threshold: its stopping error moves c
// by about gradTol/(mu |grad c|), some 1e-5 standard errors.
const alTol = 1e-4

// quantityFn returns a derived quantity of the model at the free
// parameters x and its gradient d q/d x.
type quantityFn func(x []float64) (float64, []float64, error)

// quantityOf returns the quantity with the given sensitivity row name as
// a function of the free parameters of m: from models.Model.Sensitivity
// for a network-level row (cheaper), else from
// likelihood.ModelSensitivity under the instrument. Row positions depend
// only on the model's structure, so the row found at x serves everywhere.
func quantityOf(m *models.Model, x []float64, name string, ins likelihood.Instrument) (quantityFn, models.Quantity, error) {
	ns, _, err := m.Sensitivity(x)
	if err != nil {
		return nil, models.Quantity{}, fmt.Errorf("quantity profile of %s: %w", name, err)
	}
	if i := ns.Find(name); i >= 0 {
		return func(x []float64) (float64, []float64, error) {
			s, dx, err := m.Sensitivity(x)
			if err != nil {
				return math.NaN(), nil, err
			}
			return s.Value[i], dx[i], nil
		}, ns.Rows[i], nil
	}
	ls, _, err := likelihood.ModelSensitivity(m, x, ins)
	if err != nil {
		return nil, models.Quantity{}, fmt.Errorf("quantity profile of %s: %w", name, err)
	}
	i := ls.Find(name)
	if i < 0 {
		var have []string
		for _, r := range ls.Rows {
			have = append(have, r.Name)
		}
		return nil, models.Quantity{}, fmt.Errorf("quantity profile: model %s has no quantity %q (it has %s)", m.Name, name, strings.Join(have, ", "))
	}
	return func(x []float64) (float64, []float64, error) {
		s, dx, err := likelihood.ModelSensitivity(m, x, ins)
		if err != nil {
			return math.NaN(), nil, err
		}
		return s.Value[i], dx[i], nil
	}, ls.Rows[i], nil
}

// dtr is T'(q).
func (pr *profiler) dtr(q float64) float64 {
	if pr.sqrt {
		return 0.5 / math.Sqrt(math.Max(q, 1e-300))
	}
	return 1
}

// alTerm is the constraint part of the augmented Lagrangian at T(s) = t,
// in the units of the fit's objective (nats per gap), with its gradient in
// the optimiser's coordinates u.
func (pr *profiler) alTerm(t, lambda, mu float64) func(u []float64) (float64, []float64, error) {
	ob := pr.ob
	return func(u []float64) (float64, []float64, error) {
		x := ob.xOf(u)
		q, gq, err := pr.q(x)
		if err != nil {
			return math.NaN(), nil, err
		}
		sg := pr.sign(x)
		c := (sg*pr.tr(q) - t) / pr.tau
		f := (-lambda*c + mu/2*c*c) / ob.n
		k := (-lambda + mu*c) * sg * pr.dtr(q) / pr.tau / ob.n
		gu := make([]float64, len(u))
		for j := range u {
			gu[j] = k * gq[j] * ob.coords[j].dx(u[j])
		}
		return f, gu, nil
	}
}

// lagrange maximises ln L subject to T(q) = t from the warm state w, and
// returns the point and the state to warm-start its neighbours from.
func (pr *profiler) lagrange(ctx context.Context, t float64, w warm, workers int) (QuantityPoint, warm) {
	ob := pr.ob
	s := pr.inv(t)
	x0 := slices.Clone(w.x)
	for j, c := range ob.coords {
		x0[j] = clampInside(x0[j], c.lo, c.hi)
	}
	u := ob.uOf(x0)
	lambda, mu := w.lambda, math.Max(w.mu, alMu0)
	lo := localOptions{MaxIter: 200, GradTol: gradTol(ob.n)}
	evals, outer := 0, 0
	cPrev := math.Inf(1)
	done := false
	var last runOutcome
	for ; outer < 40 && ctx.Err() == nil; outer++ {
		ec := newEvalCache(ob, u, allIndex(len(u)), workers)
		ec.extra = pr.alTerm(t, lambda, mu)
		last = minimizeLocal(ctx, ec, u, nil, lo)
		evals += last.Evals
		if math.IsInf(last.F, 1) {
			p := QuantityPoint{Value: s, Achieved: math.NaN(), LogLik: math.Inf(-1), Deviance: math.Inf(1), Slope: math.NaN(), Stationarity: math.NaN(), Route: RouteLagrangian, Evals: evals, Status: "the augmented Lagrangian cannot be evaluated here: " + last.Status}
			return p, w
		}
		u = last.U
		xu := ob.xOf(u)
		q, _, err := pr.q(xu)
		if err != nil {
			break
		}
		c := (pr.sign(xu)*pr.tr(q) - t) / pr.tau
		if math.Abs(c) <= alTol && last.Converged {
			lambda -= mu * c
			done = true
			break
		}
		if math.Abs(c) > 0.25*cPrev {
			mu = math.Min(10*mu, 1e4)
		}
		lambda -= mu * c
		cPrev = math.Abs(c)
	}
	x, projected := pr.project(u, s)
	q, _, _ := pr.q(x)
	nu := -lambda * pr.sign(x) * pr.dtr(q) / pr.tau
	p := pr.point(x, s, nu, RouteLagrangian, workers)
	p.Evals = evals
	p.Converged = done && projected
	switch {
	case ctx.Err() != nil:
		p.Status = "interrupted"
	case !done:
		p.Status = fmt.Sprintf("the multiplier iteration stopped after %d rounds (mu = %.3g; last search: %s)", outer, mu, last.Status)
	case !projected:
		p.Status = "the projection onto the constraint did not reach rounding"
	default:
		p.Status = fmt.Sprintf("converged in %d rounds (mu = %.3g)", outer+1, mu)
	}
	return p, warm{t: t, x: x, lambda: lambda, mu: math.Min(mu, 100)}
}

// project moves u onto q = s by Newton steps on the linearised
// constraint, to |q - s| <= 1e-12 (|s| + SE of q) or rounding, and returns
// the parameters and whether it got there. The step is the shortest one in
// the metric of the inverse information at the fit's maximum (pr.metric):
// delta u = -(q - s) M g / (g^T M g), g = grad q. That is the direction in
// which the constrained maximum itself moves with s (d theta*/ds is
// proportional to H^-1 grad q), so the step changes grad ln L along grad
// q only, to first order, and keeps the Lagrange condition; a step along
// g alone would spoil it by about alTol sqrt(n i).
func (pr *profiler) project(u []float64, s float64) ([]float64, bool) {
	ob := pr.ob
	u = slices.Clone(u)
	x := ob.xOf(u)
	scale := math.Abs(s) + pr.qScale()
	for k := 0; k < 10; k++ {
		q, gq, err := pr.q(x)
		if err != nil {
			return x, false
		}
		if math.Abs(q-s) <= 1e-12*scale {
			return x, true
		}
		gu := make([]float64, len(u))
		for j := range u {
			gu[j] = gq[j] * ob.coords[j].dx(u[j])
		}
		step := pr.metricTimes(gu)
		den := dot(gu, step)
		if !(den > 0) || math.IsInf(den, 0) {
			return x, false
		}
		un := slices.Clone(u)
		for j := range u {
			un[j] -= (q - s) * step[j] / den
		}
		xn := ob.xOf(un)
		if qn, _, err := pr.q(xn); err != nil || math.Abs(qn-s) >= math.Abs(q-s) {
			// No more progress: rounding of q.
			return x, math.Abs(q-s) <= 1e-9*scale
		}
		u, x = un, xn
	}
	q, _, err := pr.q(x)
	return x, err == nil && math.Abs(q-s) <= 1e-9*scale
}

// metricTimes returns M g for the projection's metric M: the covariance of
// the working coordinates at the fit's maximum (which are the optimiser's
// coordinates to within a few percent while a rate stays within e^10 of its
// start), plus 1e-6 of its mean diagonal on the diagonal so that it stays
// positive definite along flat directions; the identity without an
// information matrix.
func (pr *profiler) metricTimes(g []float64) []float64 {
	id := pr.res.Ident
	if id == nil || id.Cov == nil {
		return slices.Clone(g)
	}
	p := len(g)
	tr := 0.0
	for i := 0; i < p; i++ {
		tr += id.Cov.At(i, i)
	}
	eps := 1e-6 * tr / float64(p)
	if !(eps > 0) {
		return slices.Clone(g)
	}
	out := make([]float64, p)
	for i := 0; i < p; i++ {
		v := eps * g[i]
		for j := 0; j < p; j++ {
			v += id.Cov.At(i, j) * g[j]
		}
		out[i] = v
	}
	return out
}

// qScale is the standard error of q at the maximum when finite, else
// 1e-3 of the estimate's size (at least 1e-12).
func (pr *profiler) qScale() float64 {
	se := pr.tau
	if pr.sqrt {
		se = 2 * pr.tau * pr.tr(pr.q0)
	}
	if se > 0 && !math.IsInf(se, 0) {
		return se
	}
	return math.Max(1e-3*math.Abs(pr.q0), 1e-12)
}
