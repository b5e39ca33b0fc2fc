package infer

import (
	"cmp"
	"context"
	"errors"
	"fmt"
	"math"
	"runtime"
	"slices"
	"strings"
	"sync"

	"edgewise/likelihood"
	"edgewise/models"

	"gonum.org/v1/gonum/stat/distuv"
)

// Least dissipation within a scheme: the profile likelihood of a derived
// quantity q(theta) of a fitted model (the entropy production rate sigma,
// the effective affinity F under the instrument, a cycle affinity),
//
//	ln L_p(s) = max { ln L(theta) : q(theta) = s },
//
// and the interval of the values s with 2 [ln L_max - ln L_p(s)] at most
// the chi-square(1) quantile of the level (the profile-likelihood interval
// of a function of the parameters; Venzon and Moolgavkar, Appl. Stat. 37,
// 87 (1988), applied to q instead of one coordinate). The lower end of
// sigma's interval is the least dissipation that the data do not reject
// within the scheme. When the scheme's best equilibrium member (every
// cycle affinity 0, so sigma = 0) is itself not rejected, the interval
// reaches 0: the data do not prove that the system is driven, within that
// scheme.
//
// Two routes to the constrained maximum, both exact in the sense that the
// point returned satisfies q = s to rounding:
//
//   - A cycle affinity is linear in the log-rates with coefficients +-1, so
//     q = s is an affinity constraint: a copy of the model with the cycle
//     held at s (one rate solved from the others, as in a spec), fitted
//     over the remaining free parameters. sigma = 0 is the same with every
//     cycle of the basis held at 0 (detailed balance, Kolmogorov's
//     criterion), fitted from several starts.
//   - sigma (s > 0), F and any other quantity: an augmented Lagrangian
//     (Hestenes and Powell; Nocedal and Wright, Numerical Optimization, 2nd
//     ed. (2006), algorithm 17.4) on top of the same BFGS search as the
//     fit (minimizeLocal), with the exact gradient of q from the
//     sensitivity packages (models.Model.Sensitivity,
//     likelihood.ModelSensitivity). In nats, with c the constraint scaled
//     by the delta-method standard error tau of T(q) at the maximum,
//
//     Phi(u) = -ln L(u) - lambda c(u) + (mu/2) c(u)^2,  c = (T(q(u)) - T(s)) / tau,
//
//     minimised over every free coordinate u for fixed lambda and mu; then
//     lambda <- lambda - mu c, and mu <- 10 mu when |c| fell by less than a
//     factor 4; until |c| <= 1e-7 (1e-7 standard errors). A final Newton
//     projection along grad q brings |q - s| to rounding; ln L is evaluated
//     at the projected point, so it is the ln L of a parameter vector that
//     satisfies the constraint. T is sqrt for sigma (sigma is quadratic in
//     the affinities near equilibrium, so grad sigma vanishes there while
//     grad sqrt(sigma) stays finite) and the identity otherwise.
//     Why not a reparametrisation: sigma(theta) = s cannot be solved for one
//     rate in closed form (sigma is a ratio of spanning-tree polynomials
//     times log-rates), and a numerical solve inside every evaluation would
//     need a root that exists for every trial step of the search. Why not a
//     quadratic penalty alone: it needs mu -> infinity and an ever worse
//     conditioned search; the multiplier update reaches 1e-7 with mu of 10
//     to 1000.
//
// At the constrained maximum grad ln L = nu grad q (Lagrange), and by the
// envelope theorem nu = d ln L_p/ds: the slope of the profile, reported for
// every point (from the multiplier, nu = -lambda T'(q)/tau, on the
// Lagrangian route; by least squares of grad ln L on grad q on the exact
// route) with the residual of that stationarity condition.
//
// The interval is found side by side, as for the parameters (profile.go):
// steps of a third of z standard errors in T(s) from the estimate (doubled
// while the root deviance r = sqrt(2 (ln L_max - ln L_p)) grows slowly),
// then regula falsi (Illinois) on r - z inside the bracket, z^2 the
// chi-square(1) quantile. Each inner maximisation is warm-started at the
// nearest point already computed between it and the estimate, so that
// every point continues a path from the fit's maximum outwards (a point
// farther out may sit on another branch). Below the estimate of sigma the
// steps at most halve sqrt(sigma), and the known equilibrium member closes
// the bracket at 0. sqrt(sigma) has a cusp where sigma = 0: with one free
// affinity direction (a ring) that is a surface the search can cross onto
// the branch of reversed driving, so there T = sign(l) sqrt(sigma) with l =
// sum_c J_c A_c (J_c the cycle currents at the maximum), which is smooth
// through 0 (branchSign); with more free directions the cusp is a lower-
// dimensional set, approached only near sigma = 0, where the Lagrange
// condition is then met less tightly (the Stationarity of each point says
// how well). Every point evaluated is kept, for a figure; a profile that is
// not unimodal gets a note.

// QuantityProfileOptions configures ProfileQuantity.
type QuantityProfileOptions struct {
	// Level of the interval (default: the fit's level).
	Level float64
	// Workers is the number of goroutines (default GOMAXPROCS); the two
	// sides run in parallel, each evaluation on half of them.
	Workers int
	// Context stops the profile early; the points so far are returned and
	// the profile is marked Interrupted.
	Context context.Context
	// At, when not empty, asks for the profile at exactly these values of
	// the quantity, and no interval.
	At []float64
	// MaxPoints caps the inner maximisations per side (default 24).
	MaxPoints int
	// Starts is the number of starts of the fit of the equilibrium member
	// (sigma = 0); default half the fit's starts, at least 2.
	Starts int
	// Progress, when not nil, is called after each inner maximisation
	// (from several goroutines, one call at a time).
	Progress func(done int)
	// lagrangian forces the augmented Lagrangian also for a cycle affinity
	// (a check of the one route against the other).
	lagrangian bool
}

// Routes of a profile point.
const (
	RouteFree        = "free maximum"
	RouteLagrangian  = "augmented Lagrangian"
	RouteAffinity    = "affinity constraint"
	RouteEquilibrium = "equilibrium member (every cycle affinity 0)"
)

// QuantityPoint is one point of a quantity's profile.
type QuantityPoint struct {
	// Value is s, the value the quantity is held at; Achieved is q at X
	// (equal to Value to rounding when Converged).
	Value, Achieved float64
	// LogLik is ln L_p(s) and Deviance 2 [ln L_max - ln L_p(s)] (slightly
	// negative when the point is above the fit's maximum).
	LogLik, Deviance float64
	// X holds the free parameters of the fitted model (FitResult.Free
	// order) at the constrained maximum.
	X []float64
	// Slope is nu = d ln L_p/ds (nats per unit of the quantity), from the
	// Lagrange condition grad ln L = nu grad q; NaN where q has no
	// gradient (sigma = 0). Stationarity is the largest component of
	// grad ln L - nu grad q in the optimiser's coordinates (the ln of a
	// rate while it stays within e^10 of the fit's value, where the soft
	// map that keeps rates finite saturates; the logit of a detection
	// probability), in nats: a few times the fit's gradient threshold at
	// most at a converged point.
	Slope, Stationarity float64
	Route               string
	Converged           bool
	Status              string
	Evals               int // likelihood evaluations
}

// QuantityProfile is the profile likelihood of one derived quantity of a
// fitted model and its interval.
type QuantityProfile struct {
	Name string // row name of the sensitivity: "sigma", "F[+/-]", "affinity[0:A-B-C-A]", ...
	Kind models.QuantityKind
	Unit string // "k_B/time", "k_BT", "1/time", ...
	// Estimate is the quantity at the fit's maximum, SE its delta-method
	// standard error (+Inf when not determined, NaN when unavailable).
	Estimate, SE float64
	LogLikMax    float64
	Level        float64
	Threshold    float64 // chi-square(1) quantile of the level
	// Lower and Upper bound the interval (NaN when only the values of
	// QuantityProfileOptions.At were asked for). LowerOpen (UpperOpen): the
	// profile stayed within the threshold up to the end of the search on
	// that side, so the data set no limit there; Lower (Upper) is then the
	// last value reached (0 for sigma when ZeroNotRejected).
	Lower, Upper         float64
	LowerOpen, UpperOpen bool
	// Points of the profile, the fit's maximum included, ascending in
	// Value.
	Points []QuantityPoint
	// Equilibrium is the best equilibrium member of the scheme (sigma
	// only; nil when the scheme has none, e.g. a spec that holds a cycle
	// affinity at a value other than 0). ZeroNotRejected: its deviance is
	// within the threshold, so the interval of sigma reaches 0 and the data
	// do not prove, within this scheme, that the system is driven.
	Equilibrium     *QuantityPoint
	ZeroNotRejected bool
	// Fixed: the scheme's constraints fix the quantity (it has no
	// profile).
	Fixed bool
	// HigherMax is the largest ln L_p - ln L_max met; above 0.01 nats the
	// fit missed its maximum.
	HigherMax   float64
	Method      string
	Interrupted bool
	Notes       []string
}

// Kinds of quantity a profile can be asked for by ProfileQuantities.
const (
	ProfileSigma      = "sigma"
	ProfileF          = "F"
	ProfileAffinities = "affinities"
)

// QuantityNames expands the requests "sigma", "F" (every F[l/m] row of the
// fitted model under the fit's instrument) and "affinities" (every cycle
// of the model's cycle basis) into the row names of the sensitivities; any
// other request must be such a row name itself ("J[0:A-B]", "Jvis[+/-]").
func QuantityNames(res *FitResult, which []string) ([]string, error) {
	if res == nil || len(res.X) != len(res.Free) {
		return nil, errors.New("quantity profile: no fitted model")
	}
	s, _, err := likelihood.ModelSensitivity(res.Model, res.X, res.Options.Likelihood.Instrument)
	if err != nil {
		return nil, fmt.Errorf("quantity profile: %w", err)
	}
	var out []string
	add := func(n string) {
		if !slices.Contains(out, n) {
			out = append(out, n)
		}
	}
	for _, w := range which {
		w = strings.TrimSpace(w)
		n := 0
		for _, r := range s.Rows {
			if (w == ProfileF && r.Kind == likelihood.KindEffective) || (w == ProfileAffinities && r.Kind == models.KindAffinity) || r.Name == w {
				add(r.Name)
				n++
			}
		}
		if n == 0 {
			switch w {
			case ProfileF:
				return nil, fmt.Errorf("quantity profile: model %s has no visible edge with labels in both directions, so no F", res.Model.Name)
			case ProfileAffinities:
				return nil, fmt.Errorf("quantity profile: model %s has no cycle, so no cycle affinity", res.Model.Name)
			}
			return nil, fmt.Errorf("quantity profile: %q is neither sigma, F, affinities nor a quantity of model %s", w, res.Model.Name)
		}
	}
	return out, nil
}

// ProfileQuantities profiles every quantity QuantityNames gives for which,
// one after the other (each profile uses the workers).
func ProfileQuantities(res *FitResult, d *likelihood.Data, which []string, o QuantityProfileOptions) ([]*QuantityProfile, error) {
	names, err := QuantityNames(res, which)
	if err != nil {
		return nil, err
	}
	var out []*QuantityProfile
	for _, n := range names {
		p, err := ProfileQuantity(res, d, n, o)
		if err != nil {
			return out, err
		}
		out = append(out, p)
	}
	return out, nil
}

// profiler holds what the points of one profile share.
type profiler struct {
	res    *FitResult
	ob     *objective // the fitted model on the data
	q      quantityFn
	q0     float64 // q at the fit's maximum
	name   string
	sqrt   bool                      // T = sqrt (sigma)
	branch func(x []float64) float64 // the sign of sqrt(sigma) at x, nil: +1 (branchSign)
	tau    float64                   // scale of T(q): its standard error at the maximum
	lopt   likelihood.Options
	kinds  []models.ParamKind
	affine *affineRoute // exact route of a cycle affinity, nil otherwise
	o      QuantityProfileOptions
	prog   *progress
	mu     sync.Mutex
	higher float64
}

// warm is the state an inner maximisation starts from.
type warm struct {
	t      float64   // T(s) of the point
	x      []float64 // free parameters (FitResult.Free order)
	lambda float64   // multiplier of the Lagrangian route
	mu     float64
}

// ProfileQuantity computes the profile likelihood of the quantity name (a
// row name of likelihood.ModelSensitivity of the fitted model: "sigma",
// "F[+/-]", "affinity[0:A-B-C-A]", ...) on the data d the model was fitted
// to, and its interval at the level (or, with o.At, the profile at those
// values only). See the notes at the top of this file for the method.
func ProfileQuantity(res *FitResult, d *likelihood.Data, name string, o QuantityProfileOptions) (*QuantityProfile, error) {
	if res == nil || len(res.X) != len(res.Free) || len(res.Free) == 0 {
		return nil, errors.New("quantity profile: no fitted model with free parameters")
	}
	if res.Interrupted {
		return nil, fmt.Errorf("quantity profile of %s: the fit was interrupted, so its maximum is not certain", name)
	}
	if o.Level == 0 {
		o.Level = res.Level
	}
	if !(o.Level > 0 && o.Level < 1) {
		return nil, fmt.Errorf("quantity profile of %s: level %v is not in (0, 1)", name, o.Level)
	}
	if o.Workers <= 0 {
		o.Workers = runtime.GOMAXPROCS(0)
	}
	if o.Context == nil {
		o.Context = context.Background()
	}
	if o.MaxPoints <= 0 {
		o.MaxPoints = 24
	}
	if o.Starts <= 0 {
		o.Starts = max(2, res.Options.Starts/2)
	}
	for _, s := range o.At {
		if math.IsNaN(s) || math.IsInf(s, 0) {
			return nil, fmt.Errorf("quantity profile of %s: value %v is not a finite number", name, s)
		}
	}
	m := res.Model
	net, err := m.Network(res.X)
	if err != nil {
		return nil, fmt.Errorf("quantity profile of %s: %w", name, err)
	}
	if d, err = alignLabels(d, net); err != nil {
		return nil, fmt.Errorf("quantity profile of %s: %w", name, err)
	}
	lopt := res.Options.Likelihood
	ob, err := newObjective(m, d, lopt, res.X)
	if err != nil {
		return nil, fmt.Errorf("quantity profile of %s: %w", name, err)
	}
	qf, row, err := quantityOf(m, res.X, name, lopt.Instrument)
	if err != nil {
		return nil, err
	}
	q0, g0, err := qf(res.X)
	if err != nil {
		return nil, fmt.Errorf("quantity profile of %s: %w", name, err)
	}
	if math.IsNaN(q0) || math.IsInf(q0, 0) {
		return nil, fmt.Errorf("quantity profile of %s: the quantity is %v at the fit's maximum (a one-way edge makes sigma and the affinities through it infinite): it has no profile", name, q0)
	}
	if row.Kind == models.KindEntropy {
		for _, s := range o.At {
			if s < 0 {
				return nil, fmt.Errorf("quantity profile of %s: value %v: sigma is never negative", name, s)
			}
		}
	}
	pr := &profiler{res: res, ob: ob, q: qf, q0: q0, name: name, sqrt: row.Kind == models.KindEntropy, lopt: lopt, kinds: paramKinds(m), o: o, prog: newProgress(nil)}
	if o.Progress != nil {
		pr.prog = newProgress(func(_ string, done, _ int) { o.Progress(done) })
	}
	out := &QuantityProfile{Name: name, Kind: row.Kind, Unit: row.Unit, Estimate: q0, SE: math.NaN(), LogLikMax: res.LogLik, Level: o.Level, Method: RouteLagrangian}
	out.Threshold = distuv.ChiSquared{K: 1}.Quantile(o.Level)
	if ds, err := DerivedQuantities(res, DerivedOptions{Instrument: lopt.Instrument, Level: o.Level}); err == nil {
		for _, dq := range ds {
			if dq.Name == name {
				out.SE = dq.SE
			}
		}
	}
	if math.IsNaN(out.SE) {
		out.SE = deltaSE(res, g0)
	}
	free := QuantityPoint{Value: q0, Achieved: q0, LogLik: res.LogLik, X: slices.Clone(res.X), Slope: 0, Stationarity: math.NaN(), Route: RouteFree, Converged: true, Status: "the fit's maximum"}
	out.Points = []QuantityPoint{free}

	// The scale of T(q).
	t0 := pr.tr(q0)
	pr.tau = out.SE
	if pr.sqrt && q0 > 0 {
		pr.tau = out.SE / (2 * math.Sqrt(q0))
	}
	if !(pr.tau > 0) || math.IsInf(pr.tau, 0) {
		pr.tau = 0.1 * math.Max(math.Abs(t0), 1e-3)
	}

	var eq *QuantityPoint
	switch {
	case row.Kind == models.KindAffinity:
		ar, fixed, err := newAffineRoute(m, net, row.Args[0])
		if err != nil {
			return nil, fmt.Errorf("quantity profile of %s: %w", name, err)
		}
		if fixed {
			out.Fixed, out.Lower, out.Upper, out.Method = true, q0, q0, "fixed by the spec's affinity constraints"
			out.Notes = append(out.Notes, "the spec's affinity constraints fix "+name+": it has no profile")
			return out, nil
		}
		if !o.lagrangian {
			pr.affine, out.Method = ar, RouteAffinity
		}
	case row.Kind == models.KindEntropy:
		ep, none, allZero, free, err := pr.equilibrium(o.Context, d)
		if free == 1 && err == nil && none == "" {
			if pr.branch, err = branchSign(m, res.X); err != nil {
				return nil, fmt.Errorf("quantity profile of %s: %w", name, err)
			}
		}
		if allZero || len(net.CycleBasis()) == 0 {
			out.Fixed, out.Lower, out.Upper, out.Method = true, 0, 0, "fixed by the scheme"
			out.Notes = append(out.Notes, "every cycle of the scheme has affinity 0 (no cycle, or the spec holds each at 0): sigma = 0 for every parameter value")
			return out, nil
		}
		switch {
		case err != nil:
			out.Notes = append(out.Notes, "the best equilibrium member could not be fitted: "+err.Error())
		case none != "":
			out.Notes = append(out.Notes, none)
		default:
			eq = ep
			out.Equilibrium = ep
			out.ZeroNotRejected = ep.Deviance <= out.Threshold
			if !ep.Converged {
				out.Notes = append(out.Notes, "the fit of the best equilibrium member did not converge: "+ep.Status)
			}
		}
	default:
		if zeroVec(g0) {
			out.Fixed, out.Lower, out.Upper, out.Method = true, q0, q0, "constant"
			out.Notes = append(out.Notes, name+" does not change with the free parameters at the fit's maximum: it has no profile")
			return out, nil
		}
	}

	type sideOut struct {
		pts  []QuantityPoint
		end  float64
		open bool
	}
	var sides [2]sideOut
	half := max(1, o.Workers/2)
	if len(o.At) > 0 {
		out.Lower, out.Upper = math.NaN(), math.NaN()
		parallel(2, 2, func(k int) {
			dir := 1.0 - 2*float64(k)
			var ts []float64
			for _, s := range o.At {
				if t := pr.tr(s); dir*(t-t0) > 0 {
					ts = append(ts, t)
				}
			}
			slices.SortFunc(ts, func(a, b float64) int { return cmp.Compare(dir*a, dir*b) })
			sd := newSide(pr, t0, eq, half)
			for _, t := range ts {
				sd.at(o.Context, t)
			}
			sides[k].pts = sd.pts
		})
	} else {
		parallel(2, 2, func(k int) {
			dir := 1.0 - 2*float64(k)
			sd := newSide(pr, t0, eq, half)
			end, open := sd.follow(o.Context, dir, math.Sqrt(out.Threshold))
			sides[k] = sideOut{pts: sd.pts, end: end, open: open}
		})
		out.Upper, out.UpperOpen = pr.inv(sides[0].end), sides[0].open
		out.Lower, out.LowerOpen = pr.inv(sides[1].end), sides[1].open
		if pr.sqrt && out.ZeroNotRejected {
			out.Lower, out.LowerOpen = 0, true
		}
	}
	for _, s := range sides {
		out.Points = append(out.Points, s.pts...)
	}
	if eq != nil && !slices.ContainsFunc(out.Points, func(p QuantityPoint) bool { return p.Route == RouteEquilibrium }) {
		out.Points = append(out.Points, *eq)
	}
	slices.SortStableFunc(out.Points, func(a, b QuantityPoint) int { return cmp.Compare(a.Value, b.Value) })
	out.HigherMax = pr.higher
	if o.Context.Err() != nil {
		out.Interrupted = true
	}
	if out.HigherMax > sameOptimumTol {
		out.Notes = append(out.Notes, fmt.Sprintf("profiling met ln L %.3g nats above the fit's maximum: the fit missed its maximum; refit with more starts", out.HigherMax))
	}
	if v := notUnimodal(out); v != "" {
		out.Notes = append(out.Notes, v)
	}
	for _, p := range out.Points {
		if !p.Converged {
			out.Notes = append(out.Notes, fmt.Sprintf("the constrained maximum at %s = %.6g did not converge (%s)", name, p.Value, p.Status))
		}
	}
	return out, nil
}

// sign is the branch of T at x (branchSign), +1 without one.
func (pr *profiler) sign(x []float64) float64 {
	if pr.branch == nil {
		return 1
	}
	return pr.branch(x)
}

// tr is T: sqrt for sigma, the identity otherwise; inv its inverse (on the
// branch T >= 0).
func (pr *profiler) tr(q float64) float64 {
	if pr.sqrt {
		return math.Sqrt(math.Max(q, 0))
	}
	return q
}

func (pr *profiler) inv(t float64) float64 {
	if pr.sqrt {
		return t * t
	}
	return t
}

// point finishes a constrained maximum at the free parameters x: ln L,
// the quantity, the deviance and the Lagrange condition. nu is the
// multiplier when the route knows it (NaN: least squares).
func (pr *profiler) point(x []float64, s, nu float64, route string, workers int) QuantityPoint {
	p := QuantityPoint{Value: s, X: x, Route: route, Slope: nu, Stationarity: math.NaN(), Achieved: math.NaN(), LogLik: math.Inf(-1), Deviance: math.Inf(1)}
	ll, gx, err := pr.ob.logLikX(x, true, workers)
	if err != nil || math.IsNaN(ll) {
		p.Status = fmt.Sprintf("ln L cannot be evaluated at the constrained maximum: %v", err)
		return p
	}
	p.LogLik, p.Deviance = ll, 2*(pr.res.LogLik-ll)
	qv, gq, err := pr.q(x)
	if err != nil {
		p.Status = err.Error()
		return p
	}
	p.Achieved = qv
	gw, qw := make([]float64, len(x)), make([]float64, len(x))
	u := pr.ob.uOf(x)
	for j := range x {
		f := pr.ob.coords[j].dx(u[j])
		gw[j], qw[j] = gx[j]*f, gq[j]*f
	}
	if route == RouteEquilibrium {
		p.Slope = math.NaN()
	} else {
		if math.IsNaN(nu) {
			nu = dot(gw, qw) / dot(qw, qw)
			p.Slope = nu
		}
		r := 0.0
		for j := range gw {
			r = math.Max(r, math.Abs(gw[j]-nu*qw[j]))
		}
		p.Stationarity = r
	}
	pr.mu.Lock()
	pr.higher = math.Max(pr.higher, ll-pr.res.LogLik)
	pr.mu.Unlock()
	return p
}

// side follows one side of a profile, keeping every point.
type side struct {
	pr      *profiler
	t0      float64
	pts     []QuantityPoint
	warms   []warm
	eq      *QuantityPoint // the equilibrium member at T = 0 (sigma), or nil
	workers int
}

func newSide(pr *profiler, t0 float64, eq *QuantityPoint, workers int) *side {
	sd := &side{pr: pr, t0: t0, eq: eq, workers: workers}
	sd.warms = []warm{{t: t0, x: slices.Clone(pr.res.X), mu: alMu0}}
	return sd
}

// at computes the profile at T(s) = t, warm-started at the nearest point
// computed so far, and returns its root deviance (+Inf when it failed).
func (sd *side) at(ctx context.Context, t float64) float64 {
	pr := sd.pr
	if pr.sqrt && t <= 0 && sd.eq != nil {
		return rootDeviance(*sd.eq)
	}
	// Warm start: the nearest point between t and the estimate, so that
	// every point continues a path from the fit's maximum outwards; a
	// point farther out may sit on another branch (a search that failed,
	// or near the cusp of sqrt(sigma) at equilibrium).
	w := sd.warms[0]
	for _, c := range sd.warms[1:] {
		if (c.t-t)*(sd.t0-t) >= 0 && math.Abs(c.t-t) < math.Abs(w.t-t) {
			w = c
		}
	}
	var p QuantityPoint
	var nw warm
	if pr.affine != nil {
		p = pr.affine.maximise(ctx, pr, t, w, sd.workers)
		nw = warm{t: t, x: p.X}
	} else {
		// Predict the multiplier from the quadratic approximation of the
		// profile: d ln L_p/dT ~ -(T - T0)/tau^2, i.e. lambda ~ (T - T0)/tau.
		w.lambda += (t - w.t) / pr.tau
		p, nw = pr.lagrange(ctx, t, w, sd.workers)
	}
	sd.pts = append(sd.pts, p)
	if p.LogLik > math.Inf(-1) && p.X != nil {
		sd.warms = append(sd.warms, nw)
	}
	pr.prog.step("profile", 0)
	return rootDeviance(p)
}

// notUnimodal describes the first place where ln L_p rises away from the
// estimate by more than 1e-3 nats: a constrained maximum there was missed
// (the search ended on a lower branch), so the interval may be too short.
func notUnimodal(p *QuantityProfile) string {
	for i := 1; i < len(p.Points); i++ {
		a, b := p.Points[i-1], p.Points[i]
		if (b.Value <= p.Estimate && b.LogLik < a.LogLik-1e-3) || (a.Value >= p.Estimate && b.LogLik > a.LogLik+1e-3) {
			return fmt.Sprintf("the profile is not unimodal (ln L_p %.4f at %.6g, %.4f at %.6g): a constrained search ended below the maximum it should have found, so the interval may be too short; refit with more starts and profile again", a.LogLik, a.Value, b.LogLik, b.Value)
		}
	}
	return ""
}

func rootDeviance(p QuantityPoint) float64 {
	if math.IsInf(p.LogLik, -1) || math.IsNaN(p.LogLik) {
		return math.Inf(1)
	}
	return math.Sqrt(math.Max(p.Deviance, 0))
}

// follow walks from the estimate in direction dir (+1 up, -1 down) until
// the root deviance reaches z, and returns the crossing in T and whether
// the side stayed open (no crossing before the end of the search).
func (sd *side) follow(ctx context.Context, dir, z float64) (float64, bool) {
	pr := sd.pr
	h := z * pr.tau / 3
	lim := sd.t0 + dir*math.Max(60*pr.tau, 10*math.Abs(sd.t0))
	// Below the estimate of sigma the steps at most halve T = sqrt(sigma),
	// so that the walk approaches sigma = 0, where sqrt(sigma) has its cusp,
	// gradually; within 1/64 of the estimate's T the known equilibrium
	// member closes the bracket (or, when it is within the threshold, the
	// side is open to 0).
	low := pr.sqrt && dir < 0
	r0 := math.Inf(1)
	if sd.eq != nil {
		r0 = rootDeviance(*sd.eq)
	}
	if low && !(sd.t0 > 0) {
		return 0, true
	}
	ta, ra := sd.t0, 0.0
	for n := 0; n < pr.o.MaxPoints && ctx.Err() == nil; n++ {
		tb := ta + dir*h
		if low {
			if ta <= sd.t0/64 {
				switch {
				case sd.eq != nil && r0 >= z:
					return sd.bracket(ctx, ta, ra, 0, r0, z, pr.o.MaxPoints-n), false
				case sd.eq != nil:
					return 0, true
				}
				return ta, true
			}
			tb = math.Max(tb, ta/2)
		} else if dir*(tb-lim) >= 0 {
			tb = lim
		}
		rb := sd.at(ctx, tb)
		if rb >= z {
			return sd.bracket(ctx, ta, ra, tb, rb, z, pr.o.MaxPoints-n-1), false
		}
		if tb == lim {
			return lim, true
		}
		// Double the step while r would need more than four more steps.
		if z-rb > 4*(rb-ra) {
			h *= 2
		}
		ta, ra = tb, rb
	}
	return ta, true
}

// bracket refines the crossing r(t) = z inside [ta, tb] (r(ta) < z <=
// r(tb)) by regula falsi with the Illinois modification, bisecting when
// r(tb) is infinite (the inner maximisation failed), to |r - z| < 0.005.
func (sd *side) bracket(ctx context.Context, ta, ra, tb, rb, z float64, budget int) float64 {
	side := 0
	for k := 0; k < min(budget, 14) && ctx.Err() == nil; k++ {
		if math.Abs(rb-z) < 0.005 {
			return tb
		}
		if math.Abs(tb-ta) <= 1e-9*(math.Abs(ta)+sd.pr.tau) {
			break
		}
		var tn float64
		if math.IsInf(rb, 1) {
			tn = (ta + tb) / 2
		} else {
			fa, fb := ra-z, rb-z
			if side == -1 {
				fa /= 2
			} else if side == 1 {
				fb /= 2
			}
			tn = ta + fa*(tb-ta)/(fa-fb)
		}
		rn := sd.at(ctx, tn)
		if math.Abs(rn-z) < 0.005 {
			return tn
		}
		if rn >= z {
			if side == 1 {
				side = 0
			} else {
				side = 1
			}
			tb, rb = tn, rn
		} else {
			if side == -1 {
				side = 0
			} else {
				side = -1
			}
			ta, ra = tn, rn
		}
	}
	if math.IsInf(rb, 1) {
		return ta
	}
	return ta + (z-ra)*(tb-ta)/(rb-ra)
}

func dot(a, b []float64) float64 {
	s := 0.0
	for i := range a {
		s += a[i] * b[i]
	}
	return s
}

func zeroVec(g []float64) bool {
	for _, v := range g {
		if v != 0 && !math.IsNaN(v) {
			return false
		}
	}
	return true
}

// deltaSE is the delta-method standard error of a quantity with gradient
// gx (d q/d x) at the fit's maximum, NaN without an information matrix.
func deltaSE(res *FitResult, gx []float64) float64 {
	if res.Ident == nil || res.Ident.Cov == nil {
		return math.NaN()
	}
	kinds := paramKinds(res.Model)
	g := make([]float64, len(gx))
	for j := range g {
		g[j] = gx[j] * dxdw(kinds[j], res.X[j])
	}
	v := 0.0
	for i := range g {
		for j := range g {
			v += g[i] * res.Ident.Cov.At(i, j) * g[j]
		}
	}
	return math.Sqrt(math.Max(v, 0))
}
