package main

import (
	"fmt"
	"io"
	"math"
	"os"
	"strings"

	"edgewise/cmd/edgewise/internal/output"
	"edgewise/infer"
	"edgewise/likelihood"
	"edgewise/models"
)

const predictHelp = `Usage: edgewise predict [RECORDS.csv] MODEL.toml [options]

What a model predicts for data taken through a given instrument, at the
model's start values: the embedded chain of visible labels P(next|last),
the mean and spread of the time between consecutive events per pair, the
rates of the labels, the visible current J and its diffusion coefficient D
(Var c(t) ~ 2 D t), the effective affinity F = ln[P(+|+)/P(-|-)] of the
visible edge, and the exact count-stopped law: the slope of
ln[P_n(c)/P_n(-c)] against c for windows of n visible transitions, over all
windows and over post-selected ones (first label the reverse of the last),
and with --fixed-time over windows of n mean gaps. Each slope is the
binomial maximum-likelihood slope that 'fluct' estimates from data,
computed from the model's exact law: the same estimand for model and data.
F*J and J^2/D are shown as lower bounds on sigma only where they are
bounds: not when a label sits on several edges, the two directions are
detected with different probabilities, or there is a dead time (and, with
--data, not when the data's Markov-order test rejects at p < 0.001).
Detection probabilities come from the spec; --dead-time adds an instrument
that is blind for that time after each recorded event. Every prediction is
made under that detection process, since missed events and a dead time
change F while the count-stopped law still looks like a straight line.

With records (the first argument; "-" reads standard input), they are set
against the model: the log-likelihood
(each record conditioned on its first event), and for P(+|+), P(-|-), F, J
and each slope the data's estimate with its interval, a test of the
model's value that stays finite and keeps its level with small counts
(exact binomial for P(+|+) and P(-|-), exact likelihood ratio for F, the
model's variance for J, the exact law of the score for the slopes), its
p-value and normal score z. The tests form one family corrected by Holm's
step-down procedure: a rejection is evidence, not proof, and a model
consistent with the data is not thereby true.

The visible edge is + and - when the model has them; else the first edge
of the spec (in the spec's order) whose two directions carry the two
labels, forward being its direction 0 (from between[0] to between[1]); the
output says which. A dead time, frame length and time unit recorded in
the records' stamp (by simulate) are used when not given, and the output
says so. --data RECORDS is the old way to give the records (kept for one
release).

Example:
  edgewise predict testdata/ring4-demo.csv testdata/ring4.toml --windows 5,20

Options:
`

func cmdPredict(args []string, stdout, stderr io.Writer) int {
	c := newCommand("predict", predictHelp, args, stdout, stderr)
	data := c.fs.StringP("data", "d", "", "old way to give the records (now the first argument); kept for one release")
	dead := c.fs.Float64("dead-time", 0, "instrument dead time after each recorded event (time units; default: from the records' stamp, else 0)")
	frame := c.fs.Float64("frame", 0, "frame length of the records' timestamps, for the log-likelihood (time units; 0 = exact times; default: from the records' stamp)")
	ns := c.fs.StringP("windows", "w", "5,20,100", "window lengths of the count-stopped law, comma separated")
	fixed := c.fs.Bool("fixed-time", false, "add windows of a fixed clock time (n mean gaps) to the slopes")
	rf := addRecordFlags(c.fs)
	c.outputFlags(true)
	c.timeUnitFlag()
	if code := c.parse(); code >= 0 {
		return code
	}
	var recPath, modelPath string
	switch {
	case c.fs.NArg() == 2 && *data != "":
		return c.usage("records given twice: as the first argument and with --data")
	case c.fs.NArg() == 2:
		recPath, modelPath = c.fs.Arg(0), c.fs.Arg(1)
	case c.fs.NArg() == 1:
		recPath, modelPath = *data, c.fs.Arg(0)
	default:
		return c.usage("want [RECORDS] MODEL, got %d arguments", c.fs.NArg())
	}
	if _, err := c.outputFormat(); err != nil {
		return c.usage("%v", err)
	}
	if err := checkTimeUnit(*c.timeUnit); err != nil {
		return c.usage("%v", err)
	}
	windows, err := parseInts(*ns)
	if err != nil {
		return c.usage("--windows: %v", err)
	}
	for _, n := range windows {
		if n < 2 || n > maxWindow {
			return c.usage("--windows: window length %d: want 2 to %d events (the exact law costs n^2 operations)", n, maxWindow)
		}
	}
	if err := rf.checkLevel(); err != nil {
		return c.usage("%v", err)
	}
	files := output.NewFiles(stdout, *c.force)
	defer files.Close()
	if err := files.Claim("-o", *c.out); err != nil {
		return c.fail(1, err)
	}
	src, m, net, err := loadModel(modelPath)
	if err != nil {
		return c.fail(1, err)
	}
	if sniffFile(recPath) == "spec" {
		return c.fail(2, &kindError{path: recPath, is: specKind, want: recordsKind})
	}
	in := likelihood.Instrument{DeadTime: *dead, Frame: *frame}
	if err := in.Validate(); err != nil {
		return c.usage("%v", err)
	}
	k, err := likelihood.NewKernels(net)
	if err != nil {
		return c.fail(1, err)
	}
	edge := *rf.edge
	if !c.fs.Changed("edge") {
		edge = "" // the default "+,-" when the model has it, else the spec's edge
	}
	// The visible edge does not depend on the instrument: find it with a
	// perfect one.
	pred0, err := likelihood.NewPredictor(k, likelihood.Instrument{})
	if err != nil {
		return c.fail(1, err)
	}
	plus, minus, err := visibleEdge(pred0, k.Labels, edge, m)
	if err != nil {
		return c.usage("--edge: %v", err)
	}
	ropt, err := rf.readOptions()
	if err != nil {
		return c.usage("%v", err)
	}
	// Data labels (after --rename) must be the model's, in the model's
	// order, so that label indices agree between data and model.
	ropt.Known = k.Labels
	inputs := []output.Input{{Name: modelPath, SHA256: checksum(src)}}
	var notes []string
	if *data != "" {
		notes = append(notes, "--data is the old way to give the records: write edgewise predict RECORDS MODEL")
	}
	var d *likelihood.Data
	var rep *infer.ReadReport
	var markov *infer.TestResult
	var stamp simStamp
	if recPath != "" {
		rin, err := c.readRecords(recPath, os.Stdin, ropt)
		if err != nil {
			return c.fail(1, err)
		}
		d, stamp, rep = rin.d, rin.stamp, rin.rep
		inputs = append(inputs, rin.input())
		mo := infer.MarkovOrderTest(d)
		markov = &mo
		if v, ok := stamp.float("dead_time"); ok && !c.fs.Changed("dead-time") && v > 0 {
			in.DeadTime = v
			notes = append(notes, fmt.Sprintf("dead time %g read from the records' stamp (simulate)", v))
		}
		if v, ok := stamp.float("frame"); ok && !c.fs.Changed("frame") && v > 0 {
			in.Frame = v
			notes = append(notes, fmt.Sprintf("frame length %g read from the records' stamp (simulate)", v))
		}
		if err := in.Validate(); err != nil {
			return c.fail(1, fmt.Errorf("%s: instrument in the stamp: %w", rin.name, err))
		}
	}
	pred, err := likelihood.NewPredictor(k, in)
	if err != nil {
		return c.fail(1, err)
	}
	unit, unitNote := c.resolveTimeUnit(m.TimeUnit, stamp["time_unit"])
	notes = append(notes, nonEmpty(unitNote)...)
	if plus >= 0 && !(k.Labels[plus] == "+" && k.Labels[minus] == "-") {
		notes = append(notes, fmt.Sprintf("visible edge: forward %s, backward %s (the spec's direction; --edge %s,%s reverses it)", k.Labels[plus], k.Labels[minus], k.Labels[minus], k.Labels[plus]))
	}
	r := c.newReport(inputs, nil, unit)
	r.Notes = notes
	if err := predictTables(r, m, net, k, pred, in, plus, minus, windows, *fixed, markov, unit); err != nil {
		return c.fail(1, err)
	}
	if d != nil {
		if err := againstData(r, net, pred, d, in, plus, minus, windows, *fixed, *rf.level, unit); err != nil {
			return c.fail(1, rep.Locate(err))
		}
	}
	r.Note("predictions at the model's start values; they hold for data taken through the same detection process (detection probabilities, dead time)")
	if err := c.emitReport(files, r); err != nil {
		return c.fail(1, err)
	}
	return 0
}

// sniffFile sniffs the start of a file ("" for "-" or a file that cannot
// be read: the reader then says why).
func sniffFile(path string) string {
	if path == "" || path == "-" {
		return ""
	}
	f, err := os.Open(path)
	if err != nil {
		return ""
	}
	defer f.Close()
	head := make([]byte, 4096)
	n, _ := io.ReadFull(f, head)
	return sniff(head[:n])
}

// maxWindow is the longest count-stopped window predict computes.
const maxWindow = 2000

// visibleEdge picks the forward and backward label of the visible edge:
// from "a,b" when given, else "+" and "-" when the model has them and they
// are each other's reverse, else the spec's edge (specEdge: the spec's
// order and direction), else the first label that has a reverse. The two
// labels must sit on exactly reversed transitions. It returns -1, -1 when
// there is no such pair.
func visibleEdge(p *likelihood.Predictor, names []string, spec string, m *models.Model) (int, int, error) {
	idx := func(name string) int {
		for i, n := range names {
			if n == name {
				return i
			}
		}
		return -1
	}
	if spec != "" {
		a, b, ok := strings.Cut(spec, ",")
		pi, mi := idx(strings.TrimSpace(a)), idx(strings.TrimSpace(b))
		if !ok || pi < 0 || mi < 0 || pi == mi {
			return -1, -1, fmt.Errorf("%q: want two different labels of the model (%s)", spec, strings.Join(names, ", "))
		}
		if p.Reverse(pi) != mi {
			return -1, -1, fmt.Errorf("%q: %s and %s do not sit on reversed transitions, so they are not one visible edge", spec, names[pi], names[mi])
		}
		return pi, mi, nil
	}
	if pi, mi := idx("+"), idx("-"); pi >= 0 && mi >= 0 && p.Reverse(pi) == mi {
		return pi, mi, nil
	}
	if a, b, ok := specEdge(m); ok {
		if pi, mi := idx(a), idx(b); pi >= 0 && mi >= 0 && p.Reverse(pi) == mi {
			return pi, mi, nil
		}
	}
	for l := range names {
		if r := p.Reverse(l); r >= 0 && r != l {
			return l, r, nil
		}
	}
	return -1, -1, nil
}

// symmetricInstrument reports whether the instrument treats both
// directions of the visible edge alike and adds no dead time, so that at
// detailed balance J, F and the bounds are zero by construction.
func symmetricInstrument(k *likelihood.Kernels, in likelihood.Instrument, plus, minus int) bool {
	return in.DeadTime == 0 && k.Detect[plus] == k.Detect[minus]
}

func predictTables(r *output.Report, m *models.Model, net *models.Network, k *likelihood.Kernels, p *likelihood.Predictor, in likelihood.Instrument, plus, minus int, windows []int, fixed bool, markov *infer.TestResult, u output.TimeUnit) error {
	names := k.Labels
	P := p.Transition()
	chain := output.NewTable("next", "Predicted next label and gap (time between consecutive events)", "probability",
		output.Col("last", "last", ""), output.Col("next", "next", ""), output.Col("P", "P(next|last)", ""),
		output.Col("mean_gap", "mean gap", u.Time()), output.Col("cv_gap", "CV of gap", ""))
	for l := range names {
		for l2 := range names {
			m1, m2 := p.PsiMoments(l, l2)
			mean, cv := math.NaN(), math.NaN()
			if P[l][l2] > 0 {
				mean = m1 / P[l][l2]
				cv = math.Sqrt(math.Max(m2/P[l][l2]-mean*mean, 0)) / mean
			}
			name := fmt.Sprintf("P(%s|%s)", names[l2], names[l])
			meanC, cvC := output.Num(mean), output.Num(cv)
			if P[l][l2] == 0 {
				meanC, cvC = output.Undefined("this pair never occurs"), output.Undefined("this pair never occurs")
			}
			chain.Add(output.Key(name), name, output.Text(names[l]), output.Text(names[l2]), output.Num(P[l][l2]), meanC, cvC)
		}
	}
	sum := output.NewTable("predicted", "Predicted rates, current and affinity", "quantity", output.Col("value", "value", ""), output.Col("unit", "unit", ""))
	for l, rate := range p.Rates() {
		sum.Add("rate_"+output.Key(names[l]), "rate of "+names[l], output.Num(rate), output.Text(u.Rate()))
	}
	sum.Add("mean_gap", "mean time between events", output.Num(p.MeanGap()), output.Text(u.Time()))
	db, _ := net.DetailedBalance(1e-10)
	sigma := net.EntropyProduction(p.Stationary())
	single := true
	for _, es := range k.Edges {
		single = single && len(es) == 1
	}
	r.Add(chain, sum)
	if plus < 0 {
		sum.Add("sigma", "entropy production sigma of the network", output.ZeroIf(sigma, db), output.Text(u.Entropy()))
		r.Note("no pair of labels forms one visible edge: current, F and the count-stopped law are not shown")
		return nil
	}
	q := make([]float64, len(names))
	q[plus], q[minus] = 1, -1
	J, D, err := p.Current(q)
	if err != nil {
		return err
	}
	F := p.EffectiveAffinity(plus, minus)
	// At detailed balance, seen through an instrument that treats both
	// directions alike, J and F are zero by construction (design notes,
	// section 8); the computed values are round-off.
	zero := db && single && symmetricInstrument(k, in, plus, minus)
	sum.Add("J", fmt.Sprintf("current J = rate(%s) - rate(%s)", names[plus], names[minus]), output.ZeroIf(J, zero), output.Text(u.Rate()))
	sum.Add("D", "diffusion coefficient D of the current", output.Num(D), output.Text(u.Rate()))
	sum.Add("F", fmt.Sprintf("effective affinity F = ln[P(%s|%s)/P(%s|%s)]", names[plus], names[plus], names[minus], names[minus]), output.ZeroIf(F, zero), output.Text("k_BT"))
	sum.Add("sigma", "entropy production sigma of the network", output.ZeroIf(sigma, db), output.Text(u.Entropy()))
	// The one rule for the bounds (infer.BoundsValid): the model's
	// labels and instrument, and the data's Markov-order test when
	// data are given.
	bv := infer.BoundsValid(markov, infer.BoundConditions{MultiEdge: !single, DetectForward: k.Detect[plus], DetectBackward: k.Detect[minus], DeadTime: in.DeadTime})
	if bv.Hold {
		sum.Add("FJ", "lower bound F*J", output.ZeroIf(F*J, zero), output.Text(u.Entropy()))
		sum.Add("TUR", "lower bound J^2/D", output.ZeroIf(J*J/D, zero), output.Text(u.Entropy()))
	} else {
		r.Note("F*J and J^2/D are not lower bounds on sigma here, so they are not shown: %s", bv.Reason())
	}
	if len(m.Affinities) > 0 {
		r.Note("the spec imposes cycle affinities (see describe); F is what the visible edge shows of them")
	}
	qi := make([]int, len(names))
	qi[plus], qi[minus] = 1, -1
	cols := []output.Column{output.Col("all", "all windows", "k_BT"), output.Col("post_selected", "post-selected", "k_BT"), output.Col("post_share", "post-selected share", "")}
	if fixed {
		cols = append(cols, output.Col("fixed_T", "fixed time T", u.Time()), output.Col("fixed_time", "fixed-time slope", "k_BT"))
	}
	cols = append(cols, output.Col("F", "F", "k_BT"))
	cs := output.NewTable("count_stopped", "Count-stopped law: slope of ln[P_n(c)/P_n(-c)] against c", "n", cols...)
	for _, n := range windows {
		all, err := p.CountStopped(n, qi, false)
		if err != nil {
			return err
		}
		post, err := p.CountStopped(n, qi, true)
		if err != nil {
			return err
		}
		row := []output.Cell{output.ZeroIf(all.SlopeEstimand().Slope, zero), output.ZeroIf(post.SlopeEstimand().Slope, zero), output.Num(post.Weight)}
		if fixed {
			T := float64(n) * p.MeanGap()
			ft, err := p.FixedTime(T, qi)
			if err != nil {
				return err
			}
			row = append(row, output.Num(T), output.ZeroIf(ft.SlopeEstimand().Slope, zero))
		}
		cs.Add(fmt.Sprintf("n%d", n), fmt.Sprint(n), append(row, output.ZeroIf(F, zero))...)
	}
	r.Add(cs)
	r.Note("count-stopped slopes: the binomial maximum-likelihood slope of ln[P_n(c)/P_n(-c)] = s c (the estimand 'fluct' estimates from data), computed from the model's exact law; post-selected windows give F exactly when the labels are first-order Markov")
	return nil
}

// againstKey returns the machine key, label and unit of a quantity of
// infer.AgainstModel.
func againstKey(q string, u output.TimeUnit) (key, label, unit string) {
	switch {
	case strings.HasPrefix(q, "effective affinity F"):
		return "F", "effective affinity F", "k_BT"
	case strings.HasPrefix(q, "current J"):
		return "J", "current J", u.Rate()
	case strings.HasPrefix(q, "fluctuation slope"):
		s := strings.TrimPrefix(q, "fluctuation slope, ")
		return "slope_" + output.Key(strings.ReplaceAll(s, " = ", "")), q, "k_BT"
	}
	return output.Key(q), q, ""
}

// againstData sets the records against the model's predictions
// (infer.AgainstModel: one Holm-corrected family of tests).
func againstData(r *output.Report, net *models.Network, p *likelihood.Predictor, d *likelihood.Data, in likelihood.Instrument, plus, minus int, windows []int, fixed bool, level float64, u output.TimeUnit) error {
	ll, err := likelihood.LogLik(net, d, likelihood.Options{Instrument: in})
	if err != nil {
		return err
	}
	gaps := d.Events() - len(d.Records)
	lt := output.NewTable("loglik", "Log-likelihood of the records under the model", "quantity", output.Col("value", "value", ""), output.Col("unit", "unit", ""))
	lt.Add("records", "records", output.Count(len(d.Records)), output.Empty())
	lt.Add("events", "events", output.Count(d.Events()), output.Empty())
	lt.Add("lnL", "ln L (each record conditioned on its first event)", output.Fixed(ll, 2), output.Text("nats"))
	lt.Add("lnL_per_gap", "ln L per gap", output.Num(ll/float64(gaps)), output.Text("nats"))
	r.Add(lt)
	if plus < 0 {
		return nil
	}
	rows, notes, err := infer.AgainstModel(d, p, infer.AgainstOptions{Plus: plus, Minus: minus, Windows: windows, FixedTime: fixed, Level: level})
	if err != nil {
		return err
	}
	ct := output.NewTable("against", "Model against data (one family of tests, Holm-corrected)", "quantity",
		output.Col("unit", "unit", ""), output.Col("model", "model", ""), output.Col("data", "data", ""), output.Col("interval", pct(level)+" interval", ""),
		output.Col("test", "test", ""), output.Col("p", "p", ""), output.Col("holm_p", "Holm p", ""), output.Col("z", "z", ""), output.Col("reading", "reading", ""))
	for _, a := range rows {
		reading := fmt.Sprintf("no evidence of a departure (Holm p = %s)", pval(a.Check.Adjusted))
		switch {
		case math.IsNaN(a.Test.P):
			reading = "not tested: " + a.Test.Note
		case a.Check.Reject:
			reading = fmt.Sprintf("evidence (Holm p = %s <= %.3g) that the data depart from the model", pval(a.Check.Adjusted), 1-level)
		}
		if a.Test.Note != "" && !math.IsNaN(a.Test.P) {
			reading += "; " + a.Test.Note
		}
		data := output.Num(a.Data.Value)
		if a.Data.Undefined {
			why := a.Data.Note
			if why == "" {
				why = "undefined"
			}
			data = output.Undefined(why)
		}
		key, label, unit := againstKey(a.Quantity, u)
		ct.Add(key, label, text(unit), output.Num(a.Model), data, output.Interval(a.Data.Lo, a.Data.Hi, level, a.Data.Method), text(a.Test.Method),
			output.P(a.Test.P), output.P(a.Check.Adjusted), output.Num(a.Test.Z), output.Text(reading))
	}
	r.Add(ct)
	r.Notes = append(r.Notes, notes...)
	r.Note("each test keeps its level with small counts and gives a finite z, the normal score of its two-sided p; the tests form one family corrected by Holm's step-down procedure (Holm, Scand. J. Stat. 6, 65 (1979)), so the chance that any fires when the model is right is at most %.3g%%", 100*(1-level))
	r.Note("agreement on these does not make the model true")
	return nil
}
