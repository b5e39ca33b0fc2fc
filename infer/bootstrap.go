package infer

import (
	"context"
	"fmt"
	"math"
	"runtime"
	"sync"

	"edgewise/likelihood"
	"edgewise/models"
)

// BootstrapOptions configures ParametricBootstrap.
type BootstrapOptions struct {
	// Replicates is the number B of simulated data sets (all shards
	// together).
	Replicates int
	// Seed fixes the replicates: replicate b draws its data, and the
	// random starts of its two fits, from ReplicateSeed(Seed, b) alone.
	Seed uint64
	// Fit configures the refits (instrument, start mode, starts, the
	// exploration subsample, context). Its Workers is the number of
	// replicates run at once (default GOMAXPROCS); each refit runs on one
	// goroutine, so the result does not depend on it. Profile and Progress
	// are ignored.
	Fit FitOptions
	// Shard selects the replicates b with b mod Shard.Of == Shard.Index.
	Shard Shard
	// Progress, when not nil, is called after each replicate (one call at
	// a time).
	Progress func(done, total int)
	// MaxJumps bounds the expected number of simulated jumps of the run
	// (all its replicates; default DefaultMaxJumps, negative: no bound).
	// A null whose fitted rates are extreme (a flat direction of the
	// likelihood lets them run off) makes thousands of hidden jumps per
	// recorded event; ParametricBootstrap then refuses with a
	// *BootstrapCostError before any work.
	MaxJumps float64
}

// DefaultMaxJumps is the default bound on the expected simulated jumps of
// one bootstrap run: about 5 minutes of simulation at 30 ns a jump.
const DefaultMaxJumps = 1e10

// BootstrapCostError says that simulating the replicates would take too
// many jumps.
type BootstrapCostError struct {
	Model         string
	JumpsPerEvent float64 // expected jumps per recorded event under the null
	Events        int     // recorded events per replicate
	Replicates    int     // replicates of the run
	MaxRate       float64 // the null's largest exit rate (1/time)
	Limit         float64
}

func (e *BootstrapCostError) Error() string {
	return fmt.Sprintf("bootstrap: simulating %d replicates of %d events from %s would take about %.3g jumps (%.3g per recorded event; its fitted exit rates reach %.3g per unit time), more than %.3g: the fitted rates are stiff, often along a direction the data do not determine; fix or tie them in the spec, or split the replicates into shards", e.Replicates, e.Events, e.Model, e.JumpsPerEvent*float64(e.Events)*float64(e.Replicates), e.JumpsPerEvent, e.MaxRate, e.Limit)
}

// jumpsPerEvent is the expected number of jumps per recorded event of
// net in its stationary state, sum_i pi_i q_i / sum_(i->j labelled)
// pi_i w_ij p_l, and its largest exit rate q_i. A dead time loses events
// and makes the true number larger.
func jumpsPerEvent(net *models.Network) (per, maxRate float64, err error) {
	pi, err := net.Stationary()
	if err != nil {
		return 0, 0, err
	}
	q := make([]float64, len(pi))
	det := 0.0
	for _, t := range net.Transitions() {
		q[t.From] += t.Rate
		if t.Label != models.Hidden {
			det += pi[t.From] * t.Rate * net.Labels[t.Label].Detect
		}
	}
	jumps := 0.0
	for i, v := range q {
		jumps += pi[i] * v
		maxRate = math.Max(maxRate, v)
	}
	return jumps / det, maxRate, nil
}

// BootstrapResult holds the replicates of one run (a shard's share, or
// all of them).
type BootstrapResult struct {
	Observed   float64 // the observed statistic 2 (ln L_alt - ln L_null)
	Replicates int     // B, all shards together
	// Index lists the replicates run, ascending, and LR their statistic
	// 2 (ln L_alt - ln L_null) on the simulated data (NaN when a fit
	// failed; Errors[i] then says why).
	Index  []int
	LR     []float64
	Errors []string
	// Interrupted is true when the context stopped the run: only the
	// replicates in Index were finished.
	Interrupted bool
}

// ReplicateSeed is the seed of bootstrap replicate b: the SplitMix64
// finaliser of seed + (b+1) times the golden-ratio increment (Steele, Lea
// and Flood, OOPSLA 2014), so that neighbouring replicates get unrelated
// streams and a replicate's data depend on nothing but (seed, b).
func ReplicateSeed(seed uint64, b int) uint64 {
	z := seed + uint64(b+1)*0x9e3779b97f4a7c15
	z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9
	z = (z ^ (z >> 27)) * 0x94d049bb133111eb
	return z ^ (z >> 31)
}

// ParametricBootstrap calibrates the log-likelihood ratio of two fitted
// models by simulation under the null. null is the model the data are
// simulated from, at its maximum-likelihood values xNull (in the order of
// null.Free()); alt the other model, with its maximum-likelihood values
// xAlt; observed = 2 (ln L_alt - ln L_null) on the records d. Each
// replicate b simulates a data set with d's record structure (the same
// number of records, each with the same number of recorded events,
// started from the stationary law, through the instrument of o.Fit, with
// no known end), fits both models to it, the null starting from xNull and
// the alternative from xAlt besides the usual starts, and records
// LR_b = 2 (ln L_alt - ln L_null). BootstrapPValue turns the replicates
// into the p-value (1 + #{LR_b >= observed}) / (1 + B) (Davison and
// Hinkley, Bootstrap Methods and their Application (1997), eq. 4.11),
// exact in level for any B when the fitted null is the truth.
func ParametricBootstrap(null *models.Model, xNull []float64, alt *models.Model, xAlt []float64, observed float64, d *likelihood.Data, o BootstrapOptions) (*BootstrapResult, error) {
	if o.Replicates < 1 {
		return nil, fmt.Errorf("bootstrap: %d replicates: want at least 1", o.Replicates)
	}
	if len(d.Records) == 0 {
		return nil, fmt.Errorf("bootstrap: no records")
	}
	nullStart, err := withStartValues(null, xNull)
	if err != nil {
		return nil, fmt.Errorf("bootstrap: null model %s: %w", null.Name, err)
	}
	altStart, err := withStartValues(alt, xAlt)
	if err != nil {
		return nil, fmt.Errorf("bootstrap: model %s: %w", alt.Name, err)
	}
	net, err := null.Network(xNull)
	if err != nil {
		return nil, fmt.Errorf("bootstrap: null model %s: %w", null.Name, err)
	}
	// Refuse an instrument the simulator refuses before any work.
	if _, err := newBootSimulator(net, 0, o.Fit.Likelihood.Instrument); err != nil {
		return nil, fmt.Errorf("bootstrap: %w", err)
	}
	var jobs []int
	for b := 0; b < o.Replicates; b++ {
		if o.Shard.Selects(b) {
			jobs = append(jobs, b)
		}
	}
	limit := o.MaxJumps
	if limit == 0 {
		limit = DefaultMaxJumps
	}
	if per, maxRate, err := jumpsPerEvent(net); err != nil {
		return nil, fmt.Errorf("bootstrap: null model %s: %w", null.Name, err)
	} else if n := d.Events(); limit > 0 && per*float64(n)*float64(len(jobs)) > limit {
		return nil, &BootstrapCostError{Model: null.Name, JumpsPerEvent: per, Events: n, Replicates: len(jobs), MaxRate: maxRate, Limit: limit}
	}
	ctx := o.Fit.Context
	if ctx == nil {
		ctx = context.Background()
	}
	fo := o.Fit
	fo.Workers, fo.Profile, fo.Progress, fo.Context = 1, false, nil, ctx
	workers := o.Fit.Workers
	if workers <= 0 {
		workers = runtime.GOMAXPROCS(0)
	}
	lr := make([]float64, len(jobs))
	errs := make([]string, len(jobs))
	done := make([]bool, len(jobs))
	next := make(chan int)
	var mu sync.Mutex
	finished := 0
	var wg sync.WaitGroup
	for range min(workers, max(len(jobs), 1)) {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for j := range next {
				v, err := bootReplicate(net, nullStart, altStart, d, jobs[j], o.Seed, fo)
				if ctx.Err() != nil {
					continue // a fit cut short is not a replicate
				}
				lr[j] = v
				if err != nil {
					errs[j] = err.Error()
				}
				mu.Lock()
				done[j] = true
				finished++
				if o.Progress != nil {
					o.Progress(finished, len(jobs))
				}
				mu.Unlock()
			}
		}()
	}
	for j := range jobs {
		if ctx.Err() != nil {
			break
		}
		next <- j
	}
	close(next)
	wg.Wait()
	res := &BootstrapResult{Observed: observed, Replicates: o.Replicates, Interrupted: ctx.Err() != nil}
	for j, b := range jobs {
		if done[j] {
			res.Index = append(res.Index, b)
			res.LR = append(res.LR, lr[j])
			res.Errors = append(res.Errors, errs[j])
		}
	}
	return res, nil
}

// bootReplicate simulates replicate b and returns its statistic (NaN and
// the error when a fit failed).
func bootReplicate(net *models.Network, null, alt *models.Model, d *likelihood.Data, b int, seed uint64, fo FitOptions) (float64, error) {
	s := ReplicateSeed(seed, b)
	sim, err := newBootSimulator(net, s, fo.Likelihood.Instrument)
	if err != nil {
		return math.NaN(), err
	}
	sd, err := simulateLike(sim, net, d)
	if err != nil {
		return math.NaN(), fmt.Errorf("replicate %d: %w", b, err)
	}
	fo.Seed = s
	f0, err := Fit(null, sd, fo)
	if err != nil {
		return math.NaN(), fmt.Errorf("replicate %d: fitting %s: %w", b, null.Name, err)
	}
	f1, err := Fit(alt, sd, fo)
	if err != nil {
		return math.NaN(), fmt.Errorf("replicate %d: fitting %s: %w", b, alt.Name, err)
	}
	return 2 * (f1.LogLik - f0.LogLik), nil
}

func newBootSimulator(net *models.Network, seed uint64, in likelihood.Instrument) (*models.Simulator, error) {
	sim, err := models.NewSimulator(net, seed)
	if err != nil {
		return nil, err
	}
	if err := sim.SetDeadTime(in.DeadTime); err != nil {
		return nil, err
	}
	if err := sim.SetFrame(in.Frame); err != nil {
		return nil, err
	}
	return sim, nil
}

// simulateLike draws a data set with d's record structure: as many
// records, with the same IDs and numbers of events, each started from the
// stationary law; the labels are net's.
func simulateLike(sim *models.Simulator, net *models.Network, d *likelihood.Data) (*likelihood.Data, error) {
	out := &likelihood.Data{}
	for _, l := range net.Labels {
		out.Labels = append(out.Labels, l.Name)
	}
	var buf []models.Event
	for _, r := range d.Records {
		n := r.Len()
		sim.StartStationary()
		buf, _ = sim.Visible(n, buf[:0])
		if err := sim.Err(); err != nil {
			return nil, err
		}
		rec := likelihood.Record{ID: r.ID, End: math.NaN(), Time: make([]float64, n), Label: make([]uint8, n)}
		for i, e := range buf {
			rec.Time[i], rec.Label[i] = e.Time, uint8(e.Label)
		}
		out.Records = append(out.Records, rec)
	}
	return out, nil
}

// withStartValues returns a copy of m whose free parameters start at x
// (in the order of m.Free()).
func withStartValues(m *models.Model, x []float64) (*models.Model, error) {
	free := m.Free()
	if len(x) != len(free) {
		return nil, fmt.Errorf("%d values for %d free parameters", len(x), len(free))
	}
	byName := map[string]float64{}
	for j, n := range free {
		byName[n] = x[j]
	}
	mc := *m
	mc.Params = append([]models.Param(nil), m.Params...)
	for i := range mc.Params {
		if v, ok := byName[mc.Params[i].Name]; ok && !mc.Params[i].Fixed {
			if !(v > 0) || math.IsInf(v, 0) {
				return nil, fmt.Errorf("parameter %s = %v: want a finite positive start", mc.Params[i].Name, v)
			}
			mc.Params[i].Value = v
		}
	}
	return &mc, nil
}

// BootstrapPValue returns the parametric-bootstrap p-value
// (1 + #{LR_b >= observed}) / (1 + B) over the replicates with a value
// (NaN ones, failed fits, are left out and counted in failed), and the
// count of exceedances.
func BootstrapPValue(observed float64, lr []float64) (p float64, exceed, used, failed int) {
	for _, v := range lr {
		switch {
		case math.IsNaN(v):
			failed++
		default:
			used++
			if v >= observed {
				exceed++
			}
		}
	}
	return float64(1+exceed) / float64(1+used), exceed, used, failed
}
