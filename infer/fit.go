package infer

import (
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

	"gonum.org/v1/gonum/mat"
)

// FitOptions configures Fit.
type FitOptions struct {
	// Likelihood holds the instrument and the start mode of the records;
	// its Workers field is ignored (Fit sets it).
	Likelihood likelihood.Options
	// Starts is the total number of starts (default 8): the spec's start,
	// the scaled start, data-informed starts, then random ones.
	Starts int
	// Seed fixes the random starts (and nothing else: the fit is
	// deterministic given the starts).
	Seed uint64
	// Workers is the number of goroutines (default GOMAXPROCS). The result
	// does not depend on it.
	Workers int
	// MaxIter caps the BFGS iterations of one local search (default 400).
	MaxIter int
	// ExploreGaps: when the records hold more than twice this number of
	// gaps, the starts are first run on an exploration subsample of about
	// ExploreGaps gaps (blocks spread evenly over the records), and only
	// the distinct optima found there are refined on all the data. Default
	// 20000; negative: always use all the data.
	ExploreGaps int
	// MaxRefine caps the number of distinct exploration optima refined on
	// all the data (default 4, best first); the others are reported with
	// their ln L on all the data, unrefined.
	MaxRefine int
	// Profile asks for profile-likelihood intervals of every determined
	// free parameter.
	Profile bool
	// Level of the intervals (default 0.95).
	Level float64
	// Context stops the fit early (Ctrl-C); the best optimum so far is
	// returned, marked Interrupted.
	Context context.Context
	// Progress, when not nil, is called after each unit of work with the
	// stage ("starts", "refine", "information", "profile") and the counts.
	// It is called from several goroutines, one call at a time.
	Progress func(stage string, done, total int)
}

func (o *FitOptions) defaults() {
	if o.Starts <= 0 {
		o.Starts = 8
	}
	if o.Workers <= 0 {
		o.Workers = runtime.GOMAXPROCS(0)
	}
	if o.MaxIter <= 0 {
		o.MaxIter = 400
	}
	if o.ExploreGaps == 0 {
		o.ExploreGaps = 20000
	}
	if o.MaxRefine <= 0 {
		o.MaxRefine = 4
	}
	if o.Level <= 0 || o.Level >= 1 {
		o.Level = 0.95
	}
	if o.Context == nil {
		o.Context = context.Background()
	}
}

// StartResult is the outcome of one start.
type StartResult struct {
	Kind      StartKind
	Start     []float64 // free-parameter values at the start
	X         []float64 // at the end of the local search
	LogLik    float64   // ln L at X on the data the search ran on
	Converged bool
	Status    string
	Iter      int
	Evals     int
	GradNorm  float64 // infinity norm of d ln L/du at the end
	Optimum   int     // index in FitResult.Optima, -1 when not converged
}

// Optimum is one distinct local maximum.
type Optimum struct {
	X      []float64
	LogLik float64 // on all the data
	// Starts is the number of starts that reached it; Equivalent is true
	// when those starts ended at different parameter values with the same
	// ln L (a symmetry of the model or a ridge of equal likelihood).
	Starts     int
	Equivalent bool
	Refined    bool // refined on all the data (false: evaluated only)
	Converged  bool // the refinement met the gradient threshold
	Status     string
	Evals      int // likelihood evaluations of the refinement on all the data
}

// ParamFit is one free parameter of a fitted model.
type ParamFit struct {
	Name  string
	Kind  models.ParamKind
	Value float64
	// SELog is the standard error of ln(value) (of logit(value) for a
	// detection probability), SE the delta-method standard error of the
	// value itself. Both are +Inf when the parameter is not determined.
	SELog, SE  float64
	Determined bool
	// AtBound says whether the value sits at (or runs to) a bound: "",
	// "lower", "upper", "zero" (a rate running towards 0) or "infinity".
	AtBound string
	// Profile is the profile-likelihood interval when computed.
	Profile *ProfileInterval
}

// FitResult is a fitted model.
type FitResult struct {
	Model    *models.Model
	Free     []string
	X        []float64 // the maximum-likelihood values (best optimum)
	LogLik   float64
	Params   []ParamFit
	Events   int
	Records  int
	Gaps     int
	Optima   []Optimum // best first
	Starts   []StartResult
	Explored bool // the starts ran on an exploration subsample
	// ExploreGaps is the number of gaps of that subsample.
	ExploreGaps int
	Ident       *Identifiability
	Info        *mat.SymDense // observed information, working coordinates
	Interrupted bool
	Warnings    []string
	Level       float64
	Options     FitOptions
}

// Effective returns the number of free parameters the data determine
// (all free parameters when the information could not be computed).
func (r *FitResult) Effective() int {
	if r.Ident == nil {
		return len(r.Free)
	}
	return r.Ident.Effective
}

// AIC = 2k - 2 ln L with k the effective number of parameters.
func (r *FitResult) AIC() float64 { return 2*float64(r.Effective()) - 2*r.LogLik }

// AICc = AIC + 2k(k+1)/(n-k-1), n the number of gaps; +Inf when n <= k+1.
func (r *FitResult) AICc() float64 {
	k, n := float64(r.Effective()), float64(r.Gaps)
	if n <= k+1 {
		return math.Inf(1)
	}
	return r.AIC() + 2*k*(k+1)/(n-k-1)
}

// BIC = k ln n - 2 ln L, n the number of gaps.
func (r *FitResult) BIC() float64 {
	return float64(r.Effective())*math.Log(math.Max(float64(r.Gaps), 1)) - 2*r.LogLik
}

// sameOptimumTol: two ends of local searches with ln L within this many
// nats are the same optimum (ln L is accurate to far better than this;
// distinct local maxima of a likelihood differ by much more).
const sameOptimumTol = 0.01

// Fit maximises the exact log-likelihood of d under m over m's free
// parameters. d's labels must be m's labels (in any order; they are
// matched by name). See the package documentation for the method.
func Fit(m *models.Model, d *likelihood.Data, opt FitOptions) (*FitResult, error) {
	opt.defaults()
	if err := d.Validate(); err != nil {
		return nil, err
	}
	net0, err := m.Network(m.Start())
	if err != nil {
		return nil, fmt.Errorf("fit %s: %w", m.Name, err)
	}
	d, err = alignLabels(d, net0)
	if err != nil {
		return nil, fmt.Errorf("fit %s: %w", m.Name, err)
	}
	res := &FitResult{Model: m, Free: m.Free(), Events: d.Events(), Records: len(d.Records), Level: opt.Level, Options: opt}
	res.Gaps = res.Events - res.Records
	kinds := paramKinds(m)
	x0 := m.Start()
	if len(x0) == 0 {
		ll, err := likelihood.LogLik(net0, d, likelihood.Options{Start: opt.Likelihood.Start, Instrument: opt.Likelihood.Instrument, Workers: opt.Workers})
		if err != nil {
			return nil, fmt.Errorf("fit %s: %w", m.Name, err)
		}
		res.LogLik = ll
		res.Warnings = append(res.Warnings, "the spec has no free parameter: ln L is evaluated, nothing is fitted")
		return res, nil
	}
	res.Warnings = append(res.Warnings, structuralWarning(m, net0)...)

	if err := structurallyImpossible(m.Name, net0, d, opt.Likelihood.Instrument); err != nil {
		return nil, err
	}
	ob, err := newObjective(m, d, opt.Likelihood, x0)
	if err != nil {
		return nil, fmt.Errorf("fit %s: %w", m.Name, err)
	}
	if ll, _, err := ob.logLikX(x0, false, opt.Workers); err != nil || math.IsInf(ll, -1) {
		if err == nil {
			err = errors.New("ln L = -inf")
		}
		return nil, fmt.Errorf("fit %s: at the spec's start values: %w", m.Name, err)
	}
	explore := ob
	if opt.ExploreGaps > 0 && res.Gaps > 2*opt.ExploreGaps {
		sub := exploreSubsample(d, opt.ExploreGaps)
		explore, err = newObjective(m, sub, exploreOptions(opt.Likelihood), x0)
		if err != nil {
			return nil, fmt.Errorf("fit %s: %w", m.Name, err)
		}
		res.Explored = true
		res.ExploreGaps = sub.Events() - len(sub.Records)
	}
	prog := newProgress(opt.Progress)

	// Stage 1: every start, on the exploration data.
	starts := makeStarts(m, d, opt.Likelihood.Instrument, opt.Starts, opt.Seed)
	res.Starts = make([]StartResult, len(starts))
	lopt := localOptions{MaxIter: opt.MaxIter, GradTol: gradTol(explore.n)}
	parallel(len(starts), opt.Workers, func(i int) {
		st := starts[i]
		out, shrunk := startLocal(opt.Context, explore, st.X, starts[min(1, len(starts)-1)].X, lopt)
		if shrunk > 0 {
			st.X = shrunk1(st.X, starts[min(1, len(starts)-1)].X, shrunk)
		}
		sr := StartResult{Kind: st.Kind, Start: st.X, X: explore.xOf(out.U), LogLik: -out.F * explore.n, Converged: out.Converged, Status: out.Status, Iter: out.Iter, Evals: out.Evals, GradNorm: out.GradNorm, Optimum: -1}
		if out.Err != nil && !out.Converged {
			sr.Status += " (" + out.Err.Error() + ")"
		}
		if shrunk > 0 {
			sr.Status += fmt.Sprintf("; the drawn start could not be evaluated and was moved %d times halfway to the scaled start", shrunk)
		}
		res.Starts[i] = sr
		prog.step("starts", len(starts))
	})
	if opt.Context.Err() != nil {
		res.Interrupted = true
	}
	groups := groupStarts(res.Starts, explore)
	if len(groups) == 0 {
		var why []string
		for i, s := range res.Starts {
			why = append(why, fmt.Sprintf("start %d (%s): %s", i+1, s.Kind, s.Status))
		}
		if res.Interrupted {
			return nil, fmt.Errorf("fit %s: interrupted before any start finished", m.Name)
		}
		return nil, fmt.Errorf("fit %s: every start failed:\n  %s", m.Name, strings.Join(why, "\n  "))
	}

	// Stage 2: refine the distinct optima on all the data.
	res.Optima = make([]Optimum, len(groups))
	parallel(len(groups), opt.Workers, func(g int) {
		grp := groups[g]
		o := Optimum{X: grp.x, Starts: len(grp.members), Equivalent: grp.equivalent}
		switch {
		case !res.Explored:
			o.LogLik, o.Refined, o.Converged, o.Status = grp.ll, true, true, "converged"
		case g < opt.MaxRefine && opt.Context.Err() == nil:
			o = refine(opt.Context, ob, explore, o, opt.Workers, lopt.MaxIter)
		default:
			ll, _, err := ob.logLikX(grp.x, false, 1)
			o.LogLik, o.Status = ll, "not refined on all the data (only the best are)"
			if err != nil {
				o.LogLik, o.Status = math.Inf(-1), err.Error()
			}
		}
		res.Optima[g] = o
		prog.step("refine", len(groups))
	})
	for g, grp := range groups {
		for _, i := range grp.members {
			res.Starts[i].Optimum = g
		}
	}
	mergeOptima(res)
	best := res.Optima[0]
	res.X, res.LogLik = best.X, best.LogLik
	if opt.Context.Err() != nil {
		res.Interrupted = true
	}
	if len(res.Optima) > 0 && res.Optima[0].Starts == 1 && len(res.Starts) > 1 {
		res.Warnings = append(res.Warnings, "the best maximum was reached by one start only: run more starts (--starts) to make sure no higher one exists")
	}
	for _, s := range res.Starts {
		if !s.Converged {
			res.Warnings = append(res.Warnings, fmt.Sprintf("%d of %d starts did not converge (see the starts table)", countNot(res.Starts), len(res.Starts)))
			break
		}
	}

	// Uncertainty.
	res.Params = make([]ParamFit, len(res.Free))
	for j, name := range res.Free {
		res.Params[j] = ParamFit{Name: name, Kind: kinds[j], Value: res.X[j], SELog: math.Inf(1), SE: math.Inf(1)}
	}
	if !res.Interrupted {
		info, err := observedInfo(ob, kinds, res.X, opt.Workers)
		prog.step("information", 1)
		if err != nil {
			res.Warnings = append(res.Warnings, "no standard errors: "+err.Error())
		} else {
			res.Info = info
			id, err := analyseInformation(info, res.Free, kinds, res.X, smallRates(res.X, kinds, d))
			if err != nil {
				res.Warnings = append(res.Warnings, "no standard errors: "+err.Error())
			} else {
				res.Ident = id
				if id.NotMaximum {
					res.Warnings = append(res.Warnings, "the observed information has a clearly negative eigenvalue: the best point found is not a maximum")
				}
				for j := range res.Params {
					pf := &res.Params[j]
					pf.Determined = id.Determined[j]
					if slices.Contains(id.NearZero, j) {
						pf.AtBound = "near zero"
						continue // no finite SE on the log scale
					}
					if pf.Determined {
						pf.SELog = math.Sqrt(math.Max(id.Cov.At(j, j), 0))
						pf.SE = pf.SELog * dxdw(kinds[j], pf.Value)
						if kinds[j] == models.DetectParam {
							pf.SELog = pf.SELog * (1 - pf.Value) // of ln p
						}
					}
				}
			}
		}
	}
	markBounds(res, ob, d)
	if opt.Profile && !res.Interrupted {
		profileAll(opt.Context, res, ob, opt.Workers, prog)
		if opt.Context.Err() != nil {
			res.Interrupted = true
		}
	}
	return res, nil
}

// startLocal runs the local search from x; when ln L cannot be evaluated
// at x (far-off random draws can make the records numerically impossible)
// the start is moved halfway towards anchor, up to 6 times. It returns the
// outcome and the number of moves.
func startLocal(ctx context.Context, ob *objective, x, anchor []float64, lo localOptions) (runOutcome, int) {
	var out runOutcome
	for k := 0; k <= 6; k++ {
		xs := shrunk1(x, anchor, k)
		ec := newEvalCache(ob, ob.uOf(xs), allIndex(len(xs)), 1)
		out = minimizeLocal(ctx, ec, ob.uOf(xs), nil, lo)
		if !math.IsInf(out.F, 1) {
			return out, k
		}
	}
	return out, 0
}

// shrunk1 moves x k times halfway towards anchor in log space (in the
// optimiser's sense: geometric means for rates).
func shrunk1(x, anchor []float64, k int) []float64 {
	out := append([]float64(nil), x...)
	f := math.Pow(0.5, float64(k))
	for j := range out {
		out[j] = math.Exp(f*math.Log(x[j]) + (1-f)*math.Log(anchor[j]))
	}
	return out
}

// smallRate: a fitted rate below smallRate times the records' visible
// event rate is small on their time scale (it acts about once in 20 gaps
// or less).
const smallRate = 0.05

// smallRates marks the free rates at the edge of the records' time scale:
// below smallRate times the visible event rate of d (rarely used), or
// above 1/smallRate^2 = 400 times it (a transit too fast to show: the
// scheme acts as the smaller one without that state). A flat direction
// made of such rates is the scheme reducing to a smaller one, and those
// rates still count as parameters.
func smallRates(x []float64, kinds []models.ParamKind, d *likelihood.Data) []bool {
	tg := targetsOf(d)
	out := make([]bool, len(x))
	if !(tg.meanGap > 0) {
		return out
	}
	for j, v := range x {
		out[j] = kinds[j] == models.RateParam && (v < smallRate/tg.meanGap || v > 1/(smallRate*smallRate*tg.meanGap))
	}
	return out
}

// gradTol is the convergence threshold of a local search on n gaps: the
// infinity norm of d ln L/du at most 1e-4 sqrt(n) nats per unit. The
// distance to the maximum is then about |g|/I ~ 1e-4 sqrt(n) / (n i), far
// below the standard error 1/sqrt(n i) for any information i per gap
// above 1e-8, and ln L is within |g|^2/(2 I) of its maximum.
func gradTol(n float64) float64 { return 1e-4 * math.Sqrt(math.Max(n, 1)) }

func allIndex(n int) []int {
	ix := make([]int, n)
	for i := range ix {
		ix[i] = i
	}
	return ix
}

func countNot(s []StartResult) int {
	n := 0
	for _, r := range s {
		if !r.Converged {
			n++
		}
	}
	return n
}

// parallel runs f(0..n-1) on up to workers goroutines.
func parallel(n, workers int, f func(i int)) {
	if workers > n {
		workers = n
	}
	if workers < 1 {
		workers = 1
	}
	jobs := make(chan int)
	var wg sync.WaitGroup
	for w := 0; w < workers; w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for i := range jobs {
				f(i)
			}
		}()
	}
	for i := 0; i < n; i++ {
		jobs <- i
	}
	close(jobs)
	wg.Wait()
}

type progress struct {
	mu   sync.Mutex
	f    func(string, int, int)
	done map[string]int
}

func newProgress(f func(string, int, int)) *progress {
	return &progress{f: f, done: map[string]int{}}
}

func (p *progress) step(stage string, total int) {
	if p == nil || p.f == nil {
		return
	}
	p.mu.Lock()
	defer p.mu.Unlock()
	p.done[stage]++
	p.f(stage, p.done[stage], total)
}

// refine runs the local search on all the data from an exploration
// optimum, preconditioned by the exploration data's information (the same
// per gap up to sampling error), so that a few BFGS steps suffice.
func refine(ctx context.Context, full, explore *objective, o Optimum, workers, maxIter int) Optimum {
	u0 := full.uOf(o.X)
	pre := preconditioner(explore, u0)
	ec := newEvalCache(full, u0, allIndex(len(u0)), workers)
	out := minimizeLocal(ctx, ec, u0, pre, localOptions{MaxIter: maxIter, GradTol: gradTol(full.n)})
	o.X = full.xOf(out.U)
	o.LogLik = -out.F * full.n
	o.Refined = true
	o.Converged = out.Converged
	o.Status = out.Status
	o.Evals = out.Evals
	if math.IsInf(out.F, 1) {
		o.LogLik = math.Inf(-1)
	}
	return o
}

// preconditioner returns V diag(lambda^-1/2) for the eigenpairs of the
// per-gap Hessian of -ln L in u at u0 on ob (central differences of the
// exact gradient), with eigenvalues floored at 1e-6 of the largest; nil
// when it cannot be computed.
func preconditioner(ob *objective, u0 []float64) *mat.Dense {
	p := len(u0)
	ec := newEvalCache(ob, u0, allIndex(p), 1)
	h := mat.NewSymDense(p, nil)
	cols := make([][]float64, 2*p)
	for t := 0; t < 2*p; t++ {
		j, s := t/2, 1.0
		if t%2 == 1 {
			s = -1
		}
		v := append([]float64(nil), u0...)
		v[j] += s * hessStep
		f, g := ec.at(v)
		if f >= 1e299 {
			return nil
		}
		cols[t] = append([]float64(nil), g...)
	}
	for i := 0; i < p; i++ {
		for j := i; j < p; j++ {
			a := (cols[2*j][i] - cols[2*j+1][i]) / (2 * hessStep)
			b := (cols[2*i][j] - cols[2*i+1][j]) / (2 * hessStep)
			h.SetSym(i, j, (a+b)/2)
		}
	}
	return invSqrt(h)
}

// markBounds flags parameters at or running to a bound: a bounded
// parameter within 1e-4 (relative to its range) of a bound, a rate
// without upper bound whose soft map is saturated, or a rate below 1e-6 or
// above 1e6 times the data's visible event rate.
func markBounds(res *FitResult, ob *objective, d *likelihood.Data) {
	tg := targetsOf(d)
	vis := 0.0
	if tg.meanGap > 0 {
		vis = 1 / tg.meanGap
	}
	u := ob.uOf(res.X)
	for j := range res.Params {
		pf := &res.Params[j]
		c := ob.coords[j]
		switch {
		case !c.logSoft && c.saturated(u[j]) > 1-2e-4:
			if pf.Value-c.lo < c.hi-pf.Value {
				pf.AtBound = "lower"
			} else {
				pf.AtBound = "upper"
			}
		case c.logSoft && c.saturated(u[j]) > 0.5:
			if math.Log(pf.Value-c.lo) < c.c {
				pf.AtBound = "zero"
			} else {
				pf.AtBound = "infinity"
			}
		case pf.Kind == models.RateParam && vis > 0 && pf.Value < 1e-6*vis:
			pf.AtBound = "zero"
		case pf.Kind == models.RateParam && vis > 0 && pf.Value > 1e6*vis:
			pf.AtBound = "infinity"
		}
		if c.lo > 0 && pf.AtBound == "zero" {
			pf.AtBound = "lower"
		}
		if pf.AtBound != "" {
			res.Warnings = append(res.Warnings, fmt.Sprintf("%s runs to %s (%.4g): its maximum is on the edge of the parameter space, so its standard error means little; see its profile interval", pf.Name, boundWord(pf.AtBound), pf.Value))
		}
	}
}

func boundWord(b string) string {
	switch b {
	case "lower":
		return "its lower bound"
	case "upper":
		return "its upper bound"
	case "zero", "near zero":
		return "zero"
	}
	return "infinity"
}

// structuralWarning says when a spec has more free rates than one visible
// edge can determine (StructuralLimit).
func structuralWarning(m *models.Model, net *models.Network) []string {
	nr := 0
	for _, k := range paramKinds(m) {
		if k == models.RateParam {
			nr++
		}
	}
	visibleEdges := 0
	for _, e := range net.Edges {
		if e.Label[0] != models.Hidden || e.Label[1] != models.Hidden {
			visibleEdges++
		}
	}
	n := len(m.States)
	if visibleEdges != 1 || nr <= StructuralLimit(n) {
		return nil
	}
	return []string{fmt.Sprintf("the spec has %d free rates, but the records of one visible edge of a %d-state network determine at most about %d rate combinations (4N - 6, an empirical count): some directions will be flat, and the fit names them", nr, n, StructuralLimit(n))}
}
