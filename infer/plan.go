package infer

import (
	"context"
	"errors"
	"fmt"
	"math"
	"slices"

	"edgewise/likelihood"
	"edgewise/models"

	"gonum.org/v1/gonum/stat"
)

// PlanOptions configures Plan.
type PlanOptions struct {
	Instrument likelihood.Instrument
	// KLEvents is the length of the record simulated from A to measure the
	// Kullback-Leibler rate (default 200000 events).
	KLEvents int
	// Events are the record lengths (events) at which the power is
	// estimated (default 1000, 3000, 10000, 30000).
	Events []int
	// Replicates per event count (default 40; 0 with Events empty skips
	// the power).
	Replicates int
	Seed       uint64
	Workers    int
	Starts     int // starts of each fit (default 3)
	// TargetSE, when > 0, asks for the events needed for the data's F to
	// reach that standard error.
	TargetSE float64
	Context  context.Context
	Progress func(done, total int)
}

func (o *PlanOptions) defaults() {
	if o.KLEvents <= 0 {
		o.KLEvents = 200000
	}
	if o.Events == nil {
		o.Events = []int{1000, 3000, 10000, 30000}
	}
	if o.Replicates <= 0 {
		o.Replicates = 40
	}
	if o.Starts <= 0 {
		o.Starts = 3
	}
	if o.Context == nil {
		o.Context = context.Background()
	}
}

// PowerPoint is the power of telling B from A at one record length.
type PowerPoint struct {
	Events     int
	Replicates int     // replicates where both fits succeeded
	Power      float64 // fraction of replicates in which BIC prefers A's scheme
	Lo, Hi     float64 // Clopper-Pearson 95% interval of the power
	MeanLLR    float64 // mean of ln L_A - ln L_B (both fitted)
	ExpLLR     float64 // KL rate times the gaps: the expected log-likelihood ratio
}

// PlanResult is the outcome of Plan.
type PlanResult struct {
	// KLRate is the Kullback-Leibler divergence rate per gap between A's
	// visible process and the closest member of B's scheme, in nats, and
	// KLSE its Monte Carlo standard error; KLGaps the gaps it was measured
	// on.
	KLRate, KLSE float64
	KLGaps       int
	// EventsLLR10 is the number of events for an expected log-likelihood
	// ratio of 10 (10/KLRate + 1); +Inf when KLRate <= 0.
	EventsLLR10 float64
	Power       []PowerPoint
	// FVarPerEvent is n Var(F_hat) as n grows: F's asymptotic variance
	// times the number of events (k_BT^2); EventsForSE the events for the
	// data's F to reach TargetSE (NaN when not asked or F is undefined).
	FVarPerEvent, EventsForSE float64
	ClosestB                  []float64 // B's free parameters at the closest member
	// Departure is, per window length, the fixed-time slope's departure
	// from F under A and the events for it to be seen at 3 standard
	// errors (empty when F is undefined for A).
	Departure []Departure
	Notes     []string
}

// Departure is the departure of the fixed-time fluctuation slope from the
// count-stopped one (F) under A at one window duration.
type Departure struct {
	WindowEvents int     // mean events per window: T = WindowEvents x mean gap
	Duration     float64 // T (time units)
	Slope        float64 // the fixed-time slope estimand (binomial ML) at T
	Delta        float64 // Slope - F (k_BT)
	// Events for |Delta| = 3 standard errors of the data's slope minus the
	// data's F: 9 (WindowEvents SlopeVar + n Var F)/Delta^2, the two
	// estimates taken as independent; +Inf when Delta = 0.
	Events float64
}

// departureWindows are the window lengths (in mean events) of Departure.
var departureWindows = []int{5, 20, 100}

// Plan answers how many visible events tell scheme B from scheme A when A
// is true. A's rates are taken as they are (its start values); B is a
// scheme whose free parameters are fitted.
//
// The Kullback-Leibler rate is measured on one long record simulated from
// A (KLEvents events, seeded): B is fitted to it (the closest member of
// B's scheme, in the sense of the likelihood), and
//
//	KL = [ln L_A - ln L_B(fitted)] / gaps,
//
// with a Monte Carlo standard error from the spread of the same difference
// over 20 blocks of the record (at B's fitted values). The expected
// log-likelihood ratio after n events is KL (n - 1); the events for an
// expected ratio of 10 (design notes, section 7) follow. The power at each
// record length is estimated by simulation: Replicates records of n events
// from A, both A's scheme (its own free parameters fitted; none when A
// has none) and B fitted, and A's scheme chosen when its BIC is lower;
// each replicate is seeded from Seed, the length and its index, so the
// result does not depend on the number of workers.
//
// F's asymptotic variance: the MLE of the transition probabilities of a
// first-order Markov chain of labels has, given the row counts, the
// multinomial variance (Anderson and Goodman, Ann. Math. Stat. 28, 89
// (1957)), so with N_l = n r_l events of label l (r the stationary label
// law) and P = P(l|l),
//
//	n Var(F_hat) -> 1/(r_+ P_++) - 1/r_+ + 1/(r_- P_--) - 1/r_-.
func Plan(a, b *models.Model, plus, minus string, o PlanOptions) (*PlanResult, error) {
	o.defaults()
	if err := sameLabels(a, b); err != nil {
		return nil, err
	}
	netA, err := a.Network(a.Start())
	if err != nil {
		return nil, fmt.Errorf("plan: %s: %w", a.Name, err)
	}
	res := &PlanResult{EventsForSE: math.NaN(), FVarPerEvent: math.NaN()}
	if len(a.Free()) > 0 {
		res.Notes = append(res.Notes, fmt.Sprintf("%s's rates are taken as they are in its spec (the truth of the simulations); its %d free parameters are refitted, from those values, in each power replicate", a.Name, len(a.Free())))
	}
	labels := make([]string, len(netA.Labels))
	for i, l := range netA.Labels {
		labels[i] = l.Name
	}
	fo := FitOptions{Likelihood: likelihood.Options{Instrument: o.Instrument}, Starts: o.Starts, Seed: o.Seed, Workers: o.Workers, Context: o.Context}

	// Kullback-Leibler rate.
	long, err := SimulateLike(netA, labels, []int{o.KLEvents}, o.Instrument, o.Seed, 1<<40)
	if err != nil {
		return nil, fmt.Errorf("plan: %w", err)
	}
	fb, err := Fit(b, long, fo)
	if err != nil {
		return nil, fmt.Errorf("plan: fitting %s to the long record: %w", b.Name, err)
	}
	netB, err := fb.Model.Network(fb.X)
	if err != nil {
		return nil, err
	}
	res.ClosestB = fb.X
	blocks := splitBlocks(long, 20)
	opt := likelihood.Options{Instrument: o.Instrument, Workers: o.Workers}
	la, err := blockLogLiks(netA, blocks, opt)
	if err != nil {
		return nil, fmt.Errorf("plan: %s on its own record: %w", a.Name, err)
	}
	lb, err := blockLogLiks(netB, blocks, opt)
	if err != nil {
		return nil, fmt.Errorf("plan: %s on the record of %s: %w", b.Name, a.Name, err)
	}
	var diffs []float64
	gaps := 0
	for i := range blocks.Records {
		g := blocks.Records[i].Len() - 1
		gaps += g
		diffs = append(diffs, (la[i]-lb[i])/float64(g))
	}
	llA, llB := sum(la), sum(lb)
	res.KLGaps = gaps
	res.KLRate = (llA - llB) / float64(gaps)
	res.KLSE = stat.StdDev(diffs, nil) / math.Sqrt(float64(len(diffs)))
	res.EventsLLR10 = math.Inf(1)
	if res.KLRate > 0 {
		res.EventsLLR10 = math.Ceil(10/res.KLRate) + 1
	}
	if res.KLRate < 2*res.KLSE {
		res.Notes = append(res.Notes, fmt.Sprintf("the KL rate %.3g is within two Monte Carlo standard errors (%.2g) of 0: %s may contain %s, or the difference needs a longer record than %d events to see (--kl-events)", res.KLRate, res.KLSE, b.Name, a.Name, o.KLEvents))
	}

	// F's variance.
	if pl, mi := netA.LabelIndex(plus), netA.LabelIndex(minus); pl >= 0 && mi >= 0 {
		k, err := likelihood.NewKernels(netA)
		if err == nil {
			if pred, err := likelihood.NewPredictor(k, o.Instrument); err == nil {
				r, P := pred.LabelLaw(), pred.Transition()
				if r[pl] > 0 && r[mi] > 0 && P[pl][pl] > 0 && P[mi][mi] > 0 {
					res.FVarPerEvent = 1/(r[pl]*P[pl][pl]) - 1/r[pl] + 1/(r[mi]*P[mi][mi]) - 1/r[mi]
					if o.TargetSE > 0 {
						res.EventsForSE = math.Ceil(res.FVarPerEvent / (o.TargetSE * o.TargetSE))
					}
					res.Departure = departures(pred, pl, mi, res.FVarPerEvent)
					if len(netA.CycleBasis()) < 2 {
						res.Notes = append(res.Notes, fmt.Sprintf("%s has one cycle: its fixed-time slope approaches F for long windows, so the departure says little about hidden driving", a.Name))
					}
				} else {
					res.Notes = append(res.Notes, "F is not defined for A (a pair ++ or -- never occurs): no events reach an F standard error")
				}
			}
		}
	}

	// Power by simulation.
	type task struct{ n, rep int }
	var tasks []task
	for _, n := range o.Events {
		for r := 0; r < o.Replicates; r++ {
			tasks = append(tasks, task{n, r})
		}
	}
	type outcome struct {
		ok      bool
		choseA  bool
		llr     float64
		nEvents int
	}
	outs := make([]outcome, len(tasks))
	prog := newProgress(func(_ string, k, total int) {
		if o.Progress != nil {
			o.Progress(k, total)
		}
	})
	parallel(len(tasks), max(1, o.Workers), func(i int) {
		defer prog.step("power", len(tasks))
		tk := tasks[i]
		if o.Context.Err() != nil {
			return
		}
		d, err := SimulateLike(netA, labels, []int{tk.n}, o.Instrument, o.Seed, uint64(tk.n)<<20|uint64(tk.rep))
		if err != nil {
			return
		}
		f := fo
		f.Workers, f.Seed = 1, o.Seed+uint64(tk.rep)
		var llA, bicA float64
		if len(a.Free()) == 0 {
			ll, err := likelihood.LogLik(netA, d, likelihood.Options{Instrument: o.Instrument, Workers: 1})
			if err != nil {
				return
			}
			llA, bicA = ll, -2*ll
		} else {
			fa1 := f
			fa1.Starts = 1 // from the truth: the spec's values
			fa, err := Fit(a, d, fa1)
			if err != nil {
				return
			}
			llA, bicA = fa.LogLik, fa.BIC()
		}
		fbr, err := Fit(b, d, f)
		var imp *ImpossibleError
		switch {
		case errors.As(err, &imp):
			outs[i] = outcome{ok: true, choseA: true, llr: math.Inf(1), nEvents: tk.n}
			return
		case err != nil:
			return
		}
		outs[i] = outcome{ok: true, choseA: bicA < fbr.BIC(), llr: llA - fbr.LogLik, nEvents: tk.n}
	})
	if o.Context.Err() != nil {
		return nil, errors.New("plan: interrupted")
	}
	for _, n := range o.Events {
		pp := PowerPoint{Events: n, ExpLLR: res.KLRate * float64(n-1)}
		k, m := 0, 0
		var llrs []float64
		for i, t := range tasks {
			if t.n != n || !outs[i].ok {
				continue
			}
			m++
			if outs[i].choseA {
				k++
			}
			llrs = append(llrs, outs[i].llr)
		}
		pp.Replicates = m
		if m > 0 {
			pp.Power = float64(k) / float64(m)
			pp.Lo, pp.Hi = ClopperPearson(k, m, 0.95)
			pp.MeanLLR = mean(llrs)
		} else {
			pp.Power, pp.Lo, pp.Hi, pp.MeanLLR = math.NaN(), math.NaN(), math.NaN(), math.NaN()
		}
		res.Power = append(res.Power, pp)
	}
	return res, nil
}

// sameLabels refuses two schemes whose visible labels differ.
func sameLabels(a, b *models.Model) error {
	la, lb := labelNames(a), labelNames(b)
	if !slices.Equal(la, lb) {
		return fmt.Errorf("plan: %s has labels %q and %s has %q: the two schemes must describe the same visible transitions", a.Name, la, b.Name, lb)
	}
	return nil
}

func labelNames(m *models.Model) []string {
	var out []string
	for _, l := range m.Labels {
		out = append(out, l.Name)
	}
	slices.Sort(out)
	return out
}

// splitBlocks cuts a one-record data set into k records of consecutive
// events (each conditioned on its first event).
func splitBlocks(d *likelihood.Data, k int) *likelihood.Data {
	rec := d.Records[0]
	n := rec.Len()
	out := &likelihood.Data{Labels: d.Labels}
	for b := 0; b < k; b++ {
		lo, hi := b*n/k, (b+1)*n/k
		if hi-lo < 2 {
			continue
		}
		out.Records = append(out.Records, likelihood.Record{ID: fmt.Sprint(b + 1), Time: rec.Time[lo:hi], Label: rec.Label[lo:hi], End: math.NaN()})
	}
	return out
}

func blockLogLiks(net *models.Network, d *likelihood.Data, opt likelihood.Options) ([]float64, error) {
	ev, err := likelihood.NewNetworkEvaluator(net, opt)
	if err != nil {
		return nil, err
	}
	return ev.RecordLogLiks(d)
}

func sum(v []float64) float64 {
	s := 0.0
	for _, x := range v {
		s += x
	}
	return s
}

func mean(v []float64) float64 {
	if len(v) == 0 {
		return math.NaN()
	}
	s := 0.0
	for _, x := range v {
		if math.IsInf(x, 0) {
			return x
		}
		s += x
	}
	return s / float64(len(v))
}

// departures computes Departure at departureWindows under the predictor p
// (visible edge pl/mi, F's per-event variance fvar): the fixed-time law
// (Predictor.FixedTime) and its binomial maximum-likelihood slope with its
// per-window variance (CountDist.SlopeEstimand).
func departures(p *likelihood.Predictor, pl, mi int, fvar float64) []Departure {
	q := make([]int, p.NumLabels())
	q[pl], q[mi] = 1, -1
	f := p.EffectiveAffinity(pl, mi)
	var out []Departure
	for _, w := range departureWindows {
		t := float64(w) * p.MeanGap()
		law, err := p.FixedTime(t, q)
		if err != nil {
			continue
		}
		est := law.SlopeEstimand()
		if !est.Defined || math.IsNaN(est.SlopeVar) {
			continue
		}
		d := Departure{WindowEvents: w, Duration: t, Slope: est.Slope, Delta: est.Slope - f, Events: math.Inf(1)}
		if d.Delta != 0 {
			d.Events = math.Ceil(9 * (float64(w)*est.SlopeVar + fvar) / (d.Delta * d.Delta))
		}
		out = append(out, d)
	}
	return out
}
