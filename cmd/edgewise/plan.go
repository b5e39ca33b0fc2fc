package main

import (
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"

	"edgewise/cmd/edgewise/internal/output"
	"edgewise/infer"
	"edgewise/likelihood"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
)

const planHelp = `Usage: edgewise plan A.toml B.toml [--events LIST] [--power 0.8] [--se X] [options]

How many visible events does an experiment need to tell scheme B from
scheme A, when A is the truth? A is taken at its spec's values (a spec
written by 'fit --model-out' holds fitted values; free parameters of A
are taken as they are, and the output says so); B is a class of schemes,
fitted as 'fit' does.

The per-event Kullback-Leibler rate of A's visible process against the
closest member of B's class is measured on a long simulation of A
(--kl-events, default 200000 events in independent records of 5000): B
is fitted to one half, and the log-likelihood ratio of A at its values
against that member is averaged over both halves (the fit's optimism
on its own half and its loss on the other cancel to first order), with
a Monte Carlo standard error from the spread over the records. From it:
the expected log-likelihood ratio (n - 1) KL of a record of n events, the
events for an expected ratio of 10 nats, and the events that reach the
target power (--power) under the decision rule.

The power at each event count (--events; default: the predicted count
and half and twice it) is measured by simulation: --replicates records of
n events from A, both A's class and B's class fitted to each, and B
rejected by the likelihood-ratio test at --alpha when B is nested in A's
class, else when A's class has the lower BIC (--decision). Every record
and fit has its own seed derived from --seed, so the result does not
depend on --workers. The predicted power beside it is the noncentral
chi-square law of 2 ln LR (noncentrality 2 (n - 1) KL) for nested
classes and a normal law otherwise.

Also: the events for the records' F = ln[P(+|+)/P(-|-)] to reach the
standard error --se (delta-method variance 1/N++ - 1/N+. + 1/N-- - 1/N-.
with A's exact P(l'|l), checked against the spread of F over the
replicates), and, when A has more than one cycle, the events for the
departure of the fixed-time fluctuation slope from F to be seen at 3
standard errors (for windows of --windows events on average).

Example:
  edgewise plan testdata/ring4.toml testdata/plan/ring4-eq.toml --events 100,300 --replicates 100

Options:
`

func cmdPlan(args []string, stdout, stderr io.Writer) int {
	c := newCommand("plan", planHelp, args, stdout, stderr)
	events := c.fs.String("events", "", "event counts of the power study, comma separated (e.g. 1000,3000,1e4; default: the predicted count for --power, half and twice it; none: no power study)")
	power := c.fs.Float64("power", 0.8, "target power, in (0, 1)")
	se := c.fs.Float64("se", 0, "target standard error of F (k_BT): the events needed to reach it")
	alpha := c.fs.Float64("alpha", 0.05, "size of the likelihood-ratio test")
	decision := c.fs.String("decision", "auto", "decision rule: lr (B nested in A's class), bic, or auto (lr when nested, else bic)")
	reps := c.fs.IntP("replicates", "r", 200, "simulated records per event count")
	klEvents := c.fs.Int("kl-events", 200000, "events simulated from A for the KL rate")
	starts := c.fs.IntP("starts", "k", 8, "starts of the fits on the long simulation")
	repStarts := c.fs.Int("replicate-starts", 3, "starts of each fit in the power study (A's own values or B's closest member first)")
	windows := c.fs.String("windows", "5,10,20,50", "mean events per fixed-time window for the departure planner (multicyclic A)")
	edge := c.fs.String("edge", "", "the visible edge whose F is planned, as FORWARD,BACKWARD labels (default: + and -, else the first reversed pair)")
	dead := c.fs.Float64("dead-time", 0, "instrument dead time after each recorded event (time units)")
	frame := c.fs.Float64("frame", 0, "frame length of the timestamps (time units; 0 = exact times)")
	seed := c.fs.Uint64P("seed", "s", 1, "seed of every simulation and fit")
	workers := c.fs.IntP("workers", "j", 0, "goroutines (0 = all cores); results do not depend on it")
	plotPath := c.fs.String("plot", "", "write the power curve to this file (.png, .svg, .pdf)")
	figWidth := c.fs.Float64("figure-width", 89, "figure width in mm: 89 for one journal column, 183 for the page width")
	c.outputFlags(true)
	c.timeUnitFlag()
	if code := c.parse(); code >= 0 {
		return code
	}
	if c.fs.NArg() != 2 {
		return c.usage("want A.toml B.toml, got %d arguments", c.fs.NArg())
	}
	if _, err := c.outputFormat(); err != nil {
		return c.usage("%v", err)
	}
	if err := checkTimeUnit(*c.timeUnit); err != nil {
		return c.usage("%v", err)
	}
	o := infer.PlanOptions{Power: *power, SE: *se, Alpha: *alpha, Replicates: *reps, KLEvents: *klEvents, FitStarts: *starts, Starts: *repStarts, Seed: *seed, Workers: *workers,
		Instrument: likelihood.Instrument{DeadTime: *dead, Frame: *frame}}
	switch {
	case !(*power > 0 && *power < 1):
		return c.usage("--power %v: want a probability strictly between 0 and 1", *power)
	case !(*alpha > 0 && *alpha < 1):
		return c.usage("--alpha %v: want a probability strictly between 0 and 1", *alpha)
	case math.IsNaN(*se) || math.IsInf(*se, 0) || *se < 0:
		return c.usage("--se %v: want a standard error > 0 (k_BT)", *se)
	case *reps < 1 || *reps > 100000:
		return c.usage("--replicates %d: want 1 to 100000", *reps)
	case *klEvents < 20000 || *klEvents > 100000000:
		return c.usage("--kl-events %d: want 20000 to 1e8", *klEvents)
	case *starts < 1 || *starts > 1000 || *repStarts < 1 || *repStarts > 1000:
		return c.usage("--starts and --replicate-starts: want 1 to 1000")
	case *workers < 0:
		return c.usage("--workers %d: want 0 (all cores) or more", *workers)
	}
	switch *decision {
	case "auto":
	case "lr":
		o.Decision = infer.DecideLR
	case "bic":
		o.Decision = infer.DecideBIC
	default:
		return c.usage("--decision %q: want auto, lr or bic", *decision)
	}
	if err := o.Instrument.Validate(); err != nil {
		return c.usage("%v", err)
	}
	switch *events {
	case "none":
	case "":
		o.AutoEvents = true
	default:
		ev, err := parseEventCounts(*events)
		if err != nil {
			return c.usage("--events: %v", err)
		}
		o.Events = ev
	}
	ws, err := parsePositiveFloats(*windows)
	if err != nil {
		return c.usage("--windows: %v", err)
	}
	for _, m := range ws {
		if m < 1 || m > 1000 {
			return c.usage("--windows: %v events per window: want 1 to 1000", m)
		}
	}
	o.Windows = ws
	if *edge != "" {
		a, b, ok := strings.Cut(*edge, ",")
		if !ok || strings.TrimSpace(a) == "" || strings.TrimSpace(b) == "" {
			return c.usage("--edge %q: want FORWARD,BACKWARD labels, e.g. +,-", *edge)
		}
		o.Plus, o.Minus = strings.TrimSpace(a), strings.TrimSpace(b)
	}
	if *plotPath != "" {
		if _, err := figFormat(*plotPath); err != nil {
			return c.usage("--plot: %v", err)
		}
		if !(*figWidth >= 40 && *figWidth <= 300) {
			return c.usage("--figure-width %v: want 40 to 300 mm", *figWidth)
		}
	}
	files := output.NewFiles(stdout, *c.force)
	defer files.Close()
	for _, cl := range [][2]string{{"-o", *c.out}, {"--plot", *plotPath}} {
		if cl[1] == "" {
			continue
		}
		if err := files.Claim(cl[0], cl[1]); err != nil {
			return c.fail(1, err)
		}
	}
	srcA, mA, _, err := loadModel(c.fs.Arg(0))
	if err != nil {
		return c.fail(1, fmt.Errorf("A: %w", err))
	}
	srcB, mB, _, err := loadModel(c.fs.Arg(1))
	if err != nil {
		return c.fail(1, fmt.Errorf("B: %w", err))
	}
	ctx, stop := interruptible()
	defer stop()
	o.Context = ctx
	nev := len(o.Events)
	if nev == 0 {
		nev = 3
	}
	pb := c.progress(int64(*klEvents/5000+2+nev**reps), "planning", false)
	o.Progress = func(stage string, done, total int) { pb.add(1) }
	res, err := infer.Plan(mA, mB, o)
	pb.finish()
	stop()
	if err != nil {
		return c.fail(1, err)
	}
	unit, unitNote := c.resolveTimeUnit(mA.TimeUnit, "")
	if unit == "" && mB.TimeUnit != "" {
		unit = output.TimeUnit(mB.TimeUnit)
	}
	if mA.TimeUnit != "" && mB.TimeUnit != "" && mA.TimeUnit != mB.TimeUnit {
		unitNote = fmt.Sprintf("A's spec says time unit %s and B's %s: B's rates are read in A's unit", mA.TimeUnit, mB.TimeUnit)
	}
	inputs := []output.Input{{Name: c.fs.Arg(0), SHA256: checksum(srcA)}, {Name: c.fs.Arg(1), SHA256: checksum(srcB)}}
	r := c.newReport(inputs, output.SeedOf(*seed), unit)
	r.Notes = nonEmpty(unitNote)
	planTables(r, res, unit)
	if *plotPath != "" {
		p, err := powerPanel(res)
		if err != nil {
			return c.fail(1, err)
		}
		if err := writeFigure(files, *plotPath, []*plot.Plot{p}, *figWidth); err != nil {
			return c.fail(1, err)
		}
	}
	if err := c.emitReport(files, r); err != nil {
		return c.fail(1, err)
	}
	return 0
}

// parseEventCounts reads a comma-separated list of event counts; 1e4 and
// 10000 are the same.
func parseEventCounts(s string) ([]int, error) {
	var out []int
	for _, f := range strings.Split(s, ",") {
		f = strings.TrimSpace(f)
		v, err := strconv.ParseFloat(f, 64)
		if err != nil || v != math.Trunc(v) {
			return nil, fmt.Errorf("%q is not a whole number of events", f)
		}
		if v < 3 || v > 1e8 {
			return nil, fmt.Errorf("%s events: want 3 to 1e8", f)
		}
		out = append(out, int(v))
	}
	return out, nil
}

// parsePositiveFloats reads a comma-separated list of positive numbers.
func parsePositiveFloats(s string) ([]float64, error) {
	var out []float64
	for _, f := range strings.Split(s, ",") {
		f = strings.TrimSpace(f)
		v, err := strconv.ParseFloat(f, 64)
		if err != nil || !(v > 0) || math.IsInf(v, 0) {
			return nil, fmt.Errorf("%q is not a positive number", f)
		}
		out = append(out, v)
	}
	return out, nil
}

// eventsCell writes an event count: a number, or undefined with the reason
// when unbounded.
func eventsCell(n float64, why string) output.Cell {
	if math.IsInf(n, 1) || math.IsNaN(n) {
		return output.Undefined(why)
	}
	if n > 1e15 {
		return output.Undefined("more than 1e15 events")
	}
	return output.Count(int(math.Ceil(n)))
}

// planTables adds the plan's tables to r.
func planTables(r *output.Report, res *infer.PlanResult, u output.TimeUnit) {
	o := res.Options
	st := output.NewTable("summary", fmt.Sprintf("Telling B (%s) from A (%s) when A is true", res.B, res.A), "quantity",
		output.Col("value", "value", ""), output.Col("se", "SE", ""))
	klNote := fmt.Sprintf("%d simulated events of A in %d records; the fitted half gives %.4g, the held-out half %.4g", res.KLRecords*o.KLBlock, res.KLRecords, res.KLFitted, res.KLHeldOut)
	if res.Impossible != nil {
		klNote = fmt.Sprintf("B cannot produce %q followed by %q, which A does", res.Impossible.From, res.Impossible.To)
	}
	klSE := output.Num(res.KLSE)
	if res.Impossible != nil {
		klSE = output.Empty()
	}
	st.Add("KL", "KL rate of A against B's closest member (nats per event)", output.Num(res.KL).WithNote(klNote), klSE)
	if res.Impossible == nil {
		st.Add("sigma2", "variance of ln LR per event", output.Num(res.Sigma2).WithNote("from the spread over the records; the normal prediction of power uses it"), output.Empty())
	}
	n10 := eventsCell(res.EventsFor10, "unbounded")
	n10note := "10/KL + 1: an expected log-likelihood ratio of 10 nats"
	if !res.Resolved {
		n10note = "KL is within 2 SE of 0: at least 10/(KL + 2 SE) + 1 events"
	}
	if res.Impossible != nil {
		n10note = "the first impossible pair rules B out"
	}
	st.Add("events_lnLR_10", "events for an expected ln LR of 10", n10.WithNote(n10note), output.Empty())
	decision := res.Decision.String()
	if res.Decision == infer.DecideLR {
		decision = fmt.Sprintf("likelihood ratio at %g, df %d, 2 ln LR > %.4g", o.Alpha, res.DF, res.Critical)
	} else {
		decision = fmt.Sprintf("BIC, k_A - k_B = %d", res.DF)
	}
	st.Add("events_power", fmt.Sprintf("events for power %g (predicted)", o.Power), eventsCell(res.EventsForPower, "not reached: B is not told apart from A").WithNote(decision), output.Empty())
	if !math.IsNaN(res.F) {
		st.Add("F", fmt.Sprintf("F of A's edge %s/%s (k_BT)", res.Plus, res.Minus), output.Num(res.F).WithNote("exact, A's P(+|+) and P(-|-)"), output.Empty())
		st.Add("F_variance", "variance of F times events, V_F", output.Num(res.VF).WithNote("SE of F at n events: sqrt(V_F/(n - 1))"), output.Empty())
		if o.SE > 0 {
			st.Add("events_se", fmt.Sprintf("events for SE(F) = %g k_BT", o.SE), eventsCell(res.EventsForSE, "F's variance is infinite (a pair ++ or -- never occurs)").WithNote("V_F/SE^2 + 1"), output.Empty())
		}
	}
	if len(res.FixedTime) > 0 {
		best := res.FixedTime[0]
		for _, row := range res.FixedTime[1:] {
			if row.Events < best.Events {
				best = row
			}
		}
		st.Add("events_fixed_time", "events to see the fixed-time departure at 3 SE", eventsCell(best.Events, "no departure").WithNote(fmt.Sprintf("windows of %g events on average, the best of --windows; fixed-time slope - F = %.3g k_BT", best.MeanEvents, best.Departure)), output.Empty())
	}
	r.Add(st)

	if len(res.Rows) > 0 {
		pt := output.NewTable("power", fmt.Sprintf("Power by simulation (%d replicates per event count)", o.Replicates), "events",
			output.MachineCol("events", "events", ""), output.Col("expected_lnLR", "(n-1) KL", "nats"),
			output.Col("mean_lnLR", "mean ln LR", "nats"), output.Col("mean_lnLR_se", "± SE", "nats"),
			output.Col("power", "power", ""), output.Col("power_interval", "95% interval", ""),
			output.Col("predicted", "predicted", ""), output.Col("F_se", "SE(F)", "k_BT"),
			output.Col("F_sd", "SD(F)", "k_BT"), output.MachineCol("failed", "failed fits", ""))
		for _, row := range res.Rows {
			mean, mse := output.Fixed(row.MeanLogLR, 2), output.Fixed(row.SELogLR, 2)
			if row.Impossible > 0 {
				mean, mse = output.Undefined(fmt.Sprintf("infinite: %d records hold a pair B cannot produce", row.Impossible)), output.Empty()
			}
			fsd := output.Fixed(row.FSD, 3)
			if row.FFinite < 2 {
				fsd = output.Undefined("F infinite in most records")
			}
			pt.Add(fmt.Sprintf("n_%d", row.Events), strconv.Itoa(row.Events), output.Count(row.Events), output.Fixed(row.ExpectedLogLR, 2),
				mean, mse, output.Fixed(row.Power, 3), output.Interval(row.PowerLo, row.PowerHi, 0.95, "Clopper-Pearson"),
				output.Fixed(row.Predicted, 3), output.Fixed(row.FSE, 3), fsd, output.Count(row.Failed))
		}
		for _, row := range res.Rows {
			if row.Failed > 0 {
				pt.Note("n = %d: %d of %d replicates left out, a fit failed", row.Events, row.Failed, row.Failed+row.Replicates)
			}
		}
		pt.Note("SE(F): predicted, sqrt(V_F/(n - 1)); SD(F): the spread of the records' F over the replicates")
		pt.Note("ln LR = ln L(A's class, fitted) - ln L(B's class, fitted); its mean exceeds (n - 1) KL by about (k_A - k_B)/2 for nested classes; power: the share of records that reject B (%s)", decision)
		r.Add(pt)
	}

	if res.BFit != nil {
		bt := output.NewTable("closest", fmt.Sprintf("B's closest member to A (%s fitted to the first half of the simulation)", res.B), "parameter",
			output.Col("value", "value", ""), output.Col("se", "SE", ""))
		for _, p := range res.BFit.Params {
			bt.Add(p.Name, p.Name, output.Num(p.Value), output.Num(p.SE))
		}
		r.Add(bt)
	}

	if len(res.FixedTime) > 0 {
		ft := output.NewTable("fixed_time", "Fixed-time departure from F (A has more than one cycle)", "window",
			output.MachineCol("mean_events", "events per window", ""), output.Col("duration", "duration", u.Time()),
			output.Col("slope", "fixed-time slope", "k_BT"), output.Col("departure", "slope - F", "k_BT"),
			output.Col("events", "events for 3 SE", ""))
		for _, row := range res.FixedTime {
			ft.Add(output.Key(fmt.Sprintf("m_%g", row.MeanEvents)), fmt.Sprintf("%g events on average", row.MeanEvents), output.Num(row.MeanEvents),
				output.Num(row.Duration), output.Num(row.Slope), output.Num(row.Departure), eventsCell(row.Events, "no departure"))
		}
		ft.Note("exact fixed-time law of A; the data's slope over n/m windows and F taken as independent (conservative): n = 9 (m SlopeVar + V_F)/departure^2")
		r.Add(ft)
	} else if res.Multicyclic {
		r.Note("fixed-time departure not computed")
	}
	for _, n := range res.Notes {
		r.Note("%s", n)
	}
	if res.Impossible == nil {
		r.Note("KL rate: B fitted to half of a long simulation of A, ln L_A - ln L_B averaged over both halves (their first-order biases cancel); SE from the spread over the records")
	}
}

// powerPanel draws the simulated power (points with 95% bars) and the
// predicted curve against the number of events (log scale), with the
// target power as a dashed line.
func powerPanel(res *infer.PlanResult) (*plot.Plot, error) {
	o := res.Options
	p := newFigPlot(fmt.Sprintf("telling %s from %s", res.B, res.A), "visible events n", "power")
	p.X.Scale = plot.LogScale{}
	p.X.Tick.Marker = plainLogTicks{}
	lo, hi := math.Inf(1), 0.0
	for _, row := range res.Rows {
		lo, hi = math.Min(lo, float64(row.Events)), math.Max(hi, float64(row.Events))
	}
	if n := res.EventsForPower; !math.IsInf(n, 0) && !math.IsNaN(n) {
		lo, hi = math.Min(lo, n), math.Max(hi, n)
	}
	if !(hi > 0) {
		return nil, fmt.Errorf("--plot: nothing to draw: no event count (B is not told apart from A and no --events were given)")
	}
	lo, hi = math.Max(2, lo/3), hi*3
	var curve plotter.XYs
	for i := 0; i <= 120; i++ {
		n := lo * math.Pow(hi/lo, float64(i)/120)
		if v := res.PredictedPower(n); !math.IsNaN(v) {
			curve = append(curve, plotter.XY{X: n, Y: v})
		}
	}
	if len(curve) > 1 {
		l, err := plotter.NewLine(curve)
		if err != nil {
			return nil, err
		}
		l.Color, l.Width = figPalette[0], vg.Points(0.9)
		p.Add(l)
		p.Legend.Add("predicted", l)
	}
	target := plotter.NewFunction(func(float64) float64 { return o.Power })
	target.XMin, target.XMax = lo, hi
	target.Color, target.Width, target.Dashes = figPalette[3], vg.Points(0.7), []vg.Length{vg.Points(3), vg.Points(2)}
	p.Add(target)
	p.Legend.Add(fmt.Sprintf("target %g", o.Power), target)
	if len(res.Rows) > 0 {
		var e struct {
			plotter.XYs
			plotter.YErrors
		}
		for _, row := range res.Rows {
			e.XYs = append(e.XYs, plotter.XY{X: float64(row.Events), Y: row.Power})
			e.YErrors = append(e.YErrors, struct{ Low, High float64 }{row.Power - row.PowerLo, row.PowerHi - row.Power})
		}
		bars, err := plotter.NewYErrorBars(e)
		if err != nil {
			return nil, err
		}
		bars.Color, bars.Width, bars.CapWidth = figPalette[1], vg.Points(0.7), vg.Points(3)
		sc, err := plotter.NewScatter(e.XYs)
		if err != nil {
			return nil, err
		}
		sc.Color, sc.Shape, sc.Radius = figPalette[1], draw.CircleGlyph{}, vg.Points(2.2)
		p.Add(bars, sc)
		p.Legend.Add(fmt.Sprintf("simulated (%d records each)", o.Replicates), sc)
	}
	p.X.Min, p.X.Max = lo, hi
	p.Y.Min, p.Y.Max = 0, 1.02
	p.Y.Tick.Marker = plot.ConstantTicks([]plot.Tick{{Value: 0, Label: "0"}, {Value: 0.2, Label: "0.2"}, {Value: 0.4, Label: "0.4"}, {Value: 0.6, Label: "0.6"}, {Value: 0.8, Label: "0.8"}, {Value: 1, Label: "1"}})
	if hi/lo < 300 {
		p.X.Tick.Marker = oneTwoFiveTicks{}
	}
	// Power rises with n: the bottom-right corner is free.
	p.Legend.Top, p.Legend.Left = false, false
	p.Legend.YOffs = vg.Points(3)
	return p, nil
}

// oneTwoFiveTicks labels 1, 2 and 5 times each power of ten on a log axis
// (for ranges of a few decades, where decades alone give one label).
type oneTwoFiveTicks struct{}

// Ticks implements plot.Ticker.
func (oneTwoFiveTicks) Ticks(lo, hi float64) []plot.Tick {
	var ticks []plot.Tick
	for e := math.Floor(math.Log10(lo)); e <= math.Ceil(math.Log10(hi)); e++ {
		for k := 1.0; k < 10; k++ {
			v := k * math.Pow(10, e)
			if v < lo*(1-1e-9) || v > hi*(1+1e-9) {
				continue
			}
			t := plot.Tick{Value: v}
			if k == 1 || k == 2 || k == 5 {
				t.Label = strconv.FormatFloat(v, 'g', -1, 64)
			}
			ticks = append(ticks, t)
		}
	}
	return ticks
}
