package main

import (
	"fmt"
	"io"
	"math"
	"os"
	"strconv"
	"strings"

	"edgewise/cmd/edgewise/internal/output"
	"edgewise/infer"
	"edgewise/likelihood"

	"github.com/spf13/pflag"
	"gonum.org/v1/plot"
)

const fluctHelp = `Usage: edgewise fluct RECORDS.csv [options]

Count-stopped fluctuation test of one visible edge, from data alone. Each
record is cut into non-overlapping windows of n consecutive visible
transitions (never across records); the current c = n_+ - n_- of each
window gives P_n(c), and the slope of ln[P_n(c)/P_n(-c)] against c is set
against the data's effective affinity F = ln[P(+|+)/P(-|-)]. For windows
whose first label is the reverse of the last ("post-selected") the slope is
F exactly when the labels form a first-order Markov chain; the windows of
all kinds carry a boundary term. --fixed-time adds windows of a fixed clock
time holding n events on average, where no such symmetry holds in general.

The slope is a binomial maximum-likelihood fit through the origin: given
the N(c) + N(-c) windows at |c|, N(c) is binomial with probability
1/(1 + e^{-s c}). Every c with windows enters it, also a c whose -c never
occurs (its log-ratio is infinite and is not plotted), so the small counts
of the rare sign do not bias the slope; the linearity p is the fit's
deviance test. Intervals of single log-ratios are exact (Clopper-Pearson on the split of
the N(c) + N(-c) windows, through the logit). Slope and F come from the same
events, so their difference is judged by a block bootstrap (--boot, --seed):
its z-score keeps their correlation.

--bounds adds lower bounds on the entropy production rate: F*J, the
thermodynamic uncertainty bound J^2/D and the transition-based waiting-time
bound (its waiting-time part needs about 10^4 gaps of each of ++ and --).
D is half the long-time slope of Var c(t) = a + 2 D t, with a jackknife
interval over blocks of the records: the estimator 'inspect' uses, so the
two print the same D for the same file. The intervals of F*J and J^2/D are
ranges over the joint confidence region of their factors, so they keep
their level at equilibrium, where both are 0; with few ++ or -- pairs (or
none: F infinite) F*J takes a conservative interval from F's exact bounds.
The bounds hold when each label sits on one directed edge and the
instrument treats both directions alike (equal detection probabilities, no
dead time), and the labels form a first-order Markov chain: they are
withheld, with the reason, when the data's Markov-order test rejects at
p < 0.001, or when --multi-edge, --dead-time or unequal --detect say the
instrument breaks them; otherwise they are given with the test's p.

Tests: each post-selected slope against F and the linearity of its
log-ratio are tests of first-order Markov labels; together they form one
family corrected by Holm's step-down procedure (a rejection is evidence,
at 5% family-wise, not proof).

Records: CSV or TSV with columns time, label and optionally record; "-"
reads standard input. Times are in the unit of the rates (--time-unit
names it). --rename, --trace and --edge read other labels and state
traces as in 'inspect', with the same rule for the visible edge's
direction.

Figures (--plot, --hist, --pn; .png, .svg or .pdf) are sized for a
journal column (--figure-width 89, in mm) or a full page width (183).

Example:
  edgewise fluct testdata/ring4-demo.csv --windows 5,20 --fixed-time --bounds \
      --plot fluct.svg --hist gaps.png --pn pn.pdf

This weakly driven ring has F = 1.1, so windows of 5 and 20 events show
both signs of the current often enough; the fixed-time slope departs from
F at such short windows even for a ring (a boundary effect that fades like
1/n), while the post-selected slope agrees. With a strong drive (F = 4.4 in
testdata/ring3-demo.csv) negative currents are rare beyond n = 5, and the
test says so.

Cautions: the test assumes stationarity; a slope consistent with F does not
prove a model; F*J and J^2/D are lower bounds, not estimates of sigma.

Options:
`

func cmdFluct(args []string, stdout, stderr io.Writer) int {
	c := newCommand("fluct", fluctHelp, args, stdout, stderr)
	nlist := c.fs.StringP("windows", "w", "5,20,100", "window lengths in events, comma separated")
	post := c.fs.String("post-select", "both", "windows shown: only (post-selected) or both (all and post-selected)")
	fixed := c.fs.Bool("fixed-time", false, "add windows of a fixed clock time as a contrast")
	bounds := c.fs.Bool("bounds", false, "add entropy production lower bounds")
	bf := addBoundFlags(c.fs)
	rf := addRecordFlags(c.fs)
	level := rf.level
	boot := c.fs.Int("boot", infer.DefaultDiffusionBoot, "bootstrap replicates")
	seed := c.fs.Uint64P("seed", "s", 1, "bootstrap random seed")
	ff := addFigureFlags(c.fs)
	c.outputFlags(true)
	c.timeUnitFlag()
	if code := c.parse(); code >= 0 {
		return code
	}
	if c.fs.NArg() != 1 {
		return c.usage("want one records file (or - for standard input), got %d arguments", c.fs.NArg())
	}
	ns, err := parseInts(*nlist)
	if err != nil {
		return c.usage("--windows: %v", err)
	}
	if *post != "only" && *post != "both" {
		return c.usage("--post-select %q: want only or both", *post)
	}
	if rf.fs.Changed("edge") {
		if _, _, err := rf.edgeLabels(); err != nil {
			return c.usage("%v", err)
		}
	}
	if err := rf.checkLevel(); err != nil {
		return c.usage("%v", err)
	}
	if _, err := c.outputFormat(); err != nil {
		return c.usage("%v", err)
	}
	if err := checkTimeUnit(*c.timeUnit); err != nil {
		return c.usage("%v", err)
	}
	ropt, err := rf.readOptions()
	if err != nil {
		return c.usage("%v", err)
	}
	cond, err := bf.conditions()
	if err != nil {
		return c.usage("%v", err)
	}
	if err := ff.check(); err != nil {
		return c.usage("%v", err)
	}
	files := output.NewFiles(stdout, *c.force)
	defer files.Close()
	for _, o := range []struct{ flag, path string }{{"-o", *c.out}, {"--plot", *ff.plot}, {"--hist", *ff.hist}, {"--pn", *ff.pn}} {
		if err := files.Claim(o.flag, o.path); err != nil {
			return c.fail(1, err)
		}
	}
	in, err := c.readRecords(c.fs.Arg(0), os.Stdin, ropt)
	if err != nil {
		return c.fail(1, err)
	}
	d := in.d
	fwd, bwd, edgeNote, err := rf.chooseEdge(in)
	if err != nil {
		return c.usage("%v", err)
	}
	if err := d.PutFirst(fwd, bwd); err != nil { // tables list the visible edge's labels first
		return c.fail(1, err)
	}
	unit, unitNote := c.resolveTimeUnit("", in.stamp["time_unit"])
	deadNote := bf.fromStamp(in.stamp, &cond)
	edge := infer.EdgeLabels{Forward: fwd, Backward: bwd}
	stop := c.spin("resampling")
	res, err := infer.FluctuationTest(d, ns, infer.FluctOptions{Labels: edge, Level: *level, Boot: *boot, Seed: *seed, FixedTime: *fixed})
	stop()
	if err != nil {
		return c.fail(1, fmt.Errorf("%s: %w", in.name, err))
	}
	r := c.newReport([]output.Input{in.input()}, output.SeedOf(*seed), unit)
	r.Notes = nonEmpty(edgeNote, unitNote, deadNote)
	checks := infer.FluctChecks(res, 1-*level)
	r.Add(fluctTables(res, checks, *post == "both", *level)...)
	r.Note("tests (post-selected slope against F, linearity of the post-selected log-ratio) form one family, corrected by Holm's step-down procedure (Holm, Scand. J. Stat. 6, 65 (1979)): each p is the test's own, 'Holm p' the adjusted one; a rejection is evidence at %.3g%% family-wise, not proof", 100*(1-*level))
	r.Note("%d events in %d records; windows of n consecutive events never cross records and do not overlap, so their currents are nearly independent", d.Events(), len(d.Records))
	r.Notes = append(r.Notes,
		"slope - F: SE from a block bootstrap over blocks of whole windows (at least 100 events) within records, since slope and F come from the same events and are correlated; with fewer than 50 blocks both SEs are added as if independent (conservative)",
		"the test assumes stationarity; a drifting record mixes windows with different laws",
		"a slope consistent with F does not prove a model; post-selected windows follow F c exactly only when the labels form a first-order Markov chain",
	)
	if zg := in.rep.ZeroGaps(); zg != "" {
		r.Note("%s: the windows count them, the waiting-time divergences leave them out", zg)
	}
	if *bounds {
		stop := c.spin("bounds")
		bres, err := infer.EntropyBounds(d, infer.BoundOptions{Labels: edge, Level: *level, Conditions: cond})
		stop()
		if err != nil {
			return c.fail(1, err)
		}
		r.Add(boundTables(bres, *level, unit)...)
		if bres.Claimed {
			r.Note("F*J, J^2/D and the transition-based sum are lower bounds on the entropy production rate, not estimates of it, given: %s. A model whose sigma lies below a bound's interval is then evidence against that model, not proof", strings.Join(bres.Validity.Assumes, "; "))
		} else {
			r.Note("entropy-production bounds withheld: %s", bres.Reason)
		}
		r.Notes = append(r.Notes, bres.WaitingTimeNotes...)
	}
	if err := writeFluctFigures(files, ff, d, res, *post == "both", unit); err != nil {
		return c.fail(1, err)
	}
	if err := c.emitReport(files, r); err != nil {
		return c.fail(1, err)
	}
	return 0
}

func parseInts(s string) ([]int, error) {
	var out []int
	for _, f := range strings.Split(s, ",") {
		v, err := strconv.Atoi(strings.TrimSpace(f))
		if err != nil {
			return nil, fmt.Errorf("%q is not an integer", f)
		}
		if v < 1 {
			return nil, fmt.Errorf("window length %d < 1", v)
		}
		out = append(out, v)
	}
	return out, nil
}

// fluctKinds lists the kinds of window shown, in table order.
func fluctKinds(r infer.Fluctuation, both bool) []infer.Symmetry {
	var out []infer.Symmetry
	if both {
		out = append(out, r.Raw)
	}
	out = append(out, r.PostSelected)
	if r.FixedTime != nil {
		out = append(out, *r.FixedTime)
	}
	return out
}

// kindKey is the machine key of a kind of window.
func kindKey(s infer.Symmetry) string {
	switch s.Kind {
	case "count-stopped":
		return "all"
	case "fixed-time":
		return "fixed_time"
	case "post-selected":
		return "post_selected"
	}
	return output.Key(s.Kind)
}

func kindName(s infer.Symmetry) string {
	switch s.Kind {
	case "count-stopped":
		return "all windows"
	case "fixed-time":
		return "fixed time T = " + num(s.Duration)
	}
	return s.Kind
}

// rowReading is the reading of one row with what it means for its kind of
// window: only post-selected windows test the labels (c is the row's
// check, lin its linearity check); all windows carry a boundary term and
// fixed-time windows are a contrast, so a difference there is expected and
// is not a finding.
func rowReading(s infer.Symmetry, c, lin *infer.Check) string {
	v := s.Versus.Verdict
	if strings.HasPrefix(v, "no verdict") {
		return v
	}
	switch s.Kind {
	case "post-selected":
		out := fmt.Sprintf("no evidence against slope = F (Holm p = %s)", pval(c.Adjusted))
		if c.Reject {
			out = fmt.Sprintf("evidence (Holm p = %s) that the labels are not a first-order Markov chain (spurious events, labels on several edges, or hidden memory)", pval(c.Adjusted))
		}
		if lin.Reject {
			out += fmt.Sprintf("; the log-ratio is not linear in c (Holm p = %s): evidence against first-order labels", pval(lin.Adjusted))
		}
		return out
	case "fixed-time":
		return fmt.Sprintf("z = %.2f (contrast, not a test: a departure that persists as n grows points to a driven cycle off the visible edge)", s.Versus.Z)
	default:
		return fmt.Sprintf("z = %.2f (not a test: all windows carry a boundary term that fades like 1/n)", s.Versus.Z)
	}
}

// boundFlags are the instrument facts that decide, with the data's
// Markov-order test, whether the entropy-production bounds hold
// (infer.BoundsValid); the data cannot show them.
type boundFlags struct {
	multi  *bool
	dead   *float64
	detect *string
	fs     *pflag.FlagSet
}

func addBoundFlags(fs *pflag.FlagSet) boundFlags {
	return boundFlags{
		fs:     fs,
		multi:  fs.Bool("multi-edge", false, "a label may sit on several directed edges: the entropy bounds are withheld"),
		dead:   fs.Float64("dead-time", 0, "the instrument's dead time after each event, when known (time units): the entropy bounds are withheld"),
		detect: fs.String("detect", "", "detection probabilities of the forward and backward labels, when known, as P+,P- (unequal ones withhold the entropy bounds)"),
	}
}

func (b boundFlags) conditions() (infer.BoundConditions, error) {
	c := infer.BoundConditions{MultiEdge: *b.multi, DeadTime: *b.dead}
	if !(c.DeadTime >= 0) || math.IsInf(c.DeadTime, 0) {
		return c, fmt.Errorf("--dead-time %v: want a finite value >= 0", c.DeadTime)
	}
	if *b.detect != "" {
		a, z, ok := strings.Cut(*b.detect, ",")
		pa, e1 := strconv.ParseFloat(strings.TrimSpace(a), 64)
		pz, e2 := strconv.ParseFloat(strings.TrimSpace(z), 64)
		if !ok || e1 != nil || e2 != nil || !(pa > 0 && pa <= 1) || !(pz > 0 && pz <= 1) {
			return c, fmt.Errorf("--detect %q: want two probabilities in (0, 1] as P+,P-", *b.detect)
		}
		c.DetectForward, c.DetectBackward = pa, pz
	}
	return c, nil
}

// fromStamp takes the dead time from the records' stamp when --dead-time
// was not given, and returns a note saying so ("" when not used).
func (b boundFlags) fromStamp(s simStamp, c *infer.BoundConditions) string {
	if b.fs.Changed("dead-time") {
		return ""
	}
	if dt, ok := s.float("dead_time"); ok && dt > 0 && !math.IsInf(dt, 0) {
		c.DeadTime = dt
		return fmt.Sprintf("dead time %g read from the records' stamp (simulate)", dt)
	}
	return ""
}

// fluctTables renders the test results; checks is FluctChecks(res): two
// per window length, the slope against F and the linearity.
func fluctTables(res []infer.Fluctuation, checks []infer.Check, both bool, level float64) []*output.Table {
	main := output.NewTable("fluct", "Fluctuation test: slope of ln[P(c)/P(-c)] against c, set against F", "windows",
		output.MachineCol("n", "n", ""), output.MachineCol("kind", "kind", ""), output.Col("windows", "how many", ""),
		output.Col("c_in_fit", "c in fit", ""), output.Col("c_one_sided", "c one-sided", ""),
		output.Col("slope", "slope", "k_BT"), output.Col("slope_interval", pct(level)+" interval", "k_BT"),
		output.Col("F", "F", "k_BT"), output.Col("F_interval", "F "+pct(level), "k_BT"),
		output.Col("slope_minus_F", "slope - F", "k_BT"), output.Col("se", "SE", "k_BT"), output.Col("z", "z", ""),
		output.Col("p", "p", ""), output.Col("holm_p", "Holm p", ""), output.Col("linearity_p", "linearity p", ""), output.Col("reading", "reading", ""))
	pts := output.NewTable("log_ratios", "Log-ratios per current c (exact "+pct(level)+" intervals)", "windows",
		output.MachineCol("n", "n", ""), output.MachineCol("kind", "kind", ""), output.MachineCol("c", "c", ""), output.Col("N_c", "N(c)", ""), output.Col("N_minus_c", "N(-c)", ""),
		output.Col("log_ratio", "ln[N(c)/N(-c)]", ""), output.Col("interval", "interval", ""))
	for i, r := range res {
		c, lin := &checks[2*i], &checks[2*i+1]
		for _, s := range fluctKinds(r, both) {
			v := s.Versus
			p, holm := output.Empty(), output.Empty()
			if s.Kind == "post-selected" {
				p, holm = output.P(c.P), output.P(c.Adjusted)
			}
			key := fmt.Sprintf("n%d_%s", r.N, kindKey(s))
			label := fmt.Sprintf("n = %d, %s", r.N, kindName(s))
			main.Add(key, label,
				output.Count(r.N), output.Text(kindName(s)), output.Count(s.Windows), output.Count(s.Used), output.Count(s.Skipped),
				output.Num(s.Slope.Value), output.Interval(s.Slope.Lo, s.Slope.Hi, level, s.Slope.Method), output.Num(r.F.Value), output.Interval(r.F.Lo, r.F.Hi, level, r.F.Method),
				output.Num(v.Diff.Value), output.Num(v.Diff.SE), output.Num(v.Z), p, holm, output.P(s.LinearP), output.Text(rowReading(s, c, lin)))
			for _, pt := range s.Points {
				pts.Add(fmt.Sprintf("%s_c%d", key, pt.C), fmt.Sprintf("%s, c = %d", label, pt.C), output.Count(r.N), output.Text(kindName(s)), output.Count(pt.C),
					output.Count(int(pt.Plus)), output.Count(int(pt.Minus)), output.Num(pt.LogRatio), output.Interval(pt.Lo, pt.Hi, level, "Clopper-Pearson, logit"))
			}
		}
	}
	return []*output.Table{main, pts}
}

// boundTables renders the entropy production bounds.
func boundTables(b *infer.Bounds, level float64, u output.TimeUnit) []*output.Table {
	t := output.NewTable("bounds", "Entropy production: lower bounds from the data", "quantity", estimateUnitCols(level)...)
	t.Add("J", "visible current J", estimateUnitCells(u.Rate(), b.J, level)...)
	t.Add("F", "effective affinity F", estimateUnitCells("k_BT", b.F, level)...)
	t.Add("D", "diffusion coefficient D of c", estimateUnitCells(u.Rate(), b.D, level)...)
	m := b.Validity.Markov
	mnote := fmt.Sprintf("the bounds are withheld below p = %g", b.Validity.Level)
	if !b.Validity.Tested {
		mnote = "not tested: " + m.Note
	}
	t.Add("markov_p", "Markov-order test of the labels, p", output.Empty(), output.P(m.P), output.Empty(), output.Empty(),
		output.Text(fmt.Sprintf("G = %s on %d df (%d triplets)", num(m.Stat), m.DF, m.N)), output.Text(mnote))
	t.Add("FJ", "bound F*J", estimateUnitCells(u.Entropy(), b.FJ, level)...)
	t.Add("TUR", "bound J^2/D (uncertainty relation)", estimateUnitCells(u.Entropy(), b.TUR, level)...)
	t.Add("sequence", "transition bound: sequence part", estimateUnitCells(u.Entropy(), b.Sequence, level)...)
	t.Add("waiting_time", fmt.Sprintf("transition bound: waiting-time part (%d ++ and %d -- gaps)", b.Gaps[0], b.Gaps[1]), estimateUnitCells(u.Entropy(), b.WaitingTime, level)...)
	t.Add("transition", "bound: transition-based total", estimateUnitCells(u.Entropy(), b.Transition, level)...)
	v := output.NewTable("variance", fmt.Sprintf("Variance of the current in windows of duration t (D fitted on t from %s to %s)", num(b.FitFrom), num(b.FitTo)), "window",
		output.Col("t", "t", u.Time()), output.Col("windows", "windows", ""), output.Col("mean_c", "mean c", ""), output.Col("var_c", "Var c", ""), output.Col("var_c_over_2t", "Var c / 2t", u.Rate()))
	for i, p := range b.Variance {
		v.Add(fmt.Sprintf("t_%d", i+1), fmt.Sprintf("%d", i+1), output.Num(p.T), output.Count(p.Windows), output.Num(p.Mean), output.Num(p.Var), output.Num(p.Var/(2*p.T)))
	}
	return []*output.Table{t, v}
}

// writeFluctFigures writes the figures asked for through files.
func writeFluctFigures(files *output.Files, ff figureFlags, d *likelihood.Data, res []infer.Fluctuation, both bool, u output.TimeUnit) error {
	if *ff.plot != "" {
		var ps []*plot.Plot
		for _, r := range res {
			p, err := fluctPanel(r, both, true)
			if err != nil {
				return err
			}
			ps = append(ps, p)
		}
		if err := writeFigure(files, *ff.plot, ps, *ff.width); err != nil {
			return err
		}
	}
	if *ff.pn != "" {
		var ps []*plot.Plot
		for _, r := range res {
			p, err := pnPanel(r, !both)
			if err != nil {
				return err
			}
			ps = append(ps, p)
		}
		if err := writeFigure(files, *ff.pn, ps, *ff.width); err != nil {
			return err
		}
	}
	if *ff.hist != "" {
		p, err := gapPanel(d, u, nil)
		if err != nil {
			return err
		}
		if err := writeFigure(files, *ff.hist, []*plot.Plot{p}, *ff.width); err != nil {
			return err
		}
	}
	return nil
}
