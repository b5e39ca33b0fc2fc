package main

import (
	"bytes"
	"fmt"
	"io"
	"math"
	"os"
	"strings"

	"edgewise/cmd/edgewise/internal/output"
	"edgewise/infer"
	"edgewise/likelihood"
	"edgewise/models"

	"gonum.org/v1/plot"
)

const fitHelp = `Usage: edgewise fit RECORDS.csv MODEL.toml [options]

Fits a hidden kinetic network to records by exact maximum likelihood: the
log-likelihood of every gap and label given the history, maximised over
the spec's free parameters (log-rates, and logit detection probabilities
when a label's detection is a parameter), with its ties, fixed values,
bounds and affinity constraints held exactly.

The search starts from the spec's values, a copy rescaled to the data's
mean gap, data-informed starts and random ones (--starts, --seed), runs
BFGS with the exact gradient from each in parallel, and keeps every
distinct local maximum with the number of starts that reached it. With
many events the starts run on a subsample of blocks spread over the
records, and the distinct optima are then refined on all the data.
Results do not depend on the number of workers.

Uncertainty: standard errors from the observed information (on log and
linear scale), profile-likelihood intervals (on by default up to 12 free
parameters; --profile / --no-profile), and the directions the data do not
determine, named in the parameters ("only kbc*kda/kcb is determined"):
such parameters get no interval and do not count in the effective number
of parameters that AIC and BIC use (n = number of gaps). Derived
quantities (sigma, F, J, cycle affinities, edge currents, mean gap after
each label) come with delta-method intervals.

Least dissipation: --profile-quantity sigma,F,affinities gives the
profile-likelihood interval of the entropy production rate sigma (its lower
end is the least dissipation the data do not reject within the scheme; 0
when an equilibrium member fits, and then the data do not prove driving),
of F under the instrument and of every cycle affinity, beside the data's
model-free lower bounds where they hold; --profile-plot draws the profiles.
--bootstrap B refits B data sets simulated from the fitted model.

--model-out writes the fitted model back as a spec that describe, predict
and simulate accept. --plot draws the data's gap densities per label pair
with the fitted psi curves over them. Ctrl-C stops the search and reports
the best maximum found so far, marked as interrupted.

A fitted model is the best member of its scheme, not proof of the scheme:
compare schemes with 'edgewise compare'.

Example:
  edgewise fit testdata/ring4-demo.csv testdata/ring4.toml --starts 8 --model-out fitted.toml
  edgewise fit testdata/ring4-demo.csv testdata/ring4.toml --profile-quantity sigma --profile-plot sigma.pdf

Options:
`

// maxAutoProfile is the largest number of free parameters for which
// profile intervals are computed without --profile.
const maxAutoProfile = 12

func cmdFit(args []string, stdout, stderr io.Writer) int {
	c := newCommand("fit", fitHelp, args, stdout, stderr)
	ff := c.addFitFlags(8)
	profile := c.fs.Bool("profile", false, "profile-likelihood intervals for every free parameter (default: on up to 12 free parameters)")
	noProfile := c.fs.Bool("no-profile", false, "no profile-likelihood intervals")
	boot := c.fs.Int("bootstrap", 0, "parametric bootstrap: refit this many data sets simulated from the fitted model (0: none; at least 20)")
	modelOut := c.fs.String("model-out", "", "write the fitted model as a spec (TOML) to this file")
	plotPath := c.fs.String("plot", "", "write the gap densities with the fitted psi curves to this file (.png, .svg, .pdf)")
	figWidth := c.fs.Float64("figure-width", 89, "figure width in mm: 89 for one journal column, 183 for the page width")
	qf := addQuantityFlags(c.fs)
	rf := addRecordFlags(c.fs)
	c.outputFlags(true)
	c.timeUnitFlag()
	if code := c.parse(); code >= 0 {
		return code
	}
	if c.fs.NArg() != 2 {
		return c.usage("want RECORDS MODEL, got %d arguments", c.fs.NArg())
	}
	recPath, modelPath := c.fs.Arg(0), c.fs.Arg(1)
	if _, err := c.outputFormat(); err != nil {
		return c.usage("%v", err)
	}
	if err := checkTimeUnit(*c.timeUnit); err != nil {
		return c.usage("%v", err)
	}
	if err := ff.check(); err != nil {
		return c.usage("%v", err)
	}
	if *boot != 0 && (*boot < 20 || *boot > 100000) {
		return c.usage("--bootstrap %d: want 0 (none) or 20 to 100000 replicates", *boot)
	}
	if *profile && *noProfile {
		return c.usage("--profile and --no-profile together")
	}
	if err := rf.checkLevel(); err != nil {
		return c.usage("%v", err)
	}
	if err := qf.check(*figWidth); err != nil {
		return c.usage("%v", err)
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
	for _, cl := range [][2]string{{"-o", *c.out}, {"--model-out", *modelOut}, {"--plot", *plotPath}, {"--profile-plot", *qf.plot}} {
		if cl[1] == "" {
			continue
		}
		if err := files.Claim(cl[0], cl[1]); err != nil {
			return c.fail(1, err)
		}
	}
	src, m, net, err := loadModel(modelPath)
	if err != nil {
		return c.fail(1, err)
	}
	if sniffFile(recPath) == "spec" {
		return c.fail(2, &kindError{path: recPath, is: specKind, want: recordsKind})
	}
	ropt, err := rf.readOptions()
	if err != nil {
		return c.usage("%v", err)
	}
	rin, err := c.readRecords(recPath, os.Stdin, ropt)
	if err != nil {
		return c.fail(1, err)
	}
	if err := checkLabels(rin, net); err != nil {
		return c.fail(1, err)
	}
	ins, notes, err := ff.instrument(c, rin)
	if err != nil {
		return c.fail(1, err)
	}
	opt := ff.options(ins)
	opt.Level = *rf.level
	nfree := len(m.Free())
	opt.Profile = (*profile || nfree <= maxAutoProfile) && !*noProfile
	ctx, stop := interruptible()
	defer stop()
	opt.Context = ctx
	pb := c.progress(-1, "fitting "+m.Name, false)
	opt.Progress = func(stage string, done, total int) { pb.add(1) }
	res, err := infer.Fit(m, rin.d, opt)
	pb.finish()
	if err != nil {
		stop()
		return c.fail(1, rin.rep.Locate(err))
	}
	var bres *infer.BootResult
	var bootErr error
	if *boot > 0 && !res.Interrupted {
		bp := c.progress(int64(*boot), "bootstrap", false)
		bres, bootErr = infer.BootstrapFit(res, rin.d, infer.BootOptions{Replicates: *boot, Seed: *ff.seed, Workers: *ff.workers, Context: ctx, Progress: func(int, int) { bp.add(1) }})
		bp.finish()
	}
	stop()
	unit, unitNote := c.resolveTimeUnit(m.TimeUnit, rin.stamp["time_unit"])
	notes = append(notes, nonEmpty(unitNote)...)
	inputs := []output.Input{rin.input(), {Name: modelPath, SHA256: checksum(src)}}
	r := c.newReport(inputs, output.SeedOf(*ff.seed), unit)
	r.Notes = notes
	derived, derr := infer.DerivedQuantities(res, infer.DerivedOptions{Instrument: ins, Level: opt.Level})
	fitTables(r, res, derived, unit, opt)
	if derr != nil {
		r.Note("derived quantities not computed: %v", derr)
	}
	if bres != nil {
		bootTable(r, bres, unit)
	}
	if bootErr != nil {
		r.Note("parametric bootstrap not made: %v", bootErr)
	}
	if err := quantityProfiles(c, files, r, res, rin.d, ins, unit, qf, *figWidth); err != nil {
		return c.fail(1, rin.rep.Locate(err))
	}
	var fitted *models.Model
	if *modelOut != "" || *plotPath != "" {
		fitted = fittedModel(res)
	}
	if *modelOut != "" {
		var buf bytes.Buffer
		if err := fitted.Write(&buf); err != nil {
			return c.fail(1, err)
		}
		if err := files.Write(*modelOut, func(w io.Writer) error {
			fmt.Fprintf(w, "# fitted by edgewise %s fit %s %s; ln L = %.6f; seed %d\n", version, rin.name, modelPath, res.LogLik, *ff.seed)
			_, err := w.Write(buf.Bytes())
			return err
		}); err != nil {
			return c.fail(1, err)
		}
	}
	if *plotPath != "" {
		if err := fitFigure(files, *plotPath, rin.d, res, ins, unit, *figWidth); err != nil {
			return c.fail(1, err)
		}
	}
	if err := c.emitReport(files, r); err != nil {
		return c.fail(1, err)
	}
	return 0
}

// checkLabels refuses records whose labels the model does not have.
func checkLabels(in *recordsInput, net *models.Network) error {
	var missing, have []string
	for _, l := range net.Labels {
		have = append(have, fmt.Sprintf("%q", l.Name))
	}
	for _, l := range in.d.Labels {
		if net.LabelIndex(l) < 0 {
			missing = append(missing, fmt.Sprintf("%q", l))
		}
	}
	if len(missing) > 0 {
		return fmt.Errorf("%s: the records carry label(s) %s, which the model does not have (its labels: %s); rename them with --rename", in.name, strings.Join(missing, ", "), strings.Join(have, ", "))
	}
	return nil
}

// fittedModel is the model with its free parameters at the fitted values.
func fittedModel(res *infer.FitResult) *models.Model {
	mm := *res.Model
	mm.Params = append([]models.Param(nil), res.Model.Params...)
	for i := range mm.Params {
		for j, n := range res.Free {
			if mm.Params[i].Name == n {
				mm.Params[i].Value = res.X[j]
			}
		}
	}
	if !strings.HasSuffix(mm.Name, "-fitted") {
		mm.Name += "-fitted"
	}
	return &mm
}

// fitTables adds the fit's tables to r.
func fitTables(r *output.Report, res *infer.FitResult, derived []infer.Derived, u output.TimeUnit, opt infer.FitOptions) {
	level := res.Level
	if len(res.Free) == 0 {
		st := output.NewTable("summary", "Log-likelihood of the records (no free parameter: nothing fitted)", "quantity", output.Col("value", "value", ""))
		st.Add("log_likelihood", "ln L (nats)", output.Fixed(res.LogLik, 2))
		st.Add("events", "events", output.Count(res.Events))
		st.Add("records", "records", output.Count(res.Records))
		st.Add("gaps", "gaps n", output.Count(res.Gaps))
		st.Add("AIC", "AIC = -2 ln L (k = 0)", output.Fixed(res.AIC(), 2))
		st.Add("BIC", "BIC = -2 ln L (k = 0)", output.Fixed(res.BIC(), 2))
		r.Add(st)
		for _, w := range res.Warnings {
			r.Note("%s", w)
		}
		return
	}
	pt := output.NewTable("parameters", "Fitted parameters", "parameter",
		output.Col("value", "value", ""), output.Col("unit", "unit", ""),
		output.Col("se_log", "SE of ln", ""), output.Col("se", "SE", ""),
		output.Col("interval", pct(level)+" interval", ""), output.Col("status", "status", ""))
	for _, p := range res.Params {
		unit := u.Rate()
		if p.Kind == models.DetectParam {
			unit = ""
		}
		se, seLog := output.Num(p.SE), output.Num(p.SELog)
		iv := output.Undefined("not computed (--profile)")
		status := "determined"
		if !p.Determined {
			se, seLog = output.Undefined("not determined by the data"), output.Undefined("not determined by the data")
			iv = output.Undefined("not determined by the data: no finite interval")
			status = "NOT determined"
		}
		if p.Profile != nil {
			iv = profileCell(p.Profile)
		}
		switch p.AtBound {
		case "":
		case "near zero":
			status = "near zero: interval reaches 0"
		default:
			status += "; at " + p.AtBound
		}
		if res.Ident == nil {
			se, seLog = output.Undefined("no information matrix"), output.Undefined("no information matrix")
			status = "unknown"
		}
		pt.Add(output.Key(p.Name), p.Name, output.Num(p.Value), output.Text(unit), seLog, se, iv, output.Text(status))
	}
	r.Add(pt)

	st := output.NewTable("summary", "Fit summary", "quantity", output.Col("value", "value", ""))
	st.Add("log_likelihood", "ln L (nats)", output.Fixed(res.LogLik, 2))
	st.Add("events", "events", output.Count(res.Events))
	st.Add("records", "records", output.Count(res.Records))
	st.Add("gaps", "gaps n (for AICc and BIC)", output.Count(res.Gaps))
	st.Add("free_parameters", "free parameters", output.Count(len(res.Free)))
	st.Add("effective_parameters", "effective parameters k", output.Count(res.Effective()))
	st.Add("AIC", "AIC = 2k - 2 ln L", output.Fixed(res.AIC(), 2))
	st.Add("AICc", "AICc", output.Fixed(res.AICc(), 2))
	st.Add("BIC", "BIC = k ln n - 2 ln L", output.Fixed(res.BIC(), 2))
	st.Add("optima", "distinct optima found", output.Count(len(res.Optima)))
	conv := 0
	for _, s := range res.Starts {
		if s.Converged {
			conv++
		}
	}
	st.Add("starts_converged", fmt.Sprintf("starts converged (of %d)", len(res.Starts)), output.Count(conv))
	if res.Explored {
		st.Add("explore_gaps", "gaps of the exploration subsample", output.Count(res.ExploreGaps))
	}
	if res.Interrupted {
		st.Add("interrupted", "interrupted", output.Text("yes: the best optimum found so far"))
	}
	r.Add(st)

	ot := output.NewTable("optima", "Distinct local maxima (best first)", "optimum",
		output.Col("log_likelihood", "ln L", "nats"), output.Col("delta", "ln L below the best", "nats"),
		output.Col("starts", "starts", ""), output.Col("status", "status", ""))
	for i, o := range res.Optima {
		status := o.Status
		if o.Equivalent {
			status += "; equivalent points (symmetry or ridge)"
		}
		ot.Add(fmt.Sprintf("optimum_%d", i+1), fmt.Sprint(i+1), output.Fixed(o.LogLik, 2), output.Fixed(res.LogLik-o.LogLik, 2), output.Count(o.Starts), output.Text(status))
	}
	r.Add(ot)

	sr := output.NewTable("starts", "Starts", "start",
		output.Col("kind", "kind", ""), output.Col("log_likelihood", "ln L at the end", "nats"),
		output.Col("iterations", "iterations", ""), output.Col("evaluations", "evaluations", ""),
		output.Col("optimum", "optimum", ""), output.Col("status", "status", ""))
	for i, s := range res.Starts {
		opt := output.Undefined("did not converge")
		if s.Optimum >= 0 {
			opt = output.Count(s.Optimum + 1)
		}
		ll := output.Fixed(s.LogLik, 2)
		if math.IsInf(s.LogLik, 0) || math.IsNaN(s.LogLik) {
			ll = output.Undefined("not evaluable")
		}
		sr.Add(fmt.Sprintf("start_%d", i+1), fmt.Sprint(i+1), output.Text(s.Kind.String()), ll, output.Count(s.Iter), output.Count(s.Evals), opt, output.Text(s.Status))
	}
	if res.Explored {
		sr.Note("ln L of the starts is on the exploration subsample (%d gaps); the optima table gives it on all the data", res.ExploreGaps)
	}
	r.Add(sr)

	if len(derived) > 0 {
		dt := output.NewTable("derived", "Derived quantities of the fitted model", "quantity",
			output.Col("value", "value", ""), output.Col("unit", "unit", ""), output.Col("se", "SE", ""),
			output.Col("interval", pct(level)+" interval", ""))
		for _, d := range derived {
			unit := strings.NewReplacer("1/time", u.Rate(), "k_B/time", u.Entropy(), "time", u.Time()).Replace(d.Unit)
			if d.Unit == "1" {
				unit = ""
			}
			se, iv := output.Num(d.SE), output.Interval(d.Lo, d.Hi, level, "delta method")
			switch {
			case math.IsNaN(d.Value) || math.IsInf(d.Value, 0):
				se, iv = output.Undefined(d.Method), output.Undefined(d.Method)
			case !d.Determined:
				se, iv = output.Undefined("not determined by the data"), output.Undefined("not determined by the data")
			}
			dt.Add(output.Key(d.Name), d.Name, output.Num(d.Value), output.Text(unit), se, iv)
		}
		dt.Note("delta-method intervals are symmetric by construction; near sigma = 0 or an affinity of 0 a profile interval is the better statement")
		r.Add(dt)
	}
	if res.Ident != nil {
		for _, s := range res.Ident.Statements {
			r.Note("identifiability: %s", s)
		}
	}
	for _, w := range res.Warnings {
		r.Note("%s", w)
	}
	r.Note("intervals: profile likelihood where computed (chi-square(1) threshold, Venzon and Moolgavkar 1988), else none; SEs from the observed information (central differences of the exact gradient); parameters the data do not determine count as 0 in k")
	r.Note("a model that fits is the best member of its scheme, not proof of the scheme")
}

// profileCell shows a profile interval, one-sided or unbounded when it is.
func profileCell(p *infer.ProfileInterval) output.Cell {
	lo, hi := p.Lower, p.Upper
	method := "profile likelihood"
	switch {
	case p.LowerOpen && p.UpperOpen:
		method += "; unbounded on both sides"
	case p.LowerOpen:
		method += "; open below: the data set no lower limit"
	case p.UpperOpen:
		method += "; open above: the data set no upper limit"
	}
	if p.HigherMax > 0.01 {
		method += fmt.Sprintf("; profiling met ln L %.2f above the fit's maximum", p.HigherMax)
	}
	c := output.Interval(lo, hi, p.Level, method)
	if p.LowerOpen || p.UpperOpen {
		c = c.WithNote(method)
	}
	return c
}

// fitFigure writes the gap densities per label pair with the fitted psi
// curves over them.
func fitFigure(files *output.Files, path string, d *likelihood.Data, res *infer.FitResult, ins likelihood.Instrument, u output.TimeUnit, width float64) error {
	net, err := res.Model.Network(res.X)
	if err != nil {
		return err
	}
	k, err := likelihood.NewKernels(net)
	if err != nil {
		return err
	}
	pred, err := likelihood.NewPredictor(k, ins)
	if err != nil {
		return err
	}
	psi := func(a, b string, t []float64) []float64 {
		la, lb := net.LabelIndex(a), net.LabelIndex(b)
		if la < 0 || lb < 0 {
			return nil
		}
		return pred.Psi(la, lb, t)
	}
	p, err := gapPanel(d, u, psi)
	if err != nil {
		return err
	}
	p.Title.Text = "gap densities psi_{l->l'}(t): data (points) and the fitted model (dashed)"
	return writeFigure(files, path, []*plot.Plot{p}, width)
}

// bootTable shows the parametric-bootstrap percentile intervals.
func bootTable(r *output.Report, b *infer.BootResult, u output.TimeUnit) {
	t := output.NewTable("bootstrap", fmt.Sprintf("Parametric bootstrap (%d replicates, seed %d)", b.Replicates, b.Seed), "quantity",
		output.Col("value", "estimate", ""), output.Col("sd", "bootstrap SD", ""),
		output.Col("interval", pct(b.Level)+" percentile interval", ""), output.Col("n", "replicates used", ""))
	add := func(bi infer.BootInterval) {
		sd, iv := output.Num(bi.SD), output.Interval(bi.Lo, bi.Hi, b.Level, "parametric bootstrap, percentile")
		if bi.N < 2 {
			sd, iv = output.Undefined("fewer than 2 finite replicates"), output.Undefined("fewer than 2 finite replicates")
		}
		t.Add(output.Key(bi.Name), bi.Name, output.Num(bi.Value), sd, iv, output.Count(bi.N))
	}
	for _, p := range b.Params {
		add(p)
	}
	for _, d := range b.Derived {
		add(d)
	}
	if b.Failed > 0 {
		t.Note("%d replicates failed to fit and are left out", b.Failed)
	}
	t.Note("data sets simulated from the fitted model with the records' structure (records and events per record) through the same instrument, each refitted from the fitted values")
	r.Add(t)
}
