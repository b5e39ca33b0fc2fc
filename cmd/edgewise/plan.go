package main

import (
	"fmt"
	"io"
	"math"

	"edgewise/cmd/edgewise/internal/output"
	"edgewise/infer"
	"edgewise/likelihood"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
)

const planHelp = `Usage: edgewise plan A.toml B.toml [options]

How many visible events does an experiment need to tell scheme B from
scheme A, when A is true? A's rates are taken as they are (its spec's
values: write a fitted model with 'fit --model-out'); B is a scheme whose
free parameters are fitted.

The Kullback-Leibler rate per event between A's visible process and the
closest member of B's scheme is measured on one long record simulated from
A (--kl-events, seeded): B is fitted to it, and the rate is the
log-likelihood ratio per gap, with a Monte Carlo standard error over 20
blocks. The expected log-likelihood ratio after n events is that rate
times n; a ratio of 10 is strong evidence. The power at each record length
(--events) is estimated by simulation: records of n events from A, both
schemes fitted, A's chosen when its BIC is lower (--replicates each,
seeded; identical for any number of workers). --power P reads off the
events at which the power reaches P. --se X gives the events for the
data's effective affinity F to reach the standard error X (the asymptotic
variance of F from A's exact label statistics).

These are expectations for data like A's simulated records; real records
add drift, heterogeneity and instrument effects, so plan with a margin.

Example:
  edgewise plan testdata/compare/truth-twocycle.toml testdata/compare/ring4.toml --events 500,2000,8000 --power 0.8

Options:
`

func cmdPlan(args []string, stdout, stderr io.Writer) int {
	c := newCommand("plan", planHelp, args, stdout, stderr)
	evs := c.fs.StringP("events", "n", "1000,3000,10000,30000", "record lengths (events) at which to estimate the power, comma separated")
	reps := c.fs.IntP("replicates", "r", 40, "simulated records per length")
	klEvents := c.fs.Int("kl-events", 200000, "events of the long record that measures the KL rate")
	power := c.fs.Float64("power", 0.8, "target power: the events at which it is reached")
	se := c.fs.Float64("se", 0, "target standard error of F (k_BT): the events needed (0: not asked)")
	seed := c.fs.Uint64P("seed", "s", 1, "seed of every simulation")
	workers := c.fs.IntP("workers", "j", 0, "goroutines (0 = all cores); results do not depend on it")
	starts := c.fs.IntP("starts", "k", 3, "starts of each fit")
	dead := c.fs.Float64("dead-time", 0, "instrument dead time after each recorded event (time units)")
	frame := c.fs.Float64("frame", 0, "frame length of the timestamps (time units; 0 = exact times)")
	edge := c.fs.String("edge", "+,-", "forward and backward labels of the visible edge")
	plotPath := c.fs.String("plot", "", "write the power curve to this file (.png, .svg, .pdf)")
	figWidth := c.fs.Float64("figure-width", 89, "figure width in mm")
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
	events, err := parseInts(*evs)
	if err != nil {
		return c.usage("--events: %v", err)
	}
	for _, n := range events {
		if n < 10 || n > 100_000_000 {
			return c.usage("--events: %d: want 10 to 10^8 events", n)
		}
	}
	switch {
	case !(*power > 0 && *power < 1):
		return c.usage("--power %v: want a probability strictly between 0 and 1", *power)
	case *se < 0 || math.IsNaN(*se) || math.IsInf(*se, 0):
		return c.usage("--se %v: want a positive standard error (k_BT), or 0", *se)
	case *reps < 1 || *reps > 100000:
		return c.usage("--replicates %d: want 1 to 100000", *reps)
	case *klEvents < 1000 || *klEvents > 100_000_000:
		return c.usage("--kl-events %d: want 1000 to 10^8", *klEvents)
	case *starts < 1 || *starts > 1000:
		return c.usage("--starts %d: want 1 to 1000", *starts)
	}
	plus, minus, err := splitEdge(*edge)
	if err != nil {
		return c.usage("--edge: %v", err)
	}
	in := likelihood.Instrument{DeadTime: *dead, Frame: *frame}
	if err := in.Validate(); err != nil {
		return c.usage("%v", err)
	}
	if *plotPath != "" {
		if _, err := figFormat(*plotPath); err != nil {
			return c.usage("--plot: %v", err)
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
	srcA, a, _, err := loadModel(c.fs.Arg(0))
	if err != nil {
		return c.fail(1, err)
	}
	srcB, b, _, err := loadModel(c.fs.Arg(1))
	if err != nil {
		return c.fail(1, err)
	}
	if len(b.Free()) == 0 {
		return c.usage("%s has no free parameter: B must be a scheme to fit (A is the one taken as it is)", c.fs.Arg(1))
	}
	ctx, stop := interruptible()
	defer stop()
	pb := c.progress(int64(len(events)**reps), "simulating and fitting", false)
	res, err := infer.Plan(a, b, plus, minus, infer.PlanOptions{Instrument: in, KLEvents: *klEvents, Events: events, Replicates: *reps, Seed: *seed, Workers: *workers, Starts: *starts, TargetSE: *se, Context: ctx, Progress: func(int, int) { pb.add(1) }})
	pb.finish()
	stop()
	if err != nil {
		return c.fail(1, err)
	}
	unit, unitNote := c.resolveTimeUnit(a.TimeUnit, "")
	r := c.newReport([]output.Input{{Name: c.fs.Arg(0), SHA256: checksum(srcA)}, {Name: c.fs.Arg(1), SHA256: checksum(srcB)}}, output.SeedOf(*seed), unit)
	r.Notes = nonEmpty(unitNote)
	planTables(r, res, a.Name, b.Name, *power, *se)
	if *plotPath != "" {
		if err := powerFigure(files, *plotPath, res, a.Name, b.Name, *power, *figWidth); err != nil {
			return c.fail(1, err)
		}
	}
	if err := c.emitReport(files, r); err != nil {
		return c.fail(1, err)
	}
	return 0
}

// eventsForPower interpolates, in log n, the events at which the power
// first reaches target; ok is false when no tested length reaches it.
func eventsForPower(pts []infer.PowerPoint, target float64) (float64, bool) {
	for i, p := range pts {
		if p.Replicates == 0 || math.IsNaN(p.Power) || p.Power < target {
			continue
		}
		if i == 0 || pts[i-1].Power >= target || math.IsNaN(pts[i-1].Power) {
			return float64(p.Events), true
		}
		q := pts[i-1]
		f := (target - q.Power) / (p.Power - q.Power)
		return math.Ceil(math.Exp(math.Log(float64(q.Events)) + f*(math.Log(float64(p.Events))-math.Log(float64(q.Events))))), true
	}
	return 0, false
}

func planTables(r *output.Report, res *infer.PlanResult, a, b string, target, se float64) {
	kt := output.NewTable("kl", fmt.Sprintf("Distance from %s (true) to the closest member of %s", a, b), "quantity", output.Col("value", "value", ""), output.Col("note", "note", ""))
	kt.Add("kl_rate", "Kullback-Leibler rate per event (nats)", output.Num(res.KLRate), output.Text(fmt.Sprintf("Monte Carlo SE %.2g, on %d gaps", res.KLSE, res.KLGaps)))
	if math.IsInf(res.EventsLLR10, 1) {
		kt.Add("events_llr10", "events for an expected log-likelihood ratio of 10", output.Undefined("the KL rate is not positive"), output.Empty())
	} else {
		kt.Add("events_llr10", "events for an expected log-likelihood ratio of 10", output.Num(res.EventsLLR10), output.Text("10 / KL rate"))
	}
	if n, ok := eventsForPower(res.Power, target); ok {
		kt.Add("events_power", fmt.Sprintf("events for power %g (BIC picks %s)", target, a), output.Num(n), output.Text("interpolated in log n between the simulated lengths"))
	} else if len(res.Power) > 0 {
		kt.Add("events_power", fmt.Sprintf("events for power %g", target), output.Undefined("not reached at the simulated lengths: add longer ones (--events)"), output.Empty())
	}
	if !math.IsNaN(res.FVarPerEvent) {
		kt.Add("f_var", "n Var(F) as n grows (k_BT^2)", output.Num(res.FVarPerEvent), output.Text("F's SE after n events is sqrt(this / n)"))
	}
	if se > 0 {
		c := output.Num(res.EventsForSE)
		if math.IsNaN(res.EventsForSE) {
			c = output.Undefined("F is not defined for A")
		}
		kt.Add("events_se", fmt.Sprintf("events for SE(F) = %g k_BT", se), c, output.Empty())
	}
	r.Add(kt)
	if len(res.Power) > 0 {
		pt := output.NewTable("power", "Power by simulation", "events",
			output.Col("expected_llr", "expected ln LR", "nats"), output.Col("mean_llr", "mean fitted ln LR", "nats"),
			output.Col("power", "power", ""), output.Col("interval", "95% interval", ""), output.Col("replicates", "replicates", ""))
		for _, p := range res.Power {
			pw, iv := output.Num(p.Power), output.Interval(p.Lo, p.Hi, 0.95, "Clopper-Pearson")
			if p.Replicates == 0 {
				pw, iv = output.Undefined("no replicate could be fitted"), output.Undefined("no replicate could be fitted")
			}
			pt.Add(fmt.Sprintf("n_%d", p.Events), fmt.Sprint(p.Events), output.Num(p.ExpLLR), output.Num(p.MeanLLR), pw, iv, output.Count(p.Replicates))
		}
		pt.Note("power: the share of records simulated from %s in which %s's BIC is lower than %s's; the mean fitted ln LR differs from the expected one by about half the difference of the two schemes' free parameters (each fit also fits noise)", a, a, b)
		r.Add(pt)
	}
	if len(res.Departure) > 0 {
		dt := output.NewTable("departure", "Fixed-time windows: departure of the slope from F under A", "window",
			output.Col("duration", "duration T", ""), output.Col("slope", "fixed-time slope", "k_BT"),
			output.Col("delta", "slope - F", "k_BT"), output.Col("events", "events for 3 SE", ""))
		for _, d := range res.Departure {
			ev := output.Num(d.Events)
			if math.IsInf(d.Events, 1) {
				ev = output.Undefined("no departure")
			}
			dt.Add(fmt.Sprintf("w_%d", d.WindowEvents), fmt.Sprintf("%d mean gaps", d.WindowEvents), output.Num(d.Duration), output.Num(d.Slope), output.Num(d.Delta), ev)
		}
		dt.Note("the slope of ln[P_T(c)/P_T(-c)] against c for windows of fixed duration T (binomial maximum-likelihood estimand, A's exact law) departs from F when driven cycles avoid the visible edge; events for the data's slope minus the data's F to reach 3 standard errors")
		r.Add(dt)
	}
	for _, n := range res.Notes {
		r.Note("%s", n)
	}
	r.Note("expectations for records like the simulated ones: real records add drift, heterogeneity and instrument effects; plan with a margin")
}

// powerFigure draws the power against the events, with the intervals and
// the target.
func powerFigure(files *output.Files, path string, res *infer.PlanResult, a, b string, target, width float64) error {
	p := newFigPlot(fmt.Sprintf("power to tell %s from %s (%s true)", b, a, a), "events", "power")
	p.X.Scale = plot.LogScale{}
	p.X.Tick.Marker = plainLogTicks{}
	p.Y.Min, p.Y.Max = 0, 1
	var xy plotter.XYs
	var yerr plotter.YErrors
	for _, pt := range res.Power {
		if pt.Replicates == 0 {
			continue
		}
		xy = append(xy, plotter.XY{X: float64(pt.Events), Y: pt.Power})
		yerr = append(yerr, struct{ Low, High float64 }{pt.Power - pt.Lo, pt.Hi - pt.Power})
	}
	if len(xy) == 0 {
		return fmt.Errorf("%s: no power point to draw", path)
	}
	line, pts, err := plotter.NewLinePoints(xy)
	if err != nil {
		return err
	}
	line.Color, pts.Color = figPalette[0], figPalette[0]
	errBars, err := plotter.NewYErrorBars(struct {
		plotter.XYs
		plotter.YErrors
	}{xy, yerr})
	if err != nil {
		return err
	}
	errBars.Color = figPalette[0]
	p.Add(line, pts, errBars)
	lo, hi := xy[0].X, xy[len(xy)-1].X
	p.X.Min, p.X.Max = math.Pow(10, math.Floor(math.Log10(lo))), math.Pow(10, math.Ceil(math.Log10(hi)))
	lo, hi = p.X.Min, p.X.Max
	tl, err := plotter.NewLine(plotter.XYs{{X: lo, Y: target}, {X: hi, Y: target}})
	if err != nil {
		return err
	}
	tl.Dashes = []vg.Length{vg.Points(3), vg.Points(2)}
	tl.Color = figPalette[1%len(figPalette)]
	p.Add(tl)
	p.Legend.Add("simulated power", line, pts)
	p.Legend.Add(fmt.Sprintf("target %g", target), tl)
	p.Legend.Top, p.Legend.Left = false, false
	return writeFigure(files, path, []*plot.Plot{p}, width)
}
