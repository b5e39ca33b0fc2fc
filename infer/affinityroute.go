package infer

import (
	"context"
	"fmt"
	"math"
	"slices"

	"edgewise/likelihood"
	"edgewise/models"
)

// The exact route of a quantity profile (leastsigma.go): a cycle affinity
// is linear in the log-rates, so holding it at a value is an affinity
// constraint of a copy of the model, met exactly by solving one rate from
// the others; sigma = 0 is every cycle of the basis held at 0.

// affineRoute holds a copy of the model with one more affinity
// constraint, at index k, whose value is set point by point.
type affineRoute struct {
	model *models.Model
	k     int
}

// newAffineRoute prepares the exact route of the affinity of cycle ci of
// net's cycle basis (net is m's network at any parameter values); fixed
// is true when m's own constraints or fixed rates already fix it.
func newAffineRoute(m *models.Model, net *models.Network, ci int) (*affineRoute, bool, error) {
	cs := net.CycleBasis()
	if ci < 0 || ci >= len(cs) {
		return nil, false, fmt.Errorf("no cycle %d in the basis", ci)
	}
	states, edges := net.CyclePath(cs[ci])
	mc, idx, _, err := withCycleAffinities(m, []CyclePath{{States: states, Edges: edges}}, []float64{net.Affinity(cs[ci])})
	if err != nil {
		return nil, false, err
	}
	if idx[0] < 0 {
		return nil, true, nil
	}
	return &affineRoute{model: mc, k: idx[0]}, false, nil
}

// withCycleAffinities returns a copy of m with each cycle held at its
// value by a new affinity constraint, the index in Affinities of each new
// constraint, and for each cycle the value the constraints (m's and the
// ones added before it) or fixed rates already fix it at (NaN when they do
// not; its index is then -1 and no constraint is added for it). The solved
// rate is chosen as TightCoupling chooses it (chooseSolve: hidden rates
// first, a well-conditioned solved block).
func withCycleAffinities(m *models.Model, cycles []CyclePath, values []float64) (*models.Model, []int, []float64, error) {
	params := map[string]models.Param{}
	for _, p := range m.Params {
		params[p.Name] = p
	}
	visible := map[string]bool{}
	for _, e := range m.Edges {
		if e.Labels[0] != "" || e.Labels[1] != "" {
			visible[e.Rates[0]], visible[e.Rates[1]] = true, true
		}
	}
	var rows []map[string]float64
	var vals []float64
	var solved []string
	for _, a := range m.Affinities {
		c, err := cycleCoef(m, CyclePath{a.Cycle, a.Edges})
		if err != nil {
			return nil, nil, nil, err
		}
		rows, vals, solved = append(rows, c), append(vals, a.Value), append(solved, a.Solve)
	}
	out := cloneModel(m)
	idx := make([]int, len(cycles))
	implied := make([]float64, len(cycles))
	for i, cyc := range cycles {
		idx[i], implied[i] = -1, math.NaN()
		coef, err := cycleCoef(m, cyc)
		if err != nil {
			return nil, nil, nil, err
		}
		// Fixed rates enter as constants: a cycle of fixed rates only is
		// fixed at its value.
		free := false
		for name := range coef {
			free = free || !params[name].Fixed
		}
		if !free {
			implied[i] = fixedAffinity(coef, params)
			continue
		}
		if y, ok := inSpan(rows, coef); ok {
			v := 0.0
			for k, w := range y {
				v += w * vals[k]
			}
			implied[i] = v
			continue
		}
		s := chooseSolve(m, cyc, coef, rows, solved, params, visible)
		if s == "" {
			return nil, nil, nil, fmt.Errorf("model %s: no free rate of cycle %s can be solved from its affinity alongside the model's other constraints", m.Name, cyc)
		}
		rows, vals, solved = append(rows, coef), append(vals, values[i]), append(solved, s)
		idx[i] = len(out.Affinities)
		out.Affinities = append(out.Affinities, models.AffinitySpec{Cycle: slices.Clone(cyc.States), Edges: slices.Clone(cyc.Edges), Value: values[i], Solve: s})
		delete(params, s)
	}
	out.Params = out.Params[:0]
	for _, p := range m.Params {
		if _, ok := params[p.Name]; ok {
			out.Params = append(out.Params, p)
		}
	}
	parsed, err := roundTrip(out)
	if err != nil {
		return nil, nil, nil, fmt.Errorf("model %s with its cycle affinities held: %w", m.Name, err)
	}
	return parsed, idx, implied, nil
}

// fixedAffinity is the affinity of a cycle whose rates are all fixed.
func fixedAffinity(coef map[string]float64, params map[string]models.Param) float64 {
	a := 0.0
	for name, c := range coef {
		a += c * math.Log(params[name].Value)
	}
	return a
}

// maximise fits the constrained copy with the cycle held at t, from the
// warm state, and returns the point.
func (ar *affineRoute) maximise(ctx context.Context, pr *profiler, t float64, w warm, workers int) QuantityPoint {
	mc := cloneModel(ar.model)
	mc.Affinities[ar.k].Value = t
	x, out, err := localFit(ctx, mc, pr.ob.data, pr.lopt, pr.res.Free, w.x, workers)
	if err != nil {
		return QuantityPoint{Value: t, Achieved: math.NaN(), LogLik: math.Inf(-1), Deviance: math.Inf(1), Slope: math.NaN(), Stationarity: math.NaN(), Route: RouteAffinity, Evals: out.Evals, Status: err.Error()}
	}
	p := pr.point(x, t, math.NaN(), RouteAffinity, workers)
	p.Evals, p.Converged, p.Status = out.Evals, out.Converged, out.Status
	return p
}

// localFit runs the local search of the constrained copy mc from the
// values of the original model's free parameters names = x, and returns
// the constrained maximum as values of those parameters (solved ones
// included).
func localFit(ctx context.Context, mc *models.Model, d *likelihood.Data, lopt likelihood.Options, names []string, x []float64, workers int) ([]float64, runOutcome, error) {
	byName := map[string]float64{}
	for j, n := range names {
		byName[n] = x[j]
	}
	free := mc.Free()
	lo, hi := mc.Bounds()
	start := make([]float64, len(free))
	for j, n := range free {
		v, ok := byName[n]
		if !ok {
			return nil, runOutcome{}, fmt.Errorf("parameter %s of the constrained model has no value", n)
		}
		start[j] = clampInside(v, lo[j], hi[j])
	}
	out := runOutcome{Converged: true, Status: "no free parameter left"}
	xc := start
	if len(free) > 0 {
		ob, err := newObjective(mc, d, lopt, start)
		if err != nil {
			return nil, out, err
		}
		u0 := ob.uOf(start)
		ec := newEvalCache(ob, u0, allIndex(len(u0)), workers)
		out = minimizeLocal(ctx, ec, u0, nil, localOptions{MaxIter: 400, GradTol: gradTol(ob.n)})
		if math.IsInf(out.F, 1) {
			return nil, out, fmt.Errorf("the constrained model cannot be evaluated: %s", out.Status)
		}
		xc = ob.xOf(out.U)
	}
	vals, err := mc.Values(xc)
	if err != nil {
		return nil, out, err
	}
	full := make([]float64, len(names))
	for j, n := range names {
		full[j] = vals[n]
	}
	return full, out, nil
}

// equilibrium fits the scheme's best equilibrium member (every cycle of
// the basis held at affinity 0) from several starts, the first at the
// fit's maximum. It returns nil and the reason when the scheme has none;
// allZero when the spec itself holds every cycle at 0; and free, the
// number of constraints it added (the dimension of the affinities the
// scheme leaves free).
func (pr *profiler) equilibrium(ctx context.Context, d *likelihood.Data) (p *QuantityPoint, none string, allZero bool, free int, err error) {
	m := pr.res.Model
	net, err := m.Network(pr.res.X)
	if err != nil {
		return nil, "", false, 0, err
	}
	var paths []CyclePath
	for _, c := range net.CycleBasis() {
		states, edges := net.CyclePath(c)
		paths = append(paths, CyclePath{States: states, Edges: edges})
	}
	mc, idx, implied, err := withCycleAffinities(m, paths, make([]float64, len(paths)))
	if err != nil {
		return nil, "", false, 0, err
	}
	for i, v := range implied {
		if math.Abs(v) > 1e-9 { // NaN: not fixed
			return nil, fmt.Sprintf("the spec's constraints hold cycle %s at %.6g k_BT: the scheme has no equilibrium member, so sigma > 0 for every parameter value; the lower end of its interval is where the data reject it", paths[i], v), false, 0, nil
		}
	}
	for _, k := range idx {
		if k >= 0 {
			free++
		}
	}
	if free == 0 {
		return nil, "", true, 0, nil
	}
	byName := map[string]float64{}
	for j, n := range pr.res.Free {
		byName[n] = pr.res.X[j]
	}
	for i := range mc.Params {
		if v, ok := byName[mc.Params[i].Name]; ok && !mc.Params[i].Fixed {
			mc.Params[i].Value = v
		}
	}
	fo := FitOptions{Likelihood: pr.lopt, Starts: pr.o.Starts, Seed: pr.res.Options.Seed, Workers: pr.o.Workers, MaxIter: pr.res.Options.MaxIter, ExploreGaps: pr.res.Options.ExploreGaps, Level: pr.o.Level, Context: ctx}
	fit, err := Fit(mc, d, fo)
	if err != nil {
		return nil, "", false, free, fmt.Errorf("equilibrium member: %w", err)
	}
	vals, err := mc.Values(fit.X)
	if err != nil {
		return nil, "", false, free, err
	}
	x := make([]float64, len(pr.res.Free))
	for j, n := range pr.res.Free {
		x[j] = vals[n]
	}
	pt := pr.point(x, 0, math.NaN(), RouteEquilibrium, pr.o.Workers)
	pt.Converged, pt.Status = true, "no free parameter left"
	if len(fit.Optima) > 0 {
		pt.Converged, pt.Status = fit.Optima[0].Converged, fmt.Sprintf("best of %d starts: %s", len(fit.Starts), fit.Optima[0].Status)
	}
	for _, s := range fit.Starts {
		pt.Evals += s.Evals
	}
	for _, o := range fit.Optima {
		pt.Evals += o.Evals
	}
	return &pt, "", false, free, nil
}

// branchSign returns the sign of the dissipation branch at free
// parameters x for a scheme whose free cycle affinities span one
// dimension: the sign of l(x) = sum_c J_c A_c(x), with J_c the cycle
// currents (chord currents) at the fit's maximum, so that l = sigma > 0
// there. With one free affinity direction sigma vanishes only where l does,
// and sign(l) sqrt(sigma) is smooth through 0 (about a constant times the
// affinity), whereas sqrt(sigma) has a cusp there that a search under the
// constraint sqrt(sigma) = t can step across, onto the branch of reversed
// driving.
func branchSign(m *models.Model, x0 []float64) (func(x []float64) float64, error) {
	net, err := m.Network(x0)
	if err != nil {
		return nil, err
	}
	pi, err := net.Stationary()
	if err != nil {
		return nil, err
	}
	cur := net.Currents(pi)
	cycles := net.CycleBasis()
	jc := make([]float64, len(cycles))
	for i, c := range cycles {
		jc[i] = cur[c.Chord]
	}
	return func(x []float64) float64 {
		n, err := m.Network(x)
		if err != nil {
			return 1
		}
		l := 0.0
		for i, c := range cycles {
			l += jc[i] * n.Affinity(c)
		}
		if l < 0 {
			return -1
		}
		return 1
	}, nil
}
