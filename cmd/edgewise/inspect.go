package main

import (
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"io"
	"math"
	"os"
	"strconv"
	"strings"

	"edgewise/infer"
	"edgewise/likelihood"
)

const inspectHelp = `Usage: edgewise inspect RECORDS.csv [options]

Model-free look at records of visible transitions (CSV or TSV with columns
time and label, optional record; '#' lines are comments; a row labelled
"end" gives a record's end time; "-" reads standard input):

  - counts and rates of each label, the visible current J = (n+ - n-)/time
    and the activity, and the current's diffusion coefficient D, half the
    long-time slope of Var c(t) = a + 2Dt (the same estimator, block
    bootstrap and seed as 'fluct --bounds', so with the same --boot and
    --seed both print the same D and interval); also the Fano
    factor Var c(t)/|mean c(t)| at one window length, --window events on
    average (it includes the window's boundary offset a/(|J| t));
  - P(l'|l), the probability that an l event is followed by l', with exact
    (Clopper-Pearson) intervals;
  - the effective affinity F = ln[P(+|+)/P(-|-)] (k_BT), with a delta-method
    interval and a block bootstrap one, and the bound the data support when
    a pair was never seen;
  - inter-transition times per pair (count, mean, median, coefficient of
    variation);
  - the shape test: are the ++ and -- gap distributions the same after
    scaling each by its mean?
  - assumption checks: first- against second-order Markov dependence of the
    labels, and drift within and between records.

For a state trace (columns time and state) use --trace: each change of
state X -> Y becomes an event labelled "X>Y" (rename with --rename).

Example:
  edgewise inspect testdata/ring3-demo.csv --per-record --seed 1
  edgewise simulate testdata/ring3.toml -n 2000 | edgewise inspect - --format markdown
  edgewise inspect trace.csv --trace --rename 'open>closed=-,closed>open=+'

Options:
`

func cmdInspect(args []string, stdout, stderr io.Writer) int {
	fs := newFlags("inspect", inspectHelp, args, stdout, stderr)
	format := fs.StringP("format", "f", "table", "output format: "+formats)
	rf := addRecordFlags(fs)
	perRecord := fs.Bool("per-record", false, "also show each record on its own")
	window := fs.Float64("window", 50, "mean events per window of the Fano factor")
	boot := fs.Int("boot", infer.DefaultDiffusionBoot, "bootstrap replicates, for F, J, the activity and D (0: delta method only)")
	shapeBoot := fs.Int("shape-resamples", 199, "null resamples calibrating the shape test (0: none; skipped above 10^6 gaps)")
	seed := fs.Uint64P("seed", "s", 1, "random seed of the bootstrap")
	out := fs.StringP("output", "o", "-", "output file (- for standard output)")
	force := fs.Bool("force", false, "overwrite an existing output file")
	if code := parseFlags(fs, args); code >= 0 {
		return code
	}
	if fs.NArg() != 1 {
		fs.Usage()
		return 2
	}
	if *boot < 0 || *shapeBoot < 0 || !(*window > 0) {
		return usageError(stderr, "inspect", "--boot and --shape-resamples must be >= 0 and --window > 0")
	}
	if err := rf.checkLevel(); err != nil {
		return usageError(stderr, "inspect", "%v", err)
	}
	plus, minus, err := rf.edgeLabels()
	if err != nil {
		return usageError(stderr, "inspect", "%v", err)
	}
	if !validFormat(*format) {
		fmt.Fprintf(stderr, "edgewise: unknown format %q (want %s)\n", *format, formats)
		return 2
	}
	opt, err := rf.readOptions()
	if err != nil {
		return usageError(stderr, "inspect", "%v", err)
	}
	if err := checkOutput(*out, *force); err != nil {
		fmt.Fprintf(stderr, "edgewise: %v\n", err)
		return 1
	}
	path := fs.Arg(0)
	d, rep, sum, err := readInput(path, os.Stdin, opt)
	if err != nil {
		fmt.Fprintf(stderr, "edgewise: %v\n", err)
		return 1
	}
	if err := d.PutFirst(plus, minus); err != nil { // tables list the visible edge's labels first
		fmt.Fprintf(stderr, "edgewise: %v\n", err)
		return 1
	}
	r, err := inspectReport(d, rep, inspectConfig{plus: plus, minus: minus, level: *rf.level, perRecord: *perRecord, window: *window, boot: *boot, dboot: *boot, shapeBoot: *shapeBoot, seed: *seed})
	if err != nil {
		fmt.Fprintf(stderr, "edgewise: %v\n", err)
		return 1
	}
	r.Input, r.Checksum = path, sum
	r.Command = "inspect " + strings.Join(args, " ")
	r.Seed = strconv.FormatUint(*seed, 10)
	if path == "-" {
		r.Input = "stdin"
	}
	if err := emit(*out, *force, stdout, func(w io.Writer) error { return r.write(w, *format) }); err != nil {
		fmt.Fprintf(stderr, "edgewise: %v\n", err)
		return 1
	}
	return 0
}

func differ(significant bool) string {
	if significant {
		return "the shapes differ"
	}
	return "no significant difference"
}

// readInput reads records from path ("-": stdin), hashing the bytes read;
// for a file the size goes to the reader, which then sizes its event
// slices once.
func readInput(path string, stdin io.Reader, opt infer.ReadOptions) (*likelihood.Data, *infer.ReadReport, string, error) {
	var src io.Reader
	name := path
	if path == "-" {
		src, name = stdin, "stdin"
	} else {
		f, err := os.Open(path)
		if err != nil {
			return nil, nil, "", err
		}
		defer f.Close()
		src = f
		if fi, err := f.Stat(); err == nil {
			opt.SizeHint = fi.Size()
		}
	}
	h := sha256.New()
	d, rep, err := infer.ReadRecords(io.TeeReader(src, h), name, opt)
	if err != nil {
		return nil, nil, "", err
	}
	// Hash whatever the reader left unread, so that the checksum is the
	// input's whatever the reader does.
	if _, err := io.Copy(h, src); err != nil {
		return nil, nil, "", fmt.Errorf("%s: %w", name, err)
	}
	return d, rep, hex.EncodeToString(h.Sum(nil)), nil
}

// parseLabelMap parses "a=+,b=-" into a renaming map and the list of new
// names in order of first mention.
func parseLabelMap(s string) (map[string]string, []string, error) {
	m := make(map[string]string)
	var known []string
	seen := make(map[string]bool)
	for _, kv := range strings.Split(s, ",") {
		k, v, ok := strings.Cut(kv, "=")
		k, v = strings.TrimSpace(k), strings.TrimSpace(v)
		if !ok || k == "" || v == "" {
			return nil, nil, fmt.Errorf("%q: want FILE_LABEL=MODEL_LABEL", kv)
		}
		if _, dup := m[k]; dup {
			return nil, nil, fmt.Errorf("label %q renamed twice", k)
		}
		m[k] = v
		if !seen[v] {
			seen[v] = true
			known = append(known, v)
		}
	}
	return m, known, nil
}

type inspectConfig struct {
	plus, minus string
	level       float64
	perRecord   bool
	window      float64
	boot        int
	dboot       int // block-bootstrap replicates of J, activity and D; 0: none
	shapeBoot   int
	seed        uint64
}

func interval(e infer.Estimate) string {
	if math.IsNaN(e.Lo) && math.IsNaN(e.Hi) {
		return "n/a"
	}
	return "[" + num(e.Lo) + ", " + num(e.Hi) + "]"
}

func pval(p float64) string {
	if math.IsNaN(p) {
		return "n/a"
	}
	if p < 1e-300 && p >= 0 {
		return "< 1e-300"
	}
	return strconv.FormatFloat(p, 'g', 3, 64)
}

// inspectReport builds the tables of inspect.
func inspectReport(d *likelihood.Data, rep *infer.ReadReport, c inspectConfig) (*report, error) {
	dboot := c.dboot
	if dboot == 0 {
		dboot = -1 // Summarize: negative means no bootstrap
	}
	s, err := infer.Summarize(d, infer.SummaryOptions{Plus: c.plus, Minus: c.minus, Level: c.level, WindowEvents: c.window, PerRecord: c.perRecord, Seed: c.seed, DiffusionBoot: dboot})
	if err != nil {
		return nil, err
	}
	r := &report{Tool: "edgewise " + version, Command: fmt.Sprintf("inspect (seed %d)", c.seed)}
	p := &s.Pooled
	single := s.Plus >= 0 && s.Minus >= 0
	lvl := fmt.Sprintf("%g%%", 100*s.Level)

	// Data.
	dups := rep.Duplicates()
	kind := "events"
	if rep.Trace {
		kind = "state trace"
	}
	dt := table{Title: "Data read", Columns: []string{"quantity", "value"}, Rows: [][]string{
		{"records", strconv.Itoa(len(d.Records))},
		{"events", strconv.Itoa(p.Events)},
		{"observed time (first event to end)", num(p.Duration)},
		{"records with a known end", strconv.Itoa(p.Ends)},
		{"labels", strings.Join(d.Labels, " ")},
		{"zero gaps (equal timestamps)", strconv.Itoa(dups)},
		{"file kind", kind},
	}}
	if rep.Stamp != "" {
		dt.Rows = append(dt.Rows, []string{"first comment", rep.Stamp})
	}
	tabs := []table{dt}

	// Labels.
	lt := table{Title: "Labels: counts and rates (1/time; Poisson standard errors)", Columns: []string{"label", "count", "rate", "SE", lvl + " interval"}}
	for l, name := range d.Labels {
		e := p.Rates[l]
		lt.Rows = append(lt.Rows, []string{name, strconv.Itoa(p.Counts[l]), num(e.Value), num(e.SE), interval(e)})
	}
	tabs = append(tabs, lt)

	// Current, activity, affinity, fluctuations.
	if single {
		ct := table{Title: "Visible edge: current, activity, fluctuations, effective affinity", Columns: []string{"quantity", "value", "SE", lvl + " interval", "method", "note"}}
		row := func(name string, e infer.Estimate) {
			ct.Rows = append(ct.Rows, []string{name, num(e.Value), num(e.SE), interval(e), e.Method, e.Note})
		}
		pl, mi := c.plus, c.minus
		row(fmt.Sprintf("current J = (n%s - n%s)/time", pl, mi), p.Current)
		row(fmt.Sprintf("activity (n%s + n%s)/time", pl, mi), p.Activity)
		row("diffusion coefficient D of c (1/time), long-time slope", p.Diffusion)
		row(fmt.Sprintf("Fano factor Var c(t)/|mean c(t)| at t = %s (%g events)", num(p.Window), c.window), p.Fano)
		row(fmt.Sprintf("F = ln[P(%s|%s)/P(%s|%s)] (k_BT)", pl, pl, mi, mi), p.Affinity)
		if c.boot > 0 {
			fBoot := infer.EffectiveAffinity(d, uint8(s.Plus), uint8(s.Minus), infer.AffinityOptions{Level: s.Level, Bootstrap: c.boot, Seed: c.seed})
			if fBoot.Method != p.Affinity.Method {
				row("F, bootstrap", fBoot)
			}
		}
		tabs = append(tabs, ct)
	}

	// P(l'|l).
	nt := table{Title: "Next label: P(next | last) with exact binomial intervals", Columns: []string{"last", "next", "pairs", "of", "P", lvl + " interval"}}
	for a, la := range d.Labels {
		row := 0
		for _, v := range p.Pairs[a] {
			row += v
		}
		for b, lb := range d.Labels {
			e := p.Next[a][b]
			nt.Rows = append(nt.Rows, []string{la, lb, strconv.Itoa(p.Pairs[a][b]), strconv.Itoa(row), num(e.Value), interval(e)})
		}
	}
	tabs = append(tabs, nt)

	// Gaps.
	gt := table{Title: "Times between consecutive events, per pair (last -> next)", Columns: []string{"pair", "count", "mean", "median", "CV (sd/mean)"}}
	for a, la := range d.Labels {
		for b, lb := range d.Labels {
			g := p.Gaps[a][b]
			gt.Rows = append(gt.Rows, []string{la + " -> " + lb, strconv.Itoa(g.N), num(g.Mean), num(g.Median), num(g.CV)})
		}
	}
	tabs = append(tabs, gt)

	// Shape test and assumption checks.
	at := table{Title: "Tests", Columns: []string{"test", "statistic", "df", "p", "reading"}}
	if single {
		// Calibrate by resampling when affordable (O(resamples x gaps)).
		so := infer.ShapeOptions{Seed: c.seed}
		nPP, nMM := p.Pairs[s.Plus][s.Plus], p.Pairs[s.Minus][s.Minus]
		if c.shapeBoot > 0 && nPP+nMM <= 1_000_000 {
			so.Bootstrap = c.shapeBoot
		}
		sh, err := infer.ShapeTest(d, uint8(s.Plus), uint8(s.Minus), so)
		if err != nil {
			at.Rows = append(at.Rows, []string{"shape of ++ vs -- gaps", "n/a", "", "n/a", err.Error()})
		} else {
			pKS, pAD := pval(sh.P), sh.AD.PBound+pval(sh.AD.P)
			// Two tests of one hypothesis: each at 2.5% (Bonferroni), so
			// the reading "the shapes differ" has size at most 5%.
			sigKS, sigAD := sh.P < 0.025, sh.AD.P <= 0.025
			how := "asymptotic p, conservative"
			if sh.Exact {
				how = "exact p, conservative"
			}
			if sh.Bootstrap > 0 {
				pKS, pAD = pval(sh.PBoot), pval(sh.ADPBoot)
				sigKS, sigAD = sh.PBoot <= 0.025, sh.ADPBoot <= 0.025
				how = fmt.Sprintf("p from %d null resamples", sh.Bootstrap)
			} else if c.shapeBoot > 0 {
				r.Notes = append(r.Notes, "shape test: too many gaps to calibrate by resampling; its p-values are conservative (they err towards no difference)")
			}
			reading := "no significant difference: consistent with every driven cycle passing through the visible edge and perfect detection (not a proof)"
			if sigKS || sigAD {
				reading = "the shapes differ: this rules out every scheme in which each driven cycle passes through the visible edge with perfect detection (missed events also make the shapes differ)"
			}
			if sh.Note != "" {
				reading += "; " + sh.Note
			}
			at.Rows = append(at.Rows,
				[]string{fmt.Sprintf("shape of ++ (%d) vs -- (%d) gaps, KS distance (%s)", sh.NPlus, sh.NMinus, how), num(sh.D), "", pKS, reading},
				[]string{fmt.Sprintf("shape of ++ vs -- gaps, Anderson-Darling T (%s)", how), num(sh.AD.T), "", pAD, differ(sigAD)})
		}
	}
	mo := infer.MarkovOrderTest(d)
	reading := "no evidence against first-order dependence of the labels"
	if mo.P < 0.05 {
		reading = "evidence at 5% against first-order dependence of the labels: look for spurious events, a label shared by several edges, or hidden memory that no single-edge scheme has"
	}
	if mo.Note != "" {
		reading = mo.Note
	}
	at.Rows = append(at.Rows, []string{fmt.Sprintf("first vs second order Markov, G (%d triplets)", mo.N), num(mo.Stat), strconv.Itoa(mo.DF), pval(mo.P), reading})
	st := infer.StationarityTest(d)
	drift := func(name string, t infer.TestResult, bad, good string) {
		rd := good
		if t.P < 0.05 {
			rd = bad
		}
		if t.Note != "" {
			rd = t.Note
		}
		df := strconv.Itoa(t.DF)
		if math.IsNaN(t.Stat) {
			df = ""
		}
		at.Rows = append(at.Rows, []string{name, num(t.Stat), df, pval(t.P), rd})
	}
	drift("P(next|last), first vs second half of each record, G", st.HalvesNext, "drift within records: pooled estimates mix different conditions", "no evidence of drift")
	drift("mean gap, first vs second half of each record, sum of z^2", st.HalvesGap, "drift within records: pooled estimates mix different conditions", "no evidence of drift")
	drift("P(next|last), between records, G", st.BetweenNext, "records differ: fit them separately or test pooled against per-record fits", "no evidence that records differ")
	drift("mean gap, between records, Cochran Q", st.BetweenGap, "records differ: fit them separately or test pooled against per-record fits", "no evidence that records differ")
	tabs = append(tabs, at)

	// Per record.
	if c.perRecord {
		pt := table{Title: "Per record", Columns: []string{"record", "events", "zero gaps", "time", "J", "F", "F SE", fmt.Sprintf("P(%s|%s)", c.plus, c.plus), fmt.Sprintf("P(%s|%s)", c.minus, c.minus), "halves P(next|last) p", "halves mean gap p"}}
		for i, pr := range s.Records {
			id := pr.ID
			if id == "" {
				id = "(one record)"
			}
			pp, pm := "n/a", "n/a"
			if single {
				pp, pm = num(pr.Next[s.Plus][s.Plus].Value), num(pr.Next[s.Minus][s.Minus].Value)
			}
			rs := st.Records[i]
			pt.Rows = append(pt.Rows, []string{id, strconv.Itoa(pr.Events), strconv.Itoa(rep.Records[i].Duplicates), num(pr.Duration), num(pr.Current.Value), num(pr.Affinity.Value), num(pr.Affinity.SE), pp, pm, pval(rs.Next.P), pval(rs.MeanGap.P)})
		}
		tabs = append(tabs, pt)
	}
	r.Tables = tabs

	// Notes.
	r.Notes = append(r.Notes, s.Notes...)
	if dups > 0 {
		r.Notes = append(r.Notes, fmt.Sprintf("%d zero gaps (equal timestamps): exact likelihoods give them no meaningful density; check the clock resolution", dups))
	}
	if len(rep.Ignored) > 0 {
		r.Notes = append(r.Notes, "columns not used: "+strings.Join(rep.Ignored, ", "))
	}
	if rep.Trace {
		r.Notes = append(r.Notes, "state trace: event times are known only to the sampling interval")
	}
	r.Notes = append(r.Notes,
		"all estimates assume the records are stationary and share one process; see the drift tests",
		"tests at the 5% level, each on its own (no correction across tests; the shape test's two statistics share its 5%, 2.5% each)",
		"a scheme consistent with these data is not thereby true; the tests can only rule schemes out",
	)
	return r, nil
}
