package main

import (
	"errors"
	"fmt"
	"image/color"
	"io"
	"io/fs"
	"math"
	"os"
	"path/filepath"
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

// The --report folder of compare and merge: the report in every format,
// the figures as PNG and PDF, and a plain-language summary.

// reportTables are the report's files in each format.
var reportTables = []struct {
	name   string
	format output.Format
}{{"table.txt", output.Terminal}, {"table.md", output.Markdown}, {"table.tex", output.LaTeX}, {"table.csv", output.CSV}, {"table.json", output.JSON}}

// reportFigures are the figures, each written as .png and .pdf.
var reportFigures = []string{"gaps", "fluct", "weights"}

// reportTop is the number of best candidates drawn in the figures.
const reportTop = 3

// reportFiles lists every file of a report folder.
func reportFiles() []string {
	var out []string
	for _, t := range reportTables {
		out = append(out, t.name)
	}
	for _, f := range reportFigures {
		out = append(out, f+".png", f+".pdf")
	}
	return append(out, "summary.md")
}

// claimReportDir checks, before any work, that dir is a folder that does
// not exist yet (its parent must) or is empty, or force is set; it makes
// the folder and claims its files. The returned function removes the
// folder again if this call made it and it is still empty (after a
// failure); call it on every return.
func claimReportDir(files *output.Files, dir string, force bool) (func(), error) {
	none := func() {}
	fi, err := os.Stat(dir)
	made := false
	switch {
	case err == nil && !fi.IsDir():
		return none, fmt.Errorf("--report %s: not a folder", dir)
	case err == nil && !force:
		ents, err := os.ReadDir(dir)
		if err != nil {
			return none, fmt.Errorf("--report %s: %w", dir, err)
		}
		if len(ents) > 0 {
			return none, fmt.Errorf("--report %s: the folder is not empty; use --force to write into it", dir)
		}
	case errors.Is(err, fs.ErrNotExist):
		if err := os.Mkdir(dir, 0o755); err != nil {
			return none, fmt.Errorf("--report: %w", err)
		}
		made = true
	case err != nil:
		return none, fmt.Errorf("--report %s: %w", dir, err)
	}
	cleanup := func() {
		if made {
			os.Remove(dir) // only when empty
		}
	}
	for _, f := range reportFiles() {
		if err := files.Claim("--report", filepath.Join(dir, f)); err != nil {
			cleanup()
			return none, err
		}
	}
	return cleanup, nil
}

// writeReportDir writes the report folder: r in every format, the
// figures drawn from the records of p and the best candidates of v, and
// summary.md.
func writeReportDir(files *output.Files, dir string, r *output.Report, v *cmpView, p *comparePrep) error {
	for _, t := range reportTables {
		if err := files.Write(filepath.Join(dir, t.name), func(w io.Writer) error { return output.Render(w, r, t.format, output.Options{}) }); err != nil {
			return err
		}
	}
	figs := map[string]func() ([]*plot.Plot, error){
		"gaps":    func() ([]*plot.Plot, error) { return gapFigures(v, p) },
		"fluct":   func() ([]*plot.Plot, error) { return fluctFigures(v, p) },
		"weights": func() ([]*plot.Plot, error) { return weightFigure(v) },
	}
	for _, name := range reportFigures {
		for _, ext := range []string{".png", ".pdf"} {
			plots, err := figs[name]()
			if err != nil {
				return fmt.Errorf("--report: %s: %w", name, err)
			}
			width := map[string]float64{"gaps": 89, "fluct": 183, "weights": 120}[name]
			if err := writeFigure(files, filepath.Join(dir, name+ext), plots, width); err != nil {
				return err
			}
		}
	}
	return files.Write(filepath.Join(dir, "summary.md"), func(w io.Writer) error {
		_, err := io.WriteString(w, plainSummary(r, v))
		return err
	})
}

// topModel is a best candidate with its predictor.
type topModel struct {
	c    *rankedCand
	net  interface{ LabelIndex(string) int }
	pred *likelihood.Predictor
}

// topModels returns the predictors of the best fitted candidates (at most
// reportTop), under the instrument of the comparison.
func topModels(v *cmpView, in likelihood.Instrument) ([]topModel, error) {
	var out []topModel
	for i := range v.Ranked {
		c := &v.Ranked[i]
		if c.Status != candFitted || len(out) == reportTop {
			continue
		}
		net, err := c.model.Network(floats(c.X))
		if err != nil {
			return nil, fmt.Errorf("%s: %w", c.Name, err)
		}
		k, err := likelihood.NewKernels(net)
		if err != nil {
			return nil, fmt.Errorf("%s: %w", c.Name, err)
		}
		pred, err := likelihood.NewPredictor(k, in)
		if err != nil {
			return nil, fmt.Errorf("%s: %w", c.Name, err)
		}
		out = append(out, topModel{c: c, net: net, pred: pred})
	}
	return out, nil
}

// gapFigures draws the records' gap densities per label pair, one panel
// per best candidate with its psi over them; without a fitted candidate,
// the data alone.
func gapFigures(v *cmpView, p *comparePrep) ([]*plot.Plot, error) {
	tops, err := topModels(v, p.opt.Fit.Likelihood.Instrument)
	if err != nil {
		return nil, err
	}
	u := output.TimeUnit(p.setup.TimeUnit)
	if len(tops) == 0 {
		pl, err := gapPanel(p.rin.d, u, nil)
		if err != nil {
			return nil, err
		}
		pl.Title.Text = "gap densities psi_{l->l'}(t) of the records (no candidate fitted)"
		return []*plot.Plot{pl}, nil
	}
	var out []*plot.Plot
	for _, tm := range tops {
		psi := func(a, b string, t []float64) []float64 {
			la, lb := tm.net.LabelIndex(a), tm.net.LabelIndex(b)
			if la < 0 || lb < 0 {
				return nil
			}
			return tm.pred.Psi(la, lb, t)
		}
		pl, err := gapPanel(p.rin.d, u, psi)
		if err != nil {
			return nil, err
		}
		pl.Title.Text = fmt.Sprintf("records (points) and %s (dashed)", tm.c.Name)
		out = append(out, pl)
	}
	return out, nil
}

// fluctFigures draws, per window length, the records' ln[P_n(c)/P_n(-c)]
// over all windows with each best candidate's exact count-stopped law
// (Predictor.CountStopped) over them.
func fluctFigures(v *cmpView, p *comparePrep) ([]*plot.Plot, error) {
	ev := p.opt.Evidence
	fl, err := infer.FluctuationTest(p.rin.d, ev.Windows, infer.FluctOptions{Labels: infer.EdgeLabels{Forward: ev.Plus, Backward: ev.Minus}, Level: ev.Level, Boot: 1})
	if err != nil {
		return nil, err
	}
	tops, err := topModels(v, p.opt.Fit.Likelihood.Instrument)
	if err != nil {
		return nil, err
	}
	var out []*plot.Plot
	for _, r := range fl {
		pl, err := fluctPanel(r, true, false)
		if err != nil {
			return nil, err
		}
		if len(r.Raw.Points) == 0 {
			out = append(out, pl)
			continue
		}
		ylo, yhi := 0.0, 0.0
		for _, pt := range r.Raw.Points {
			ylo, yhi = math.Min(ylo, pt.Lo), math.Max(yhi, pt.Hi)
		}
		for i, tm := range tops {
			q := make([]int, tm.pred.NumLabels())
			a, b := tm.net.LabelIndex(ev.Plus), tm.net.LabelIndex(ev.Minus)
			if a < 0 || b < 0 {
				continue
			}
			q[a], q[b] = 1, -1
			law, err := tm.pred.CountStopped(r.N, q, false)
			if err != nil {
				return nil, fmt.Errorf("%s: %w", tm.c.Name, err)
			}
			// Every c whose reverse -c has a probability a record could
			// show (1e-9), up to the data's range or 6.
			cs, lr := law.LogRatio(1e-9)
			cmax := math.Max(pl.X.Max, 6.5)
			var xy plotter.XYs
			for j, c := range cs {
				if float64(c) <= cmax {
					xy = append(xy, plotter.XY{X: float64(c), Y: lr[j]})
				}
			}
			if len(xy) == 0 {
				continue
			}
			line, pts, err := plotter.NewLinePoints(xy)
			if err != nil {
				return nil, err
			}
			col := figPalette[(i+1)%len(figPalette)]
			line.Color, pts.Color = col, col
			line.Width = vg.Points(0.9)
			line.Dashes = [][]vg.Length{{vg.Points(3), vg.Points(2)}, {vg.Points(1), vg.Points(1.5)}, {vg.Points(5), vg.Points(2), vg.Points(1), vg.Points(2)}}[i%3]
			pts.Shape, pts.Radius = []draw.GlyphDrawer{draw.BoxGlyph{}, draw.PyramidGlyph{}, draw.CrossGlyph{}}[i%3], vg.Points(1.6)
			pl.Add(line, pts)
			pl.Legend.Add(tm.c.Name+" (exact)", line, pts)
			pl.X.Max = math.Max(pl.X.Max, xy[len(xy)-1].X+0.5)
			for _, pt := range xy {
				ylo, yhi = math.Min(ylo, pt.Y), math.Max(yhi, pt.Y)
			}
		}
		// fluctPanel drew F c over the data's range only: draw it on to
		// the models' last c.
		if f := r.F.Value; !math.IsNaN(f) && !math.IsInf(f, 0) {
			line := plotter.NewFunction(func(c float64) float64 { return f * c })
			line.XMin, line.XMax = 0, pl.X.Max
			line.Color, line.Width = color.Black, vg.Points(0.8)
			pl.Add(line)
			ylo, yhi = math.Min(ylo, f*pl.X.Max), math.Max(yhi, f*pl.X.Max)
		}
		// Room for the legend (about 7% of the height a row) above the
		// lines, or below them when they fall.
		rows := 0.07 * float64(3+len(tops))
		room := rows / (1 - rows) * (yhi - ylo)
		pl.Y.Min, pl.Y.Max = ylo, yhi
		if pl.Legend.Top {
			pl.Y.Max += room
		} else {
			pl.Y.Min -= room
		}
		out = append(out, pl)
	}
	if len(out) == 0 {
		return nil, fmt.Errorf("no window lengths")
	}
	return out, nil
}

// weightBars is the number of candidates shown in the weights figure.
const weightBars = 15

// weightFigure draws the Akaike weights of the fitted candidates (the
// best weightBars by BIC) as horizontal bars, best at the top.
func weightFigure(v *cmpView) ([]*plot.Plot, error) {
	var names []string
	var ws plotter.Values
	for _, c := range v.Ranked {
		if c.Status == candFitted && len(ws) < weightBars {
			names = append(names, c.Name)
			ws = append(ws, c.Weight)
		}
	}
	p := newFigPlot("Akaike weights exp(-ΔAIC/2), normalised", "weight", "")
	if len(ws) == 0 {
		return []*plot.Plot{p}, emptyPanel(p, "no candidate was fitted")
	}
	// Best at the top: bars are drawn from the bottom up.
	for i, j := 0, len(ws)-1; i < j; i, j = i+1, j-1 {
		ws[i], ws[j] = ws[j], ws[i]
		names[i], names[j] = names[j], names[i]
	}
	bars, err := plotter.NewBarChart(ws, vg.Points(9))
	if err != nil {
		return nil, err
	}
	bars.Horizontal = true
	bars.Color = figPalette[0]
	bars.LineStyle.Width = 0
	p.Add(bars)
	p.NominalY(names...)
	p.X.Min, p.X.Max = 0, 1.15 // room for the values
	var at plotter.XYs
	var txt []string
	for i, w := range ws {
		at = append(at, plotter.XY{X: w + 0.01, Y: float64(i)})
		txt = append(txt, strconv.FormatFloat(w, 'g', 3, 64))
	}
	l, err := plotter.NewLabels(plotter.XYLabels{XYs: at, Labels: txt})
	if err != nil {
		return nil, err
	}
	for i := range l.TextStyle {
		l.TextStyle[i].Font.Size = vg.Points(7)
		l.TextStyle[i].YAlign = draw.YCenter
	}
	p.Add(l)
	return []*plot.Plot{p}, nil
}

// strongestReason picks the reason that weighs most against a ruled-out
// candidate: records impossible under it; else a structural rule (shape,
// Markov order), which needs no fitted number, the one with the data's
// smaller p; else the check with the smallest Holm-adjusted p.
func strongestReason(c *rankedCand, ev evSummary) string {
	if c.Status == candImpossible {
		return c.Impossible
	}
	cs := c.Cons
	find := func(prefix string) string {
		for _, r := range cs.Reasons {
			if strings.HasPrefix(r, prefix) {
				return r
			}
		}
		return ""
	}
	switch {
	case cs.ShapeRuledOut && cs.MarkovRuledOut && float64(ev.MarkovP) < float64(ev.ShapeP):
		return find("Markov order:")
	case cs.ShapeRuledOut:
		return find("shape test:")
	case cs.MarkovRuledOut:
		return find("Markov order:")
	}
	best := -1
	for i, ch := range cs.Checks {
		if ch.Reject && (best < 0 || ch.Adjusted < cs.Checks[best].Adjusted) {
			best = i
		}
	}
	if best >= 0 {
		if r := find(cs.Checks[best].Name + ":"); r != "" {
			return r
		}
	}
	return cs.Reasons[0]
}

// plainSummary is summary.md: which candidates survive, the strongest
// reason against each of the others, and the caution.
func plainSummary(r *output.Report, v *cmpView) string {
	var b strings.Builder
	w := func(format string, a ...any) { fmt.Fprintf(&b, format, a...) }
	var inputs []string
	for _, in := range r.Stamp.Inputs {
		inputs = append(inputs, fmt.Sprintf("`%s` (sha256 %.12s)", in.Name, in.SHA256))
	}
	w("# Which schemes do the records support?\n\n")
	w("%d candidate schemes were fitted to the records by maximum likelihood and held against what the records say on their own. Inputs: %s.\n\n", len(v.Ranked), strings.Join(inputs, ", "))
	var survive, out, failed []*rankedCand
	for i := range v.Ranked {
		c := &v.Ranked[i]
		switch {
		case c.ruledOut():
			out = append(out, c)
		case c.Status == candFitted && c.Cons != nil:
			survive = append(survive, c)
		default:
			failed = append(failed, c)
		}
	}
	level := float64(v.Evidence.Level)
	w("## Consistent with the records\n\n")
	if len(survive) == 0 {
		w("None of the candidates: every one is ruled out below. The true scheme is not among them, or the instrument is not described right (detection probability, dead time, frame).\n\n")
	}
	for _, c := range survive {
		rank := ""
		if c == &v.Ranked[0] {
			rank = ", the best by BIC"
		}
		w("- **%s**%s (ΔBIC %.2f, Akaike weight %.3g): no check rejects it at the %g%% family-wise level.\n", c.Name, rank, c.DeltaBIC, c.Weight, 100*roundLevelCmd(1-level))
	}
	if len(survive) > 0 {
		w("\n")
	}
	if len(out) > 0 {
		w("## Ruled out, with the strongest reason against each\n\n")
		for _, c := range out {
			more := ""
			if n := len(c.reasons()) - 1; n > 0 {
				more = fmt.Sprintf(" (and %d further reason%s in the report's notes)", n, yesNo(n > 1, "s", ""))
			}
			w("- **%s**: %s%s.\n", c.Name, strings.TrimSuffix(strongestReason(c, v.Evidence), "."), more)
		}
		w("\n")
	}
	if len(failed) > 0 {
		w("## Not assessed\n\n")
		for _, c := range failed {
			why := c.Err
			if why == "" {
				why = "its consistency checks could not be made"
			}
			w("- **%s**: %s.\n", c.Name, why)
		}
		w("\n")
	}
	if bv := v.Boot; bv != nil && bv.Note == "" {
		w("## Calibration\n\n")
		w("The likelihood ratio of %s against %s (2 ln LR = %.4g) was calibrated by a parametric bootstrap: %d data sets simulated from %s; p = %.3g. ", bv.Best, bv.Second, bv.Observed, bv.Used, bv.Second, bv.P)
		switch alpha := roundLevelCmd(1 - level); {
		case bv.P <= alpha:
			w("Data like these would rarely come from %s: the records favour %s beyond what chance gives at the %g%% level.\n\n", bv.Second, bv.Best, 100*alpha)
		case bv.Exceed == 0:
			w("None of the simulated data sets reached the observed ratio, but with %d replicates the smallest possible p is 1/%d: run more replicates (--bootstrap) to reach the %g%% level.\n\n", bv.Used, bv.Used+1, 100*alpha)
		default:
			w("%d of the %d data sets simulated from %s reached the observed ratio: at the %g%% level the records do not tell the two apart by likelihood.\n\n", bv.Exceed, bv.Used, bv.Second, 100*alpha)
		}
	}
	w("## Caution\n\n")
	w("A scheme consistent with the records is not thereby the true one, nor the only one: schemes that were not among the candidates may describe the records as well, and \"consistent\" means only that no test found a discrepancy with these records at the stated level. Reasons against a scheme are statistical evidence at that level, except where the records are impossible under the scheme.\n")
	return b.String()
}

// roundLevelCmd removes the round-off of 1 - level.
func roundLevelCmd(a float64) float64 { return math.Round(a*1e12) / 1e12 }

// reprepare reads the records and specs of a merged comparison again, from
// the paths in its command line, for the report's figures; their
// checksums must be the parts'.
func reprepare(s *partSetup, stderr io.Writer) (*comparePrep, error) {
	c := newCommand("compare", compareHelp, s.Args, io.Discard, stderr)
	f := addCompareFlags(c)
	if code := c.parse(); code >= 0 {
		return nil, fmt.Errorf("the parts' command line does not parse again")
	}
	p, code := prepareCompare(c, f)
	if p == nil {
		return nil, fmt.Errorf("reading the inputs again failed (exit code %d)", code)
	}
	if d := sameSetup(s, &p.setup); d != "" {
		return nil, fmt.Errorf("the inputs read again do not match the parts: %s", d)
	}
	return p, nil
}
