package infer

import (
	"context"
	"errors"
	"fmt"
	"math"
	"runtime"
	"slices"
	"strconv"

	"edgewise/likelihood"
	"edgewise/models"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/stat/distuv"
)

// Decision names the rule that tells B from A in the power study.
type Decision int

const (
	// DecideAuto is the likelihood-ratio test when B is nested in A's
	// class, else BIC.
	DecideAuto Decision = iota
	// DecideLR is the likelihood-ratio test of B (nested) against A's class.
	DecideLR
	// DecideBIC prefers the lower BIC.
	DecideBIC
)

func (d Decision) String() string {
	switch d {
	case DecideLR:
		return "likelihood ratio"
	case DecideBIC:
		return "BIC"
	}
	return "auto"
}

// PlanOptions configures Plan.
type PlanOptions struct {
	// Instrument of the planned experiment (dead time, frames), used in
	// the simulations, the fits and the exact observables; detection
	// probabilities come from A's spec.
	Instrument likelihood.Instrument
	// Plus and Minus name the labels of the visible edge whose F is
	// planned; empty: "+" and "-" when A has them on reversed
	// transitions, else the first label with a reverse.
	Plus, Minus string
	// KLEvents (default 200000) events are simulated from A for the KL
	// rate, in records of KLBlock (default 5000) events.
	KLEvents, KLBlock int
	// FitStarts is the number of starts of the fits on the long
	// simulation (default 8); Starts that of each fit in the power study
	// (default 3: A's own values or B's best member, a rescaled copy, a
	// data-informed start).
	FitStarts, Starts int
	// Events lists the event counts of the power study (one record of n
	// events per replicate); empty: no power simulation, unless
	// AutoEvents asks for the predicted event count for the target power
	// with half and twice it (each at most MaxAutoEvents).
	Events     []int
	AutoEvents bool
	// Replicates per event count (default 200).
	Replicates int
	// Decision rule; Alpha is the size of the likelihood-ratio test
	// (default 0.05).
	Decision Decision
	Alpha    float64
	// Power is the target power of the predicted event count (default
	// 0.8), in (0, 1).
	Power float64
	// SE, when > 0, is a target standard error of F (k_BT).
	SE float64
	// Windows lists the mean numbers of events per fixed-time window of
	// the departure planner (default 5, 10, 20, 50).
	Windows []float64
	// Seed fixes every simulation and every fit.
	Seed uint64
	// Workers (default GOMAXPROCS); the result does not depend on it.
	Workers int
	// Context stops the work early (an error is returned).
	Context context.Context
	// Progress, when not nil, is called after each unit of work with the
	// stage ("simulate", "fit", "power") and the counts, one call at a
	// time.
	Progress func(stage string, done, total int)
}

func (o *PlanOptions) defaults() error {
	if o.KLEvents == 0 {
		o.KLEvents = 200000
	}
	if o.KLBlock == 0 {
		o.KLBlock = 5000
	}
	if o.FitStarts == 0 {
		o.FitStarts = 8
	}
	if o.Starts == 0 {
		o.Starts = 3
	}
	if o.Replicates == 0 {
		o.Replicates = 200
	}
	if o.Alpha == 0 {
		o.Alpha = 0.05
	}
	if o.Power == 0 {
		o.Power = 0.8
	}
	if len(o.Windows) == 0 {
		o.Windows = []float64{5, 10, 20, 50}
	}
	if o.Context == nil {
		o.Context = context.Background()
	}
	switch {
	case !(o.Power > 0 && o.Power < 1):
		return fmt.Errorf("target power %v: want a value in (0, 1)", o.Power)
	case !(o.Alpha > 0 && o.Alpha < 1):
		return fmt.Errorf("test size alpha %v: want a value in (0, 1)", o.Alpha)
	case o.KLBlock < 100:
		return fmt.Errorf("KL block of %d events: want at least 100", o.KLBlock)
	case o.KLEvents < 4*o.KLBlock:
		return fmt.Errorf("KL simulation of %d events: want at least 4 blocks of %d", o.KLEvents, o.KLBlock)
	case o.Replicates < 1:
		return fmt.Errorf("%d replicates: want at least 1", o.Replicates)
	case o.FitStarts < 1 || o.Starts < 1:
		return fmt.Errorf("starts %d and %d: want at least 1", o.FitStarts, o.Starts)
	case math.IsNaN(o.SE) || math.IsInf(o.SE, 0) || o.SE < 0:
		return fmt.Errorf("target standard error of F %v: want a finite value >= 0", o.SE)
	}
	for _, n := range o.Events {
		if n < 3 {
			return fmt.Errorf("event count %d: want at least 3 events", n)
		}
	}
	for _, m := range o.Windows {
		if !(m >= 1 && m <= 1000) {
			return fmt.Errorf("fixed-time window of %v events on average: want 1 to 1000", m)
		}
	}
	return o.Instrument.Validate()
}

// PowerRow is the power study at one event count.
type PowerRow struct {
	Events int
	// ExpectedLogLR is (n - 1) KL, nats.
	ExpectedLogLR float64
	// Predicted is the predicted power (see Plan).
	Predicted float64
	// Replicates that gave a decision, Rejections of B among them, and
	// Failed replicates (a fit failed; left out of the power).
	Replicates, Rejections, Failed int
	// Power = Rejections/Replicates with its Clopper-Pearson 95% interval.
	Power, PowerLo, PowerHi float64
	// MeanLogLR and SELogLR: mean and standard error over the replicates
	// of ln L(A's class fitted) - ln L(B's class fitted); about
	// ExpectedLogLR + (k_A - k_B)/2 for nested classes. Infinite when a
	// replicate holds a label pair B cannot produce (Impossible counts them).
	MeanLogLR, SELogLR float64
	Impossible         int
	// FSE is the predicted standard error of F at n events,
	// sqrt(V_F/(n - 1)); FSD the standard deviation of the replicates'
	// F, over the FFinite replicates where F is finite.
	FSE, FSD float64
	FFinite  int
}

// FixedTimeRow is the fixed-time departure for one window length.
type FixedTimeRow struct {
	MeanEvents float64 // m, events per window on average
	Duration   float64 // t = m times the mean gap (time units)
	Slope      float64 // exact fixed-time slope estimand
	Departure  float64 // Slope - F
	SlopeVar   float64 // per-window variance of the data's slope
	// Events for |Departure| = 3 standard errors; +Inf when the
	// departure is 0 or the slope is undefined.
	Events float64
}

// PlanResult is the outcome of Plan.
type PlanResult struct {
	A, B    string // model names
	Options PlanOptions
	// KL rate per gap (nats) with its Monte Carlo SE; KLFitted and
	// KLHeldOut are the means over the fitted and the held-out halves.
	KL, KLSE, KLFitted, KLHeldOut float64
	// Sigma2 is the variance rate of the log-likelihood ratio per gap.
	Sigma2 float64
	// KLRecords records of KLBlock events were simulated.
	KLRecords int
	// Resolved is false when KL is within 2 SE of 0.
	Resolved bool
	// BFit is B's class fitted to the first half of the long simulation;
	// AFit A's class fitted to it (its effective number of parameters sets
	// the degrees of freedom).
	AFit, BFit *FitResult
	// Impossible, when not nil, is a label pair that A produces and B
	// cannot produce at any rates: KL is infinite and the first such pair
	// rules B out. ImpossibleRate is its stationary rate per gap under A.
	Impossible     *ImpossibleError
	ImpossibleRate float64
	// Decision used, its degrees of freedom k_A - k_B (effective, from
	// the long fits), the boundary count of the chi-bar-square, the
	// critical value of 2 ln LR (LR decision) and how B nests in A's class
	// ("" when not nested).
	Decision Decision
	DF       int
	Boundary int
	Critical float64
	Nested   string
	// EventsFor10 is the events for an expected ln LR of 10 nats (a lower
	// bound when !Resolved); EventsForPower those for the target power
	// (predicted; +Inf when unreachable).
	EventsFor10, EventsForPower float64
	Rows                        []PowerRow
	// F of A's visible edge, V_F (variance of F per gap) and the events
	// for the target SE (NaN when no SE was asked).
	Plus, Minus        string
	F, VF, EventsForSE float64
	// Multicyclic says whether A has more than one cycle; FixedTime holds
	// the departure rows then.
	Multicyclic bool
	FixedTime   []FixedTimeRow
	Notes       []string

	// For PredictedPower.
	pA     *likelihood.Predictor
	netB   *models.Network
	labels []string
}

// PredictedPower returns the predicted power at n events (see Plan); NaN
// for n < 2.
func (r *PlanResult) PredictedPower(n float64) float64 {
	if n < 2 || r.pA == nil {
		return math.NaN()
	}
	return predictedPower(r, n, r.pA, r.netB, r.labels, r.Options.Instrument)
}

// Plan computes how many visible events tell scheme B from scheme A when
// A, at its spec values, is true. A's free parameters are taken at their
// spec values (a note says so). A and B must have the same visible
// labels.
//
// # Kullback-Leibler rate
//
// The per-event Kullback-Leibler rate of A's visible process against the
// closest member of B's class is
//
//	KL = lim (1/n) E_A[ ln L_A(x_1..x_n) - ln L_B*(x_1..x_n) ],   B* = argmin over B's class,
//
// in nats per gap (a gap is an event after the first: each record's first
// event is conditioned on, as in every fit). No closed form exists for
// hidden networks, so Plan measures it on a long simulation of A:
// KLEvents events (default 200000) in independent stationary records of
// KLBlock events (default 5000, far longer than the labels' memory), each
// with its own seed. B's class is fitted (Fit) to the first half of the
// records; the rate is the mean over all records b of
//
//	d_b = [ln L_A(record b) - ln L_B^(record b)] / (gaps of record b),
//
// with A at its spec values. Over the fitted half d_b is biased low by the
// fit's optimism, about t/(2 n_1) per gap (t = tr(J^-1 K), the number of
// B's parameters when B holds A, as in Takeuchi's information criterion); over the held-out
// half it is biased high by the same amount to first order (the fitted B
// is off its best member by a deviation of the same size), so the mean of
// the two halves cancels the bias to first order. Its Monte Carlo standard
// error is the spread of the d_b: SE = sd(d_b)/sqrt(records) (the records
// are independent). sigma^2 = Var(n_b d_b)/n_b is the variance rate of the
// log-likelihood ratio per gap, which the normal approximation of its law
// uses (Vuong, Econometrica 57, 307 (1989), eq. 3.3: for non-nested
// models the log-likelihood ratio of n gaps is asymptotically normal with
// mean n KL and variance n sigma^2).
//
// # Expected log-likelihood ratio and events
//
// A record of n events has n - 1 gaps and expected log-likelihood ratio
// (n - 1) KL; telling the schemes apart by 10 nats (design.md section 7)
// needs n_10 = 10/KL + 1 events. When KL is within 2 standard errors of 0
// the simulation cannot resolve it, and only the bound n_10 >= 10/(KL +
// 2 SE) + 1 is given.
//
// # Power
//
// Replicates of n events are simulated from A (one stationary record
// each, with a seed derived from Seed, the event count and the replicate,
// so the result does not depend on the number of workers), and both A's
// class (A's spec with its free parameters, started at A's values) and
// B's class (started at the fitted best member) are fitted to each. The
// decision rejects B in favour of A's class:
//
//   - likelihood ratio (B nested in A's class, NestedTests' rule): when
//     2 ln LR > c, c the 1 - Alpha quantile of chi-square on df = k_A - k_B
//     degrees of freedom (chi-bar-square when B holds rates of A at zero;
//     Self and Liang, JASA 82, 605 (1987));
//   - BIC (any pair): when BIC_A < BIC_B, i.e. 2 ln LR > (k_A - k_B) ln(n - 1)
//     with the effective numbers of parameters of each fit (as compare).
//
// The power at n is the share of replicates that reject B, with its
// Clopper-Pearson 95% interval. The predicted power uses, for df >= 1,
// the noncentral chi-square law of 2 ln LR on df degrees of freedom with
// noncentrality lambda = 2 (n - 1) KL (Wald, Trans. AMS 54, 426 (1943);
// Self, Mauritsen and Ohara, Biometrics 48, 31 (1992)), and otherwise the
// normal law of mean 2 (n - 1) KL + k_A - k_B and variance
// 4 (n - 1) sigma^2 (Vuong 1989). The events for the target power solve
// predicted power = Power.
//
// # Precision of F
//
// With A's exact label law r_l and P(l'|l) (likelihood.Predictor), the
// delta-method variance of the data's F = ln[P(+|+)/P(-|-)] (design.md
// section 7),
//
//	Var(F) ~ 1/N_{++} - 1/N_{+.} + 1/N_{--} - 1/N_{-.},   N_{ll'} ~ (n - 1) r_l P(l'|l),
//
// is V_F/(n - 1) with V_F = 1/(r_+ P_{++}) - 1/r_+ + 1/(r_- P_{--}) - 1/r_-,
// the exact asymptotic variance when the labels form a first-order Markov
// chain (each label on one directed edge); the events for a standard
// error s are V_F/s^2 + 1. Each power replicate also gives the data's F,
// so the table holds the simulated spread of F beside the prediction.
//
// # Fixed-time departure
//
// For a multicyclic A the slope of ln[P_t(c)/P_t(-c)] over windows of a
// fixed duration t (SymmetrySlope of the exact fixed-time law,
// Predictor.FixedTime) differs from F, the exact count-stopped slope. A
// record of n events cut into windows of m events on average (t = m times
// the mean gap) holds W = n/m windows; the data's fixed-time slope has
// variance SlopeVar/W (SlopeEstimand) and F has V_F/n, so the departure
// Delta = slope_t - F is seen at 3 standard errors (both taken as
// independent: conservative, as the data side's fallback) after
//
//	n_3 = 9 (m SlopeVar + V_F) / Delta^2 events.
//
// # Label pairs B cannot produce
//
// When A produces a label pair (l, l') that B cannot produce at any rates
// (P_B(l'|l) = 0 by B's graph, e.g. ++ for a chain), the KL rate is
// infinite and the first such pair rules B out: the predicted power at n
// events is the probability that n - 1 gaps of A hold such a pair, from
// an exact forward recursion over (last label, state after it) with A's
// embedded matrices.
func Plan(a, b *models.Model, o PlanOptions) (*PlanResult, error) {
	if err := o.defaults(); err != nil {
		return nil, fmt.Errorf("plan: %w", err)
	}
	netA, err := a.Network(a.Start())
	if err != nil {
		return nil, fmt.Errorf("plan: A (%s): %w", a.Name, err)
	}
	netB, err := b.Network(b.Start())
	if err != nil {
		return nil, fmt.Errorf("plan: B (%s): %w", b.Name, err)
	}
	if err := sameLabels(a, b); err != nil {
		return nil, fmt.Errorf("plan: %w", err)
	}
	if err := netA.Validate(); err != nil {
		return nil, fmt.Errorf("plan: A (%s): %w", a.Name, err)
	}
	res := &PlanResult{A: a.Name, B: b.Name, Options: o, Decision: o.Decision}
	if n := len(a.Free()); n > 0 {
		res.Notes = append(res.Notes, fmt.Sprintf("A (%s) has %d free parameters: its rates are taken as they are in the spec (a spec written by fit --model-out holds the fitted values)", a.Name, n))
	}
	kA, err := likelihood.NewKernels(netA)
	if err != nil {
		return nil, fmt.Errorf("plan: A (%s): %w", a.Name, err)
	}
	pA, err := likelihood.NewPredictor(kA, o.Instrument)
	if err != nil {
		return nil, fmt.Errorf("plan: A (%s): %w", a.Name, err)
	}
	labels := make([]string, len(netA.Labels))
	for i, l := range netA.Labels {
		labels[i] = l.Name
	}
	prog := newProgress(o.Progress)
	res.pA, res.netB, res.labels = pA, netB, labels

	// Labels and F.
	plus, minus, err := planEdge(pA, labels, o.Plus, o.Minus)
	if err != nil {
		return nil, fmt.Errorf("plan: A (%s): %w", a.Name, err)
	}
	res.F, res.VF, res.EventsForSE = math.NaN(), math.NaN(), math.NaN()
	if plus >= 0 {
		res.Plus, res.Minus = labels[plus], labels[minus]
		res.F = pA.EffectiveAffinity(plus, minus)
		res.VF = affinityVariance(pA, plus, minus)
		if o.SE > 0 {
			res.EventsForSE = res.VF/(o.SE*o.SE) + 1
		}
		if !oneEdgePerLabel(kA) {
			res.Notes = append(res.Notes, "a label of A sits on several directed edges: the labels are not a first-order Markov chain, and the delta-method variance of F is an approximation")
		}
	} else {
		res.Notes = append(res.Notes, "A has no pair of labels on reversed transitions: no F to plan")
	}

	// Structural impossibility: B cannot produce a pair A produces.
	imp, rate, err := impossiblePairs(pA, netB, labels, o.Instrument)
	if err != nil {
		return nil, fmt.Errorf("plan: B (%s): %w", b.Name, err)
	}
	if imp != nil {
		imp.Model = b.Name
		res.Impossible, res.ImpossibleRate = imp, rate
	}

	// The long simulation.
	nrec := o.KLEvents / o.KLBlock
	res.KLRecords = nrec
	long := &likelihood.Data{Labels: labels, Records: make([]likelihood.Record, nrec)}
	errs := make([]error, nrec)
	parallel(nrec, workersOf(o.Workers), func(i int) {
		long.Records[i], errs[i] = simulateRecord(netA, o.Instrument, planSeed(o.Seed, 1, 0, uint64(i)), o.KLBlock)
		long.Records[i].ID = strconv.Itoa(i + 1)
		prog.step("simulate", nrec)
	})
	if err := errors.Join(errs...); err != nil {
		return nil, fmt.Errorf("plan: simulating A (%s): %w", a.Name, err)
	}
	if err := o.Context.Err(); err != nil {
		return nil, fmt.Errorf("plan: interrupted: %w", err)
	}
	half := &likelihood.Data{Labels: labels, Records: long.Records[:nrec/2]}
	fo := FitOptions{Likelihood: likelihood.Options{Instrument: o.Instrument}, Starts: o.FitStarts, Seed: o.Seed, Workers: o.Workers, Context: o.Context}
	res.AFit, err = Fit(a, half, fo)
	prog.step("fit", 2)
	if err != nil {
		return nil, fmt.Errorf("plan: fitting A's class to its own simulation: %w", err)
	}
	if imp == nil {
		res.BFit, err = Fit(b, half, fo)
		var ie *ImpossibleError
		if errors.As(err, &ie) {
			res.Impossible = ie
			res.ImpossibleRate = math.NaN()
		} else if err != nil {
			return nil, fmt.Errorf("plan: fitting B's class to A's simulation: %w", err)
		}
	}
	prog.step("fit", 2)
	if err := o.Context.Err(); err != nil {
		return nil, fmt.Errorf("plan: interrupted: %w", err)
	}
	if res.AFit.Interrupted || (res.BFit != nil && res.BFit.Interrupted) {
		return nil, errors.New("plan: interrupted")
	}

	if res.Impossible != nil {
		res.KL, res.KLSE, res.KLFitted, res.KLHeldOut, res.Sigma2 = math.Inf(1), 0, math.Inf(1), math.Inf(1), math.NaN()
		res.Resolved = true
		res.EventsFor10 = 2
		res.Notes = append(res.Notes, fmt.Sprintf("B cannot produce %q followed by %q at any rates, and A does: the first such pair rules B out, whatever its rates (KL is infinite)", res.Impossible.From, res.Impossible.To))
	} else {
		if err := klRate(res, netA, long, o); err != nil {
			return nil, err
		}
	}

	// Decision rule.
	if err := decide(res, a, b, o); err != nil {
		return nil, err
	}
	res.EventsForPower = eventsForPower(res, o.Power, pA, netB, labels, o.Instrument)

	// Fixed-time departure.
	res.Multicyclic = len(netA.CycleBasis()) > 1
	if res.Multicyclic && plus >= 0 {
		res.FixedTime, err = fixedTimeRows(pA, plus, minus, res.F, res.VF, o.Windows)
		if err != nil {
			res.Notes = append(res.Notes, "fixed-time departure not computed: "+err.Error())
		}
	}

	// Power study.
	if len(o.Events) == 0 && o.AutoEvents {
		o.Events = autoEvents(res.EventsForPower)
		res.Options.Events = o.Events
		if len(o.Events) == 0 {
			res.Notes = append(res.Notes, fmt.Sprintf("no power simulation: the predicted event count for power %g is %s, beyond the %g events simulated without --events", o.Power, eventsText(res.EventsForPower), float64(MaxAutoEvents)))
		}
	}
	if len(o.Events) > 0 {
		if err := powerStudy(res, a, b, netA, netB, labels, plus, minus, o, prog); err != nil {
			return nil, err
		}
	}
	return res, nil
}

// MaxAutoEvents caps the event counts AutoEvents chooses.
const MaxAutoEvents = 1000000

// autoEvents returns half, one and twice n (n itself exact, the others to
// two significant digits), those between 3 and MaxAutoEvents.
func autoEvents(n float64) []int {
	var out []int
	for _, f := range []float64{0.5, 1, 2} {
		v := n * f
		if f != 1 && v >= 100 {
			p := math.Pow(10, math.Floor(math.Log10(v))-1)
			v = math.Round(v/p) * p
		}
		v = math.Ceil(v)
		if v >= 3 && v <= MaxAutoEvents && !slices.Contains(out, int(v)) {
			out = append(out, int(v))
		}
	}
	return out
}

func eventsText(n float64) string {
	if math.IsInf(n, 1) {
		return "unbounded"
	}
	return strconv.FormatFloat(n, 'g', 3, 64)
}

// sameLabels refuses A and B whose visible labels differ.
func sameLabels(a, b *models.Model) error {
	names := func(m *models.Model) []string {
		var s []string
		for _, l := range m.Labels {
			s = append(s, l.Name)
		}
		slices.Sort(s)
		return s
	}
	la, lb := names(a), names(b)
	if !slices.Equal(la, lb) {
		return fmt.Errorf("A (%s) has the visible labels %q and B (%s) has %q: both schemes must be read by the same instrument, with the same labels", a.Name, la, b.Name, lb)
	}
	return nil
}

func workersOf(w int) int {
	if w <= 0 {
		return runtime.GOMAXPROCS(0)
	}
	return w
}

// planSeed derives the seed of one simulation or fit from the user's seed
// and its coordinates (stage, event-count index, replicate) by splitmix64
// steps, so that every unit of work has its own stream whatever the order
// in which workers run them.
func planSeed(seed uint64, stage, j, i uint64) uint64 {
	x := seed
	for _, v := range []uint64{stage, j, i} {
		x ^= v + 0x9e3779b97f4a7c15 + (x << 6) + (x >> 2)
		x = splitmix64(x)
	}
	return x
}

func splitmix64(x uint64) uint64 {
	x += 0x9e3779b97f4a7c15
	x = (x ^ (x >> 30)) * 0xbf58476d1ce4e5b9
	x = (x ^ (x >> 27)) * 0x94d049bb133111eb
	return x ^ (x >> 31)
}

// simulateRecord draws one stationary record of n visible events of net
// under the instrument.
func simulateRecord(net *models.Network, in likelihood.Instrument, seed uint64, n int) (likelihood.Record, error) {
	sim, err := models.NewSimulator(net, seed)
	if err != nil {
		return likelihood.Record{}, err
	}
	if err := sim.SetDeadTime(in.DeadTime); err != nil {
		return likelihood.Record{}, err
	}
	if in.Frame > 0 {
		if err := sim.SetFrame(in.Frame); err != nil {
			return likelihood.Record{}, err
		}
	}
	sim.StartStationary()
	ev, _ := sim.Visible(n, make([]models.Event, 0, n))
	if err := sim.Err(); err != nil {
		return likelihood.Record{}, err
	}
	rec := likelihood.Record{End: math.NaN(), Time: make([]float64, len(ev)), Label: make([]uint8, len(ev))}
	for k, e := range ev {
		rec.Time[k], rec.Label[k] = e.Time, uint8(e.Label)
	}
	return rec, nil
}

// planEdge picks the visible edge whose F is planned (-1, -1 when A has
// no label with a reverse).
func planEdge(p *likelihood.Predictor, names []string, plus, minus string) (int, int, error) {
	idx := func(s string) int { return slices.Index(names, s) }
	if plus != "" || minus != "" {
		pi, mi := idx(plus), idx(minus)
		if pi < 0 || mi < 0 || pi == mi {
			return -1, -1, fmt.Errorf("visible edge %q, %q: want two different labels of the model (%q)", plus, minus, names)
		}
		if p.Reverse(pi) != mi {
			return -1, -1, fmt.Errorf("labels %q and %q do not sit on reversed transitions, so they are not one visible edge", plus, minus)
		}
		return pi, mi, nil
	}
	if pi, mi := idx("+"), idx("-"); pi >= 0 && mi >= 0 && p.Reverse(pi) == mi {
		return pi, mi, nil
	}
	for l := range names {
		if r := p.Reverse(l); r >= 0 && r != l {
			return l, r, nil
		}
	}
	return -1, -1, nil
}

// oneEdgePerLabel reports whether every label sits on one directed edge,
// so that the labels form a first-order Markov chain (any detection
// probability: the state after a detected event is known).
func oneEdgePerLabel(k *likelihood.Kernels) bool {
	for _, es := range k.Edges {
		if len(es) != 1 {
			return false
		}
	}
	return true
}

// affinityVariance returns V_F = 1/(r+ P++) - 1/r+ + 1/(r- P--) - 1/r-,
// the delta-method variance of F per gap; +Inf when P++ or P-- is 0.
func affinityVariance(p *likelihood.Predictor, plus, minus int) float64 {
	r := p.LabelLaw()
	tr := p.Transition()
	pp, mm := tr[plus][plus], tr[minus][minus]
	if !(pp > 0 && mm > 0) {
		return math.Inf(1)
	}
	return 1/(r[plus]*pp) - 1/r[plus] + 1/(r[minus]*mm) - 1/r[minus]
}

// impossiblePairs returns the first label pair (l, l') with P_A(l'|l) > 0
// and P_B(l'|l) = 0 (B at any rates: the zero pattern depends only on the
// graph), and the stationary rate per gap of all such pairs under A.
func impossiblePairs(pA *likelihood.Predictor, netB *models.Network, labels []string, in likelihood.Instrument) (*ImpossibleError, float64, error) {
	kB, err := likelihood.NewKernels(netB)
	if err != nil {
		return nil, 0, err
	}
	pB, err := likelihood.NewPredictor(kB, in)
	if err != nil {
		return nil, 0, err
	}
	ta, tb := pA.Transition(), pB.Transition()
	r := pA.LabelLaw()
	var first *ImpossibleError
	rate := 0.0
	for i, li := range labels {
		bi := netB.LabelIndex(li)
		for j, lj := range labels {
			bj := netB.LabelIndex(lj)
			if ta[i][j] > 0 && tb[bi][bj] == 0 {
				rate += r[i] * ta[i][j]
				if first == nil {
					first = &ImpossibleError{From: li, To: lj}
				}
			}
		}
	}
	return first, rate, nil
}

// klRate fills the KL rate and its error from the long simulation.
func klRate(res *PlanResult, netA *models.Network, long *likelihood.Data, o PlanOptions) error {
	lo := likelihood.Options{Instrument: o.Instrument, Workers: o.Workers}
	evA, err := likelihood.NewNetworkEvaluator(netA, lo)
	if err != nil {
		return fmt.Errorf("plan: A: %w", err)
	}
	netB, err := res.BFit.Model.Network(res.BFit.X)
	if err != nil {
		return fmt.Errorf("plan: fitted B: %w", err)
	}
	evB, err := likelihood.NewNetworkEvaluator(netB, lo)
	if err != nil {
		return fmt.Errorf("plan: fitted B: %w", err)
	}
	la, err := evA.RecordLogLiks(long)
	if err != nil {
		return fmt.Errorf("plan: ln L of A: %w", err)
	}
	lb, err := evB.RecordLogLiks(long)
	if err != nil {
		return fmt.Errorf("plan: ln L of the fitted B: %w", err)
	}
	nrec := len(long.Records)
	d := make([]float64, nrec)
	raw := make([]float64, nrec)
	gaps := 0.0
	for i := range d {
		g := float64(long.Records[i].Len() - 1)
		raw[i] = la[i] - lb[i]
		d[i] = raw[i] / g
		gaps += g
	}
	mean, v := meanVar(d)
	res.KL, res.KLSE = mean, math.Sqrt(v/float64(nrec))
	res.KLFitted, _ = meanVar(d[:nrec/2])
	res.KLHeldOut, _ = meanVar(d[nrec/2:])
	_, vr := meanVar(raw)
	res.Sigma2 = vr / (gaps / float64(nrec))
	res.Resolved = res.KL > 2*res.KLSE
	if res.Resolved {
		res.EventsFor10 = 10/res.KL + 1
	} else {
		res.EventsFor10 = math.Inf(1)
		if b := res.KL + 2*res.KLSE; b > 0 {
			res.EventsFor10 = 10/b + 1
		}
		res.Notes = append(res.Notes, fmt.Sprintf("the KL rate %.3g ± %.2g nats per event is within 2 standard errors of 0: B's class holds A's visible process, or comes closer to it than %d simulated events resolve; at least %s events are needed for an expected log-likelihood ratio of 10", res.KL, res.KLSE, res.KLRecords*o.KLBlock, eventsText(res.EventsFor10)))
	}
	return nil
}

// decide fixes the decision rule, its degrees of freedom and critical
// value.
func decide(res *PlanResult, a, b *models.Model, o PlanOptions) error {
	how, missing, nested := nestedIn(b, a)
	if nested {
		res.Nested = how
	}
	kA := res.AFit.Effective()
	kB := len(b.Free())
	if res.BFit != nil {
		kB = res.BFit.Effective()
	}
	res.DF = kA - kB
	switch o.Decision {
	case DecideAuto:
		res.Decision = DecideBIC
		if nested && res.DF >= 1 {
			res.Decision = DecideLR
		}
	case DecideLR:
		if !nested {
			return fmt.Errorf("plan: the likelihood-ratio decision needs B nested in A's class, and %s is not nested in %s (same states with A fully free, B a restriction or a sub-graph): use BIC", b.Name, a.Name)
		}
		if res.DF < 1 {
			return fmt.Errorf("plan: B (%s) determines as many parameter combinations as A's class (%d): no likelihood-ratio test", b.Name, kB)
		}
	}
	if res.Decision == DecideLR {
		res.Boundary = min(2*missing, res.DF)
		res.Critical = chiBarSquareQuantile(1-o.Alpha, res.DF, res.Boundary)
	}
	if nested && res.DF < 1 {
		res.Notes = append(res.Notes, fmt.Sprintf("B (%s) is nested in A's class but the long fits determine as many parameter combinations in each", b.Name))
	}
	if _, _, aInB := nestedIn(a, b); aInB {
		res.Notes = append(res.Notes, "A's class lies within B's: B fits A's records as well as A does, so no amount of data rules B out; a BIC preference for A is a penalty on B's extra parameters, not evidence against it")
	}
	return nil
}

// chiBarSquareQuantile returns x with chiBarSquareSF(x, df, k) = 1 - p.
func chiBarSquareQuantile(p float64, df, k int) float64 {
	if k == 0 {
		return distuv.ChiSquared{K: float64(df)}.Quantile(p)
	}
	lo, hi := 0.0, 1.0
	for chiBarSquareSF(hi, df, k) > 1-p {
		hi *= 2
	}
	for it := 0; it < 200 && hi-lo > 1e-12*hi; it++ {
		mid := (lo + hi) / 2
		if chiBarSquareSF(mid, df, k) > 1-p {
			lo = mid
		} else {
			hi = mid
		}
	}
	return (lo + hi) / 2
}

// NoncentralChiSquareSF returns P(X > x) for X noncentral chi-square on
// df > 0 degrees of freedom with noncentrality lambda >= 0, as the Poisson
// mixture sum_j Pois(j; lambda/2) P(chi2_{df+2j} > x) (Johnson, Kotz and
// Balakrishnan, Continuous Univariate Distributions vol. 2, 2nd ed.,
// chapter 29, cited from memory; checked in the tests against the df = 1
// closed form and a convolution), summed outwards from the Poisson mode until the terms and
// the weights fall below 1e-17 of their totals.
func NoncentralChiSquareSF(x, df, lambda float64) float64 {
	if x <= 0 {
		return 1
	}
	if lambda <= 0 {
		return distuv.ChiSquared{K: df}.Survival(x)
	}
	mu := lambda / 2
	mode := math.Floor(mu)
	logw := func(j float64) float64 {
		lg, _ := math.Lgamma(j + 1)
		return -mu + j*math.Log(mu) - lg
	}
	// Downwards from the mode both the weight and the survival fall, so
	// the terms fall; upwards the survival grows until df + 2j passes x,
	// after which the terms fall too.
	sum, wsum := 0.0, 0.0
	for j := mode; j >= 0; j-- {
		w := math.Exp(logw(j))
		term := w * distuv.ChiSquared{K: df + 2*j}.Survival(x)
		sum += term
		wsum += w
		if term <= 1e-17*sum && w <= 1e-17*wsum {
			break
		}
	}
	for j := mode + 1; ; j++ {
		w := math.Exp(logw(j))
		term := w * distuv.ChiSquared{K: df + 2*j}.Survival(x)
		sum += term
		wsum += w
		if df+2*j > x && j > mu && term <= 1e-17*sum && w <= 1e-17*wsum {
			break
		}
	}
	return math.Min(1, math.Max(0, sum/wsum))
}

// predictedPower is the predicted power at n events (see Plan).
func predictedPower(res *PlanResult, n float64, pA *likelihood.Predictor, netB *models.Network, labels []string, in likelihood.Instrument) float64 {
	g := n - 1
	if res.Impossible != nil {
		return impossiblePower(res, int(math.Min(g, maxSurvivalGaps)))
	}
	kl := math.Max(res.KL, 0)
	var c float64
	switch res.Decision {
	case DecideLR:
		c = res.Critical
	default:
		c = float64(res.DF) * math.Log(math.Max(g, 1))
	}
	if res.DF >= 1 {
		return NoncentralChiSquareSF(c, float64(res.DF), 2*g*kl)
	}
	mean := 2*g*kl + float64(res.DF)
	sd := math.Sqrt(4 * g * res.Sigma2)
	if !(sd > 0) {
		if mean > c {
			return 1
		}
		return 0
	}
	return distuv.UnitNormal.Survival((c - mean) / sd)
}

// eventsForPower returns the least event count whose predicted power
// reaches target (+Inf beyond 1e12 events or when KL is not resolved).
func eventsForPower(res *PlanResult, target float64, pA *likelihood.Predictor, netB *models.Network, labels []string, in likelihood.Instrument) float64 {
	if res.Impossible == nil && !res.Resolved {
		return math.Inf(1)
	}
	if res.Impossible != nil {
		return impossibleEvents(res, target)
	}
	pw := func(n float64) float64 { return predictedPower(res, n, pA, netB, labels, in) }
	lo, hi := 2.0, 4.0
	for pw(hi) < target {
		lo, hi = hi, 2*hi
		if hi > 1e12 {
			return math.Inf(1)
		}
	}
	for hi-lo > 1 {
		mid := math.Floor((lo + hi) / 2)
		if pw(mid) >= target {
			hi = mid
		} else {
			lo = mid
		}
	}
	return hi
}

// pairSurvival follows the probability that consecutive gaps of a
// stationary record of A hold no label pair that B cannot produce: the
// forward recursion over (last label, state after it),
//
//	v_{l'} = sum_{l: (l, l') possible under B} v_l M_{l'},   v_l(start) = r_l alpha_l,
//
// with M_l the embedded matrices and alpha_l the post-l state laws of A
// (exact for any labels); the survival after g gaps is sum_l v_l 1.
type pairSurvival struct {
	ok   [][]bool
	ms   []*mat.Dense
	v    []*mat.VecDense
	gaps int
}

func newPairSurvival(pA *likelihood.Predictor, netB *models.Network, labels []string, in likelihood.Instrument) (*pairSurvival, error) {
	kB, err := likelihood.NewKernels(netB)
	if err != nil {
		return nil, err
	}
	pB, err := likelihood.NewPredictor(kB, in)
	if err != nil {
		return nil, err
	}
	tb := pB.Transition()
	nl := len(labels)
	ps := &pairSurvival{ok: make([][]bool, nl), ms: make([]*mat.Dense, nl), v: make([]*mat.VecDense, nl)}
	r := pA.LabelLaw()
	n := len(pA.Stationary())
	for l := range nl {
		ps.ok[l] = make([]bool, nl)
		for j := range nl {
			ps.ok[l][j] = tb[netB.LabelIndex(labels[l])][netB.LabelIndex(labels[j])] > 0
		}
		ps.ms[l] = pA.Embedded(l)
		ps.v[l] = mat.NewVecDense(n, pA.PostEventLaw(l))
		ps.v[l].ScaleVec(r[l], ps.v[l])
	}
	return ps, nil
}

// step advances one gap.
func (ps *pairSurvival) step() {
	nl := len(ps.v)
	n := ps.v[0].Len()
	next := make([]*mat.VecDense, nl)
	acc := mat.NewVecDense(n, nil)
	for lp := range nl {
		acc.Zero()
		for l := range nl {
			if ps.ok[l][lp] {
				acc.AddVec(acc, ps.v[l])
			}
		}
		next[lp] = mat.NewVecDense(n, nil)
		next[lp].MulVec(ps.ms[lp].T(), acc)
	}
	ps.v = next
	ps.gaps++
}

// survival returns the probability that the gaps so far hold no
// impossible pair.
func (ps *pairSurvival) survival() float64 {
	s := 0.0
	for _, v := range ps.v {
		s += mat.Sum(v)
	}
	return s
}

// maxSurvivalGaps caps the recursion of pairSurvival.
const maxSurvivalGaps = 10000000

// impossiblePower returns 1 - survival after g gaps.
func impossiblePower(res *PlanResult, g int) float64 {
	ps, err := newPairSurvival(res.pA, res.netB, res.labels, res.Options.Instrument)
	if err != nil {
		return math.NaN()
	}
	for ps.gaps < min(g, maxSurvivalGaps) && ps.survival() > 1e-15 {
		ps.step()
	}
	return 1 - ps.survival()
}

// impossibleEvents returns the least event count whose records hold an
// impossible pair with probability at least target (+Inf beyond
// maxSurvivalGaps).
func impossibleEvents(res *PlanResult, target float64) float64 {
	ps, err := newPairSurvival(res.pA, res.netB, res.labels, res.Options.Instrument)
	if err != nil {
		return math.NaN()
	}
	for 1-ps.survival() < target {
		if ps.gaps >= maxSurvivalGaps {
			return math.Inf(1)
		}
		ps.step()
	}
	return float64(ps.gaps + 1)
}

// fixedTimeRows computes the fixed-time departure for each window length.
func fixedTimeRows(p *likelihood.Predictor, plus, minus int, F, vf float64, windows []float64) ([]FixedTimeRow, error) {
	q := make([]int, p.NumLabels())
	q[plus], q[minus] = 1, -1
	var rows []FixedTimeRow
	for _, m := range windows {
		t := m * p.MeanGap()
		d, err := p.FixedTime(t, q)
		if err != nil {
			return rows, err
		}
		se := d.SlopeEstimand()
		row := FixedTimeRow{MeanEvents: m, Duration: t, Slope: se.Slope, Departure: se.Slope - F, SlopeVar: se.SlopeVar, Events: math.Inf(1)}
		if se.Defined && row.Departure != 0 && !math.IsInf(F, 0) {
			row.Events = 9 * (m*se.SlopeVar + vf) / (row.Departure * row.Departure)
		}
		rows = append(rows, row)
	}
	return rows, nil
}

// replicate is one power replicate's outcome.
type replicate struct {
	failed     bool
	impossible bool
	lnLR       float64 // ln L_A^ - ln L_B^
	reject     bool
	f          float64
}

// powerStudy simulates the replicates and fills res.Rows.
func powerStudy(res *PlanResult, a, b *models.Model, netA, netB *models.Network, labels []string, plus, minus int, o PlanOptions, prog *progress) error {
	mA := a // A's class starts at A's own values
	mB := b
	if res.BFit != nil {
		mB = withValues(b, res.BFit.Free, res.BFit.X)
	}
	R := o.Replicates
	total := len(o.Events) * R
	out := make([]replicate, total)
	errs := make([]error, total)
	kA, _ := likelihood.NewKernels(netA)
	pA, err := likelihood.NewPredictor(kA, o.Instrument)
	if err != nil {
		return fmt.Errorf("plan: %w", err)
	}
	parallel(total, workersOf(o.Workers), func(k int) {
		if o.Context.Err() != nil {
			return
		}
		j, i := k/R, k%R
		n := o.Events[j]
		seed := planSeed(o.Seed, 2, uint64(j), uint64(i))
		rec, err := simulateRecord(netA, o.Instrument, seed, n)
		if err != nil {
			errs[k] = err
			return
		}
		d := &likelihood.Data{Labels: labels, Records: []likelihood.Record{rec}}
		rp := replicate{f: math.NaN()}
		if plus >= 0 {
			rp.f = pairAffinity(d, uint8(plus), uint8(minus))
		}
		fo := FitOptions{Likelihood: likelihood.Options{Instrument: o.Instrument}, Starts: o.Starts, Seed: seed, Workers: 1}
		fa, errA := Fit(mA, d, fo)
		fb, errB := Fit(mB, d, fo)
		var ie *ImpossibleError
		switch {
		case errA != nil:
			rp.failed = true
		case errors.As(errB, &ie):
			rp.impossible, rp.reject, rp.lnLR = true, true, math.Inf(1)
		case errB != nil:
			rp.failed = true
		default:
			rp.lnLR = fa.LogLik - fb.LogLik
			switch res.Decision {
			case DecideLR:
				rp.reject = 2*rp.lnLR > res.Critical
			default:
				rp.reject = fa.BIC() < fb.BIC()
			}
		}
		out[k] = rp
		prog.step("power", total)
	})
	if err := o.Context.Err(); err != nil {
		return fmt.Errorf("plan: interrupted: %w", err)
	}
	if err := errors.Join(errs...); err != nil {
		return fmt.Errorf("plan: simulating A: %w", err)
	}
	for j, n := range o.Events {
		row := PowerRow{Events: n, ExpectedLogLR: float64(n-1) * res.KL, Predicted: predictedPower(res, float64(n), pA, netB, labels, o.Instrument), FSE: math.Sqrt(res.VF / float64(n-1))}
		var lr, fs []float64
		for _, rp := range out[j*R : (j+1)*R] {
			if rp.failed {
				row.Failed++
				continue
			}
			row.Replicates++
			if rp.reject {
				row.Rejections++
			}
			if rp.impossible {
				row.Impossible++
			} else {
				lr = append(lr, rp.lnLR)
			}
			if !math.IsNaN(rp.f) && !math.IsInf(rp.f, 0) {
				fs = append(fs, rp.f)
			}
		}
		row.Power = float64(row.Rejections) / float64(row.Replicates)
		row.PowerLo, row.PowerHi = ClopperPearson(row.Rejections, row.Replicates, 0.95)
		m, v := meanVar(lr)
		row.MeanLogLR, row.SELogLR = m, math.Sqrt(v/float64(len(lr)))
		if row.Impossible > 0 {
			row.MeanLogLR, row.SELogLR = math.Inf(1), math.NaN()
		}
		_, vf := meanVar(fs)
		row.FSD, row.FFinite = math.Sqrt(vf), len(fs)
		res.Rows = append(res.Rows, row)
	}
	return nil
}

// pairAffinity returns the data's F = ln[(N++/N+.)/(N--/N-.)].
func pairAffinity(d *likelihood.Data, plus, minus uint8) float64 {
	n := TransitionCounts(d)
	rowSum := func(l uint8) float64 {
		s := 0
		for _, v := range n[l] {
			s += v
		}
		return float64(s)
	}
	pp, mm := float64(n[plus][plus]), float64(n[minus][minus])
	return math.Log(pp/rowSum(plus)) - math.Log(mm/rowSum(minus))
}

// withValues returns a copy of m whose free parameters start at x.
func withValues(m *models.Model, free []string, x []float64) *models.Model {
	c := cloneModel(m)
	for i := range c.Params {
		if k := slices.Index(free, c.Params[i].Name); k >= 0 {
			c.Params[i].Value = x[k]
		}
	}
	return c
}
