package main

import (
	"fmt"
	"io"
	"math"
	"os"
	"strconv"
	"strings"

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
reads standard input. Times are in the unit of the rates. --rename and
--trace read other labels and state traces as in 'inspect'.

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
	fs := newFlags("fluct", fluctHelp, args, stdout, stderr)
	nlist := fs.StringP("windows", "w", "5,20,100", "window lengths in events, comma separated")
	post := fs.String("post-select", "both", "windows shown: only (post-selected) or both (all and post-selected)")
	fixed := fs.Bool("fixed-time", false, "add windows of a fixed clock time as a contrast")
	bounds := fs.Bool("bounds", false, "add entropy production lower bounds")
	bf := addBoundFlags(fs)
	rf := addRecordFlags(fs)
	level := rf.level
	boot := fs.Int("boot", infer.DefaultDiffusionBoot, "bootstrap replicates")
	seed := fs.Uint64P("seed", "s", 1, "bootstrap random seed")
	plotPath := fs.String("plot", "", "write the fluctuation plot to this file (.png, .svg, .pdf)")
	histPath := fs.String("hist", "", "write inter-transition time densities to this file")
	pnPath := fs.String("pn", "", "write P_n(c) histograms to this file")
	format := fs.StringP("format", "f", "table", "output format: "+formats)
	out := fs.StringP("output", "o", "-", "output file for the tables (- for standard output)")
	force := fs.Bool("force", false, "overwrite existing output and figure files")
	if code := parseFlags(fs, args); code >= 0 {
		return code
	}
	if fs.NArg() != 1 {
		fs.Usage()
		return 2
	}
	fail := func(code int, err error) int {
		fmt.Fprintf(stderr, "edgewise fluct: %v\n", err)
		return code
	}
	ns, err := parseInts(*nlist)
	if err != nil {
		return fail(2, fmt.Errorf("--windows: %w", err))
	}
	if *post != "only" && *post != "both" {
		return fail(2, fmt.Errorf("--post-select %q: want only or both", *post))
	}
	fwd, bwd, err := rf.edgeLabels()
	if err != nil {
		return fail(2, err)
	}
	if err := rf.checkLevel(); err != nil {
		return fail(2, err)
	}
	ropt, err := rf.readOptions()
	if err != nil {
		return fail(2, err)
	}
	if err := checkOutput(*out, *force); err != nil {
		return fail(1, err)
	}
	for _, p := range []string{*plotPath, *histPath, *pnPath} {
		if p == "" {
			continue
		}
		if _, err := figFormat(p); err != nil {
			return fail(2, err)
		}
		if _, err := os.Stat(p); err == nil && !*force {
			return fail(1, fmt.Errorf("%s exists; use --force to overwrite", p))
		}
	}
	path := fs.Arg(0)
	d, rep, sum, err := readInput(path, os.Stdin, ropt)
	if err != nil {
		return fail(1, err)
	}
	if err := d.PutFirst(fwd, bwd); err != nil { // tables list the visible edge's labels first
		fmt.Fprintf(stderr, "edgewise: %v\n", err)
		return 1
	}
	cond, err := bf.conditions()
	if err != nil {
		return fail(2, err)
	}
	edge := infer.EdgeLabels{Forward: fwd, Backward: bwd}
	res, err := infer.FluctuationTest(d, ns, infer.FluctOptions{Labels: edge, Level: *level, Boot: *boot, Seed: *seed, FixedTime: *fixed})
	if err != nil {
		return fail(1, fmt.Errorf("%s: %w", path, err))
	}
	r := &report{Tool: "edgewise " + version, Command: "fluct " + strings.Join(args, " "), Input: path, Checksum: sum, Seed: strconv.FormatUint(*seed, 10)}
	checks := infer.FluctChecks(res, 1-*level)
	r.Tables = append(r.Tables, fluctTables(res, checks, *post == "both", *level)...)
	r.Notes = append(r.Notes,
		fmt.Sprintf("tests (post-selected slope against F, linearity of the post-selected log-ratio) form one family, corrected by Holm's step-down procedure (Holm, Scand. J. Stat. 6, 65 (1979)): each p is the test's own, 'Holm p' the adjusted one; a rejection is evidence at %.3g%% family-wise, not proof", 100*(1-*level)),
		fmt.Sprintf("%d events in %d records; windows of n consecutive events never cross records and do not overlap, so their currents are nearly independent", d.Events(), len(d.Records)),
		"slope - F: SE from a block bootstrap over blocks of whole windows (at least 100 events) within records, since slope and F come from the same events and are correlated; with fewer than 50 blocks both SEs are added as if independent (conservative)",
		"the test assumes stationarity; a drifting record mixes windows with different laws",
		"a slope consistent with F does not prove a model; post-selected windows follow F c exactly only when the labels form a first-order Markov chain",
	)
	if zg := rep.ZeroGaps(); zg != "" {
		r.Notes = append(r.Notes, zg+": the windows count them, the waiting-time divergences leave them out")
	}
	var bres *infer.Bounds
	if *bounds {
		bres, err = infer.EntropyBounds(d, infer.BoundOptions{Labels: edge, Level: *level, Conditions: cond})
		if err != nil {
			return fail(1, err)
		}
		r.Tables = append(r.Tables, boundTables(bres, *level)...)
		if bres.Claimed {
			r.Notes = append(r.Notes, "F*J, J^2/D and the transition-based sum are lower bounds on the entropy production rate, not estimates of it, given: "+strings.Join(bres.Validity.Assumes, "; ")+". A model whose sigma lies below a bound's interval is then evidence against that model, not proof")
		} else {
			r.Notes = append(r.Notes, "entropy-production bounds withheld: "+bres.Reason)
		}
		r.Notes = append(r.Notes, bres.WaitingTimeNotes...)
	}
	if err := writeFluctFigures(d, res, *post == "both", *plotPath, *histPath, *pnPath, *force); err != nil {
		return fail(1, err)
	}
	if err := emit(*out, *force, stdout, func(w io.Writer) error { return r.write(w, *format) }); err != nil {
		return fail(1, err)
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

// fg formats a number like inspect's num (5 significant digits), so that
// the same estimate prints the same in both commands, but "-" when
// undefined.
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

// fluctTables renders the test results; checks is FluctChecks(res): two
// per window length, the slope against F and the linearity.
func fluctTables(res []infer.Fluctuation, checks []infer.Check, both bool, level float64) []table {
	pct := fmt.Sprintf("%g%%", 100*level)
	main := table{
		Title:   "Fluctuation test: slope of ln[P(c)/P(-c)] against c, set against F (k_BT)",
		Columns: []string{"n", "windows", "how many", "c in fit", "c one-sided", "slope", pct + " interval", "F", "F " + pct, "slope - F", "SE", "z", "p", "Holm p", "linearity p", "reading"},
	}
	pts := table{
		Title:   "Log-ratios per current c (exact " + pct + " intervals)",
		Columns: []string{"n", "windows", "c", "N(c)", "N(-c)", "ln[N(c)/N(-c)]", "interval"},
	}
	for i, r := range res {
		c, lin := &checks[2*i], &checks[2*i+1]
		for _, s := range fluctKinds(r, both) {
			v := s.Versus
			p, holm := "", ""
			if s.Kind == "post-selected" {
				p, holm = pval(c.P), pval(c.Adjusted)
			}
			main.Rows = append(main.Rows, []string{
				strconv.Itoa(r.N), kindName(s), strconv.Itoa(s.Windows), strconv.Itoa(s.Used), strconv.Itoa(s.Skipped),
				num(s.Slope.Value), interval(s.Slope), num(r.F.Value), interval(r.F), num(v.Diff.Value), num(v.Diff.SE), num(v.Z), p, holm, pval(s.LinearP), rowReading(s, c, lin),
			})
			for _, p := range s.Points {
				pts.Rows = append(pts.Rows, []string{strconv.Itoa(r.N), kindName(s), strconv.Itoa(p.C), strconv.FormatInt(p.Plus, 10), strconv.FormatInt(p.Minus, 10), num(p.LogRatio), interval(infer.Estimate{Lo: p.Lo, Hi: p.Hi})})
			}
		}
	}
	return []table{main, pts}
}

// boundFlags are the instrument facts that decide, with the data's
// Markov-order test, whether the entropy-production bounds hold
// (infer.BoundsValid); the data cannot show them.
type boundFlags struct {
	multi  *bool
	dead   *float64
	detect *string
}

func addBoundFlags(fs *pflag.FlagSet) boundFlags {
	return boundFlags{
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

// boundTables renders the entropy production bounds.
func boundTables(b *infer.Bounds, level float64) []table {
	pct := fmt.Sprintf("%g%%", 100*level)
	t := table{
		Title:   "Entropy production: lower bounds from the data (k_B per time unit)",
		Columns: []string{"quantity", "value", "SE", pct + " interval", "method", "note"},
	}
	row := func(name string, e infer.Estimate) {
		t.Rows = append(t.Rows, []string{name, num(e.Value), num(e.SE), interval(e), e.Method, e.Note})
	}
	row("visible current J (1/time)", b.J)
	row("effective affinity F (k_BT)", b.F)
	row("diffusion coefficient D of c (1/time)", b.D)
	m := b.Validity.Markov
	mnote := fmt.Sprintf("the bounds are withheld below p = %g", b.Validity.Level)
	if !b.Validity.Tested {
		mnote = "not tested: " + m.Note
	}
	t.Rows = append(t.Rows, []string{"Markov-order test of the labels, p", pval(m.P), "", "", fmt.Sprintf("G = %s on %d df (%d triplets)", num(m.Stat), m.DF, m.N), mnote})
	row("bound F*J", b.FJ)
	row("bound J^2/D (uncertainty relation)", b.TUR)
	row("transition bound: sequence part", b.Sequence)
	row(fmt.Sprintf("transition bound: waiting-time part (%d ++ and %d -- gaps)", b.Gaps[0], b.Gaps[1]), b.WaitingTime)
	row("bound: transition-based total", b.Transition)
	v := table{
		Title:   fmt.Sprintf("Variance of the current in windows of duration t (D fitted on t from %s to %s)", num(b.FitFrom), num(b.FitTo)),
		Columns: []string{"t", "windows", "mean c", "Var c", "Var c / 2t"},
	}
	for _, p := range b.Variance {
		v.Rows = append(v.Rows, []string{num(p.T), strconv.Itoa(p.Windows), num(p.Mean), num(p.Var), num(p.Var / (2 * p.T))})
	}
	return []table{t, v}
}

// writeFluctFigures writes the figures asked for.
func writeFluctFigures(d *likelihood.Data, res []infer.Fluctuation, both bool, plotPath, histPath, pnPath string, force bool) error {
	if plotPath != "" {
		var ps []*plot.Plot
		for _, r := range res {
			p, err := fluctPanel(r, both, true)
			if err != nil {
				return err
			}
			ps = append(ps, p)
		}
		if err := writeFigure(plotPath, force, ps, figPanelW, figPanelH); err != nil {
			return err
		}
	}
	if pnPath != "" {
		var ps []*plot.Plot
		for _, r := range res {
			p, err := pnPanel(r, !both)
			if err != nil {
				return err
			}
			ps = append(ps, p)
		}
		if err := writeFigure(pnPath, force, ps, figPanelW, figPanelH); err != nil {
			return err
		}
	}
	if histPath != "" {
		p, err := gapPanel(d)
		if err != nil {
			return err
		}
		if err := writeFigure(histPath, force, []*plot.Plot{p}, figPanelW*1.3, figPanelH*1.2); err != nil {
			return err
		}
	}
	return nil
}
