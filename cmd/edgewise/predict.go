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
	"edgewise/models"
)

const predictHelp = `Usage: edgewise predict MODEL.toml [options]

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

With --data, the records are set against the model: the log-likelihood
(each record conditioned on its first event), and for P(+|+), P(-|-), F, J
and each slope the data's estimate with its interval, a test of the
model's value that stays finite and keeps its level with small counts
(exact binomial for P(+|+) and P(-|-), exact likelihood ratio for F, the
model's variance for J, the exact law of the score for the slopes), its
p-value and normal score z. The tests form one family corrected by Holm's
step-down procedure: a rejection is evidence, not proof, and a model
consistent with the data is not thereby true.

Example:
  edgewise predict testdata/ring4.toml --data testdata/ring4-demo.csv --windows 5,20

Options:
`

func cmdPredict(args []string, stdout, stderr io.Writer) int {
	fs := newFlags("predict", predictHelp, args, stdout, stderr)
	format := fs.StringP("format", "f", "table", "output format: "+formats)
	data := fs.StringP("data", "d", "", "records to set against the model (CSV or TSV; - for standard input)")
	dead := fs.Float64("dead-time", 0, "instrument dead time after each recorded event (time units)")
	frame := fs.Float64("frame", 0, "frame length of the records' timestamps, for the log-likelihood (time units; 0 = exact times)")
	ns := fs.StringP("windows", "w", "5,20,100", "window lengths of the count-stopped law, comma separated")
	fixed := fs.Bool("fixed-time", false, "add windows of a fixed clock time (n mean gaps) to the slopes")
	rf := addRecordFlags(fs)
	out := fs.StringP("output", "o", "-", "output file (- for standard output)")
	force := fs.Bool("force", false, "overwrite an existing output file")
	if code := parseFlags(fs, args); code >= 0 {
		return code
	}
	if fs.NArg() != 1 {
		fs.Usage()
		return 2
	}
	if !validFormat(*format) {
		fmt.Fprintf(stderr, "edgewise: unknown format %q (want %s)\n", *format, formats)
		return 2
	}
	windows, err := parseInts(*ns)
	if err != nil {
		return usageError(stderr, "predict", "--windows: %v", err)
	}
	for _, n := range windows {
		if n < 2 || n > maxWindow {
			return usageError(stderr, "predict", "--windows: window length %d: want 2 to %d events (the exact law costs n^2 operations)", n, maxWindow)
		}
	}
	if err := checkOutput(*out, *force); err != nil {
		fmt.Fprintf(stderr, "edgewise: %v\n", err)
		return 1
	}
	path := fs.Arg(0)
	src, m, net, err := loadModel(path)
	if err != nil {
		fmt.Fprintf(stderr, "edgewise: %v\n", err)
		return 1
	}
	in := likelihood.Instrument{DeadTime: *dead, Frame: *frame}
	if err := in.Validate(); err != nil {
		return usageError(stderr, "predict", "%v", err)
	}
	k, err := likelihood.NewKernels(net)
	if err != nil {
		fmt.Fprintf(stderr, "edgewise: %v\n", err)
		return 1
	}
	pred, err := likelihood.NewPredictor(k, in)
	if err != nil {
		fmt.Fprintf(stderr, "edgewise: %v\n", err)
		return 1
	}
	if err := rf.checkLevel(); err != nil {
		return usageError(stderr, "predict", "%v", err)
	}
	edge := *rf.edge
	if !fs.Changed("edge") {
		edge = "" // the default "+,-" when the model has it, else any reversed pair
	}
	plus, minus, err := visibleEdge(pred, k.Labels, edge)
	if err != nil {
		return usageError(stderr, "predict", "--edge: %v", err)
	}
	ropt, err := rf.readOptions()
	if err != nil {
		return usageError(stderr, "predict", "%v", err)
	}
	// Data labels (after --rename) must be the model's, in the model's
	// order, so that label indices agree between data and model.
	ropt.Known = k.Labels
	r := &report{Tool: "edgewise " + version, Command: "predict " + strings.Join(args, " "), Input: path, Checksum: checksum(src)}
	var d *likelihood.Data
	var rep *infer.ReadReport
	var markov *infer.TestResult
	if *data != "" {
		var sum string
		d, rep, sum, err = readInput(*data, os.Stdin, ropt)
		if err != nil {
			fmt.Fprintf(stderr, "edgewise: %v\n", err)
			return 1
		}
		r.Input += ", " + *data
		r.Checksum += " " + sum
		mo := infer.MarkovOrderTest(d)
		markov = &mo
	}
	if err := predictTables(r, m, net, k, pred, in, plus, minus, windows, *fixed, markov); err != nil {
		fmt.Fprintf(stderr, "edgewise: %v\n", err)
		return 1
	}
	if d != nil {
		if err := againstData(r, net, pred, d, in, plus, minus, windows, *fixed, *rf.level); err != nil {
			fmt.Fprintf(stderr, "edgewise: %v\n", rep.Locate(err))
			return 1
		}
	}
	r.Notes = append(r.Notes, "predictions at the model's start values; they hold for data taken through the same detection process (detection probabilities, dead time)")
	if err := emit(*out, *force, stdout, func(w io.Writer) error { return r.write(w, *format) }); err != nil {
		fmt.Fprintf(stderr, "edgewise: %v\n", err)
		return 1
	}
	return 0
}

// maxWindow is the longest count-stopped window predict computes.
const maxWindow = 2000

// visibleEdge picks the forward and backward label of the visible edge:
// from "a,b" when given, else "+" and "-" when the model has them and they
// are each other's reverse, else the first label that has a reverse. The
// two labels must sit on exactly reversed transitions. It returns -1, -1
// when there is no such pair.
func visibleEdge(p *likelihood.Predictor, names []string, spec string) (int, int, error) {
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
	for l := range names {
		if r := p.Reverse(l); r >= 0 && r != l {
			return l, r, nil
		}
	}
	return -1, -1, nil
}

func predictTables(r *report, m *models.Model, net *models.Network, k *likelihood.Kernels, p *likelihood.Predictor, in likelihood.Instrument, plus, minus int, windows []int, fixed bool, markov *infer.TestResult) error {
	g := num
	names := k.Labels
	P := p.Transition()
	chain := table{Title: "Predicted next label and gap (time between consecutive events)", Columns: []string{"last", "next", "P(next|last)", "mean gap", "CV of gap"}}
	for l := range names {
		for l2 := range names {
			m1, m2 := p.PsiMoments(l, l2)
			mean, cv := math.NaN(), math.NaN()
			if P[l][l2] > 0 {
				mean = m1 / P[l][l2]
				cv = math.Sqrt(math.Max(m2/P[l][l2]-mean*mean, 0)) / mean
			}
			chain.Rows = append(chain.Rows, []string{names[l], names[l2], g(P[l][l2]), g(mean), g(cv)})
		}
	}
	sum := table{Title: "Predicted rates, current and affinity", Columns: []string{"quantity", "value"}}
	for l, rate := range p.Rates() {
		sum.Rows = append(sum.Rows, []string{"rate of " + names[l] + " (1/time)", g(rate)})
	}
	sum.Rows = append(sum.Rows, []string{"mean time between events", g(p.MeanGap())})
	sigma := net.EntropyProduction(p.Stationary())
	single := true
	for _, es := range k.Edges {
		single = single && len(es) == 1
	}
	tables := []table{chain, sum}
	if plus >= 0 {
		q := make([]float64, len(names))
		q[plus], q[minus] = 1, -1
		J, D, err := p.Current(q)
		if err != nil {
			return err
		}
		F := p.EffectiveAffinity(plus, minus)
		sum.Rows = append(sum.Rows,
			[]string{fmt.Sprintf("current J = rate(%s) - rate(%s) (1/time)", names[plus], names[minus]), g(J)},
			[]string{"diffusion coefficient D of the current (1/time)", g(D)},
			[]string{fmt.Sprintf("effective affinity F = ln[P(%s|%s)/P(%s|%s)] (k_BT)", names[plus], names[plus], names[minus], names[minus]), g(F)},
			[]string{"entropy production sigma of the network (k_B/time)", g(sigma)},
		)
		// The one rule for the bounds (infer.BoundsValid): the model's
		// labels and instrument, and the data's Markov-order test when
		// data are given.
		bv := infer.BoundsValid(markov, infer.BoundConditions{MultiEdge: !single, DetectForward: k.Detect[plus], DetectBackward: k.Detect[minus], DeadTime: in.DeadTime})
		if bv.Hold {
			sum.Rows = append(sum.Rows,
				[]string{"lower bound F*J (k_B/time)", g(F * J)},
				[]string{"lower bound J^2/D (k_B/time)", g(J * J / D)})
		} else {
			r.Notes = append(r.Notes, "F*J and J^2/D are not lower bounds on sigma here, so they are not shown: "+bv.Reason())
		}
		if len(m.Affinities) > 0 {
			r.Notes = append(r.Notes, "the spec imposes cycle affinities (see describe); F is what the visible edge shows of them")
		}
		qi := make([]int, len(names))
		qi[plus], qi[minus] = 1, -1
		cols := []string{"n", "all windows", "post-selected", "post-selected share"}
		if fixed {
			cols = append(cols, "fixed time T", "fixed-time slope")
		}
		cs := table{Title: "Count-stopped law: slope of ln[P_n(c)/P_n(-c)] against c (k_BT)", Columns: append(cols, "F")}
		for _, n := range windows {
			all, err := p.CountStopped(n, qi, false)
			if err != nil {
				return err
			}
			post, err := p.CountStopped(n, qi, true)
			if err != nil {
				return err
			}
			row := []string{strconv.Itoa(n), g(all.SlopeEstimand().Slope), g(post.SlopeEstimand().Slope), g(post.Weight)}
			if fixed {
				T := float64(n) * p.MeanGap()
				ft, err := p.FixedTime(T, qi)
				if err != nil {
					return err
				}
				row = append(row, g(T), g(ft.SlopeEstimand().Slope))
			}
			cs.Rows = append(cs.Rows, append(row, g(F)))
		}
		tables = append(tables, cs)
		r.Notes = append(r.Notes, "count-stopped slopes: the binomial maximum-likelihood slope of ln[P_n(c)/P_n(-c)] = s c (the estimand 'fluct' estimates from data), computed from the model's exact law; post-selected windows give F exactly when the labels are first-order Markov")
	} else {
		sum.Rows = append(sum.Rows, []string{"entropy production sigma of the network (k_B/time)", g(sigma)})
		r.Notes = append(r.Notes, "no pair of labels forms one visible edge: current, F and the count-stopped law are not shown")
	}
	tables[1] = sum
	r.Tables = append(r.Tables, tables...)
	return nil
}

// againstData sets the records against the model's predictions
// (infer.AgainstModel: one Holm-corrected family of tests).
func againstData(r *report, net *models.Network, p *likelihood.Predictor, d *likelihood.Data, in likelihood.Instrument, plus, minus int, windows []int, fixed bool, level float64) error {
	g := num
	ll, err := likelihood.LogLik(net, d, likelihood.Options{Instrument: in})
	if err != nil {
		return err
	}
	gaps := d.Events() - len(d.Records)
	lt := table{Title: "Log-likelihood of the records under the model", Columns: []string{"quantity", "value"}, Rows: [][]string{
		{"records", strconv.Itoa(len(d.Records))},
		{"events", strconv.Itoa(d.Events())},
		{"ln L (nats; each record conditioned on its first event)", g(ll)},
		{"ln L per gap", g(ll / float64(gaps))},
	}}
	r.Tables = append(r.Tables, lt)
	if plus < 0 {
		return nil
	}
	rows, notes, err := infer.AgainstModel(d, p, infer.AgainstOptions{Plus: plus, Minus: minus, Windows: windows, FixedTime: fixed, Level: level})
	if err != nil {
		return err
	}
	pct := fmt.Sprintf("%g%%", 100*level)
	ct := table{Title: "Model against data (one family of tests, Holm-corrected)", Columns: []string{"quantity", "model", "data", pct + " interval", "test", "p", "Holm p", "z", "reading"}}
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
		data := g(a.Data.Value)
		if a.Data.Undefined {
			data = "n/a"
		}
		ct.Rows = append(ct.Rows, []string{a.Quantity, g(a.Model), data, interval(a.Data), a.Test.Method, pval(a.Test.P), pval(a.Check.Adjusted), g(a.Test.Z), reading})
	}
	r.Tables = append(r.Tables, ct)
	r.Notes = append(r.Notes, notes...)
	r.Notes = append(r.Notes,
		"each test keeps its level with small counts and gives a finite z, the normal score of its two-sided p; the tests form one family corrected by Holm's step-down procedure (Holm, Scand. J. Stat. 6, 65 (1979)), so the chance that any fires when the model is right is at most "+fmt.Sprintf("%.3g%%", 100*(1-level)),
		"agreement on these does not make the model true")
	return nil
}
