package main

import (
	"fmt"
	"image/color"
	"io"
	"math"
	"path/filepath"
	"strconv"
	"strings"

	"edgewise/cmd/edgewise/internal/output"
	"edgewise/infer"
	"edgewise/likelihood"

	"github.com/spf13/pflag"
	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgimg"
	"gonum.org/v1/plot/vg/vgpdf"
	"gonum.org/v1/plot/vg/vgsvg"
)

// Figures are drawn for print: 10 pt text, thin lines, no grid, a colour
// palette chosen to stay distinct for colour-blind readers (Okabe-Ito
// blue, vermillion, bluish green, orange, reddish purple), PNG at 300 dots
// per inch. figPalette is read only.
var figPalette = []color.Color{
	color.RGBA{0, 114, 178, 255},   // blue
	color.RGBA{213, 94, 0, 255},    // vermillion
	color.RGBA{0, 158, 115, 255},   // bluish green
	color.RGBA{230, 159, 0, 255},   // orange
	color.RGBA{204, 121, 167, 255}, // reddish purple
}

const figDPI = 300

// figFormat returns the figure format named by the file extension.
func figFormat(path string) (string, error) {
	ext := strings.ToLower(strings.TrimPrefix(filepath.Ext(path), "."))
	switch ext {
	case "png", "svg", "pdf":
		return ext, nil
	}
	return "", fmt.Errorf("%s: figure format %q not supported (use .png, .svg or .pdf)", path, ext)
}

// newFigPlot returns a plot with the house style.
func newFigPlot(title, xlabel, ylabel string) *plot.Plot {
	p := plot.New()
	p.Title.Text = title
	p.X.Label.Text = xlabel
	p.Y.Label.Text = ylabel
	p.Title.TextStyle.Font.Size = vg.Points(8.5)
	p.Title.Padding = vg.Points(4)
	for _, a := range []*plot.Axis{&p.X, &p.Y} {
		a.Label.TextStyle.Font.Size = vg.Points(8)
		a.Tick.Label.Font.Size = vg.Points(7)
		a.LineStyle.Width = vg.Points(0.6)
		a.Tick.LineStyle.Width = vg.Points(0.6)
	}
	p.Legend.TextStyle.Font.Size = vg.Points(7)
	p.Legend.Top = true
	p.Legend.Left = true
	p.Legend.Padding = vg.Points(3)
	p.Legend.XOffs, p.Legend.YOffs = vg.Points(-3), vg.Points(-3)
	return p
}

// figureFlags are the figure options: the files and their width.
type figureFlags struct {
	plot, hist, pn *string
	width          *float64
}

func addFigureFlags(fs *pflag.FlagSet) figureFlags {
	return figureFlags{
		plot:  fs.String("plot", "", "write the fluctuation plot to this file (.png, .svg, .pdf)"),
		hist:  fs.String("hist", "", "write the inter-transition time densities to this file"),
		pn:    fs.String("pn", "", "write the P_n(c) plots to this file"),
		width: fs.Float64("figure-width", 89, "figure width in mm: 89 for one journal column, 183 for the page width"),
	}
}

// check validates the figure formats and the width.
func (f figureFlags) check() error {
	for _, p := range []string{*f.plot, *f.hist, *f.pn} {
		if p == "" {
			continue
		}
		if _, err := figFormat(p); err != nil {
			return err
		}
	}
	if !(*f.width >= 40 && *f.width <= 300) {
		return fmt.Errorf("--figure-width %v: want 40 to 300 mm (89: one column, 183: page width)", *f.width)
	}
	return nil
}

// figMargin is the blank border around every panel, so that no legend,
// label or line touches the edge of the figure.
const figMargin = 2 * vg.Millimeter

// writeFigure lays the plots out in rows of panels about 60 mm wide (one
// per row at 89 mm, three at 183 mm), widthMM wide in all, and writes them
// through files.
func writeFigure(files *output.Files, path string, plots []*plot.Plot, widthMM float64) error {
	format, err := figFormat(path)
	if err != nil {
		return err
	}
	if len(plots) == 0 {
		return fmt.Errorf("%s: nothing to draw", path)
	}
	cols := max(1, min(len(plots), int(widthMM/60)))
	rows := (len(plots) + cols - 1) / cols
	w := vg.Length(widthMM) * vg.Millimeter
	panelH := math.Min(math.Max(float64(w)/float64(cols)*0.72, float64(48*vg.Millimeter)), float64(80*vg.Millimeter))
	h := vg.Length(panelH) * vg.Length(rows)
	var c vg.CanvasWriterTo
	switch format {
	case "png":
		c = vgimg.PngCanvas{Canvas: vgimg.NewWith(vgimg.UseWH(w, h), vgimg.UseDPI(figDPI), vgimg.UseBackgroundColor(color.White))}
	case "svg":
		c = vgsvg.New(w, h)
	case "pdf":
		c = vgpdf.New(w, h)
	}
	dc := draw.Crop(draw.New(c), figMargin, -figMargin, figMargin, -figMargin)
	grid := make([][]*plot.Plot, rows)
	for i := range grid {
		grid[i] = make([]*plot.Plot, cols)
		for j := range cols {
			if k := i*cols + j; k < len(plots) {
				grid[i][j] = plots[k]
			}
		}
	}
	tiles := draw.Tiles{Rows: rows, Cols: cols, PadX: vg.Millimeter * 5, PadY: vg.Millimeter * 5}
	cv := plot.Align(grid, tiles, dc)
	for i := range grid {
		for j, p := range grid[i] {
			if p != nil {
				p.Draw(cv[i][j])
			}
		}
	}
	return files.Write(path, func(out io.Writer) error {
		_, err := c.WriteTo(out)
		return err
	})
}

// fluctSeries is one set of log-ratio points with its style.
type fluctSeries struct {
	name  string
	sym   infer.Symmetry
	color color.Color
	shape draw.GlyphDrawer
}

// logRatioErr holds log-ratio points with asymmetric interval bars.
type logRatioErr struct {
	plotter.XYs
	plotter.YErrors
}

// fluctPanel is the fluctuation plot of one window length: ln[P(c)/P(-c)]
// against c with exact intervals, the line F c (solid) and the fitted
// post-selected slope (dashed).
func fluctPanel(r infer.Fluctuation, showRaw, showPost bool) (*plot.Plot, error) {
	p := newFigPlot(fmt.Sprintf("n = %d events per window", r.N), "current c (net crossings)", "ln[P(c)/P(-c)]")
	var series []fluctSeries
	if showRaw {
		series = append(series, fluctSeries{"all windows", r.Raw, figPalette[0], draw.CircleGlyph{}})
	}
	if showPost {
		series = append(series, fluctSeries{"post-selected", r.PostSelected, figPalette[1], draw.TriangleGlyph{}})
	}
	if r.FixedTime != nil {
		series = append(series, fluctSeries{"fixed time", *r.FixedTime, figPalette[2], draw.SquareGlyph{}})
	}
	npts := 0
	for _, s := range series {
		npts += len(s.sym.Points)
	}
	if npts == 0 {
		return p, emptyPanel(p, fmt.Sprintf("no c with windows of both signs at n = %d", r.N))
	}
	cmax := 1.0
	for i, s := range series {
		if len(s.sym.Points) == 0 {
			continue
		}
		var e logRatioErr
		shift := 0.12 * (float64(i) - float64(len(series)-1)/2) // side by side
		for _, pt := range s.sym.Points {
			e.XYs = append(e.XYs, plotter.XY{X: float64(pt.C) + shift, Y: pt.LogRatio})
			e.YErrors = append(e.YErrors, struct{ Low, High float64 }{pt.LogRatio - pt.Lo, pt.Hi - pt.LogRatio})
			cmax = math.Max(cmax, float64(pt.C))
		}
		bars, err := plotter.NewYErrorBars(e)
		if err != nil {
			return nil, err
		}
		bars.Color = s.color
		bars.Width = vg.Points(0.7)
		bars.CapWidth = vg.Points(3)
		sc, err := plotter.NewScatter(e.XYs)
		if err != nil {
			return nil, err
		}
		sc.Color, sc.Shape, sc.Radius = s.color, s.shape, vg.Points(2.2)
		p.Add(bars, sc)
		p.Legend.Add(s.name, sc)
	}
	if f := r.F.Value; !math.IsNaN(f) && !math.IsInf(f, 0) {
		line := plotter.NewFunction(func(c float64) float64 { return f * c })
		line.XMin, line.XMax = 0, cmax+0.5
		line.Color, line.Width = color.Black, vg.Points(0.8)
		p.Add(line)
		p.Legend.Add(fmt.Sprintf("F c, F = %.3g", f), line)
	}
	if s := r.PostSelected.Slope.Value; showPost && !math.IsNaN(s) {
		fit := plotter.NewFunction(func(c float64) float64 { return s * c })
		fit.XMin, fit.XMax = 0, cmax+0.5
		fit.Color, fit.Width, fit.Dashes = figPalette[1], vg.Points(0.8), []vg.Length{vg.Points(3), vg.Points(2)}
		p.Add(fit)
		p.Legend.Add(fmt.Sprintf("fit, slope %.3g", s), fit)
	}
	// Leave room beyond the last c so the offset points and their bars are
	// not cut at the frame, and put the legend where the lines are not.
	p.X.Min, p.X.Max = 0, math.Max(p.X.Max, cmax+0.5)
	p.Y.Min = math.Min(p.Y.Min, 0)
	for _, slope := range []float64{r.F.Value, r.PostSelected.Slope.Value} {
		if !math.IsNaN(slope) && !math.IsInf(slope, 0) {
			p.Y.Max = math.Max(p.Y.Max, slope*p.X.Max)
			p.Y.Min = math.Min(p.Y.Min, slope*p.X.Max)
		}
	}
	// The lines rise from the origin, so the top-left corner is free
	// (bottom-left for a negative slope).
	p.Legend.Left, p.Legend.Top = true, !(r.F.Value < 0)
	room := 0.07 * float64(len(series)+2) / (1 - 0.07*float64(len(series)+2)) // legend rows take about 7% of the height each
	if p.Legend.Top {
		p.Y.Max += room * (p.Y.Max - p.Y.Min)
	} else {
		p.Y.Min -= room * (p.Y.Max - p.Y.Min)
	}
	p.X.Tick.Marker = intTicks{parity: -1}
	return p, nil
}

// pnPanel plots P_n(c) over the windows of one length on a log scale,
// so that the rare negative currents show, with exact (Clopper-Pearson)
// 95% bars on each probability N(c)/N; a panel without negative currents
// says so.
func pnPanel(r infer.Fluctuation, post bool) (*plot.Plot, error) {
	s, what := r.Raw, "all windows"
	if post {
		s, what = r.PostSelected, "post-selected windows"
	}
	p := newFigPlot(fmt.Sprintf("P_n(c), n = %d, %s (%d)", r.N, what, s.Windows), "current c (net crossings)", "probability P_n(c)")
	p.Y.Scale = plot.LogScale{}
	p.Y.Tick.Marker = plainLogTicks{}
	if s.Windows == 0 {
		return p, emptyPanel(p, fmt.Sprintf("no windows of n = %d", r.N))
	}
	var e logRatioErr
	neg := false
	lo := 1.0
	for i, v := range s.Count {
		if v == 0 {
			continue
		}
		c := float64(i - s.Offset)
		neg = neg || c < 0
		q := float64(v) / float64(s.Windows)
		a, b := infer.ClopperPearson(int(v), s.Windows, 0.95)
		e.XYs = append(e.XYs, plotter.XY{X: c, Y: q})
		e.YErrors = append(e.YErrors, struct{ Low, High float64 }{q - a, b - q})
		lo = math.Min(lo, math.Max(a, q/10))
	}
	bars, err := plotter.NewYErrorBars(e)
	if err != nil {
		return nil, err
	}
	bars.Color, bars.Width, bars.CapWidth = figPalette[0], vg.Points(0.6), vg.Points(2.5)
	sc, err := plotter.NewScatter(e.XYs)
	if err != nil {
		return nil, err
	}
	sc.Color, sc.Shape, sc.Radius = figPalette[0], draw.CircleGlyph{}, vg.Points(1.8)
	p.Add(bars, sc)
	decade := math.Pow(10, math.Floor(math.Log10(lo)))
	p.Y.Min, p.Y.Max = decade, 1
	if !neg {
		p.Y.Min = decade / 10 // an empty strip for the message
	}
	p.X.Tick.Marker = intTicks{parity: r.N % 2}
	p.X.Min, p.X.Max = p.X.Min-0.7, p.X.Max+0.7
	if !neg {
		l, err := plotter.NewLabels(plotter.XYLabels{XYs: []plotter.XY{{X: p.X.Min + 0.3, Y: decade / 4}}, Labels: []string{fmt.Sprintf("no windows with c < 0 at n = %d", r.N)}})
		if err != nil {
			return nil, err
		}
		l.TextStyle[0].Font.Size = vg.Points(7)
		p.Add(l)
	}
	return p, nil
}

// emptyPanel writes msg in the middle of a panel with nothing else to show.
func emptyPanel(p *plot.Plot, msg string) error {
	p.X.Min, p.X.Max, p.Y.Min, p.Y.Max = 0, 1, 0.01, 1
	l, err := plotter.NewLabels(plotter.XYLabels{XYs: []plotter.XY{{X: 0.05, Y: 0.5}}, Labels: []string{msg}})
	if err != nil {
		return err
	}
	l.TextStyle[0].Font.Size = vg.Points(7.5)
	p.Add(l)
	p.HideAxes()
	p.Y.Scale = plot.LinearScale{}
	p.X.Tick.Marker, p.Y.Tick.Marker = plot.ConstantTicks(nil), plot.ConstantTicks(nil)
	p.X.Label.Text, p.Y.Label.Text = "", ""
	return nil
}

// plainLogTicks labels the decades of a log axis in plain numbers (0.001,
// 100) between 1e-4 and 1e5, and as 1e-05 beyond.
type plainLogTicks struct{}

// Ticks implements plot.Ticker.
func (plainLogTicks) Ticks(lo, hi float64) []plot.Tick {
	var ticks []plot.Tick
	for e := math.Floor(math.Log10(lo)); e <= math.Ceil(math.Log10(hi)); e++ {
		v := math.Pow(10, e)
		if v < lo*(1-1e-9) || v > hi*(1+1e-9) {
			continue
		}
		label := strconv.FormatFloat(v, 'f', -1, 64)
		if e < -4 || e > 5 {
			label = strconv.FormatFloat(v, 'e', 0, 64)
		}
		ticks = append(ticks, plot.Tick{Value: v, Label: label})
		for k := 2.0; k < 10; k++ {
			if m := k * v; m >= lo && m <= hi {
				ticks = append(ticks, plot.Tick{Value: m})
			}
		}
	}
	return ticks
}

// gapPanel draws the log-binned joint densities of the time from an l
// event to the next event when that event is l': psi_{l->l'}(t) estimated
// as N_{ll'}(bin) / (N_{l.} bin width), so that its integral is P(l'|l)
// (joint, not conditional on l'). Both axes are logarithmic; bins hold a
// factor 10^(1/5) in t.
//
// psi, when not nil, gives a model's psi_{a->b} at times t: it is drawn
// as a dashed curve in the colour of the pair's points.
func gapPanel(d *likelihood.Data, u output.TimeUnit, psi func(a, b string, t []float64) []float64) (*plot.Plot, error) {
	k := len(d.Labels)
	p := newFigPlot("joint density psi_{l->l'}(t) of the gap and the next label (integral P(l'|l))", "gap t ("+u.Time()+")", "psi_{l->l'}(t) ("+u.Rate()+")")
	p.X.Scale, p.Y.Scale = plot.LogScale{}, plot.LogScale{}
	p.X.Tick.Marker, p.Y.Tick.Marker = plainLogTicks{}, plainLogTicks{}
	p.Legend.Top = false // the short-time, low-density corner is empty
	lo, hi := math.Inf(1), 0.0
	for r := range d.Records {
		t := d.Records[r].Time
		for i := 1; i < len(t); i++ {
			if g := t[i] - t[i-1]; g > 0 {
				lo, hi = math.Min(lo, g), math.Max(hi, g)
			}
		}
	}
	if !(hi > lo) {
		return nil, fmt.Errorf("fewer than two distinct positive gaps: no gap histogram")
	}
	const perDecade = 5
	l0 := math.Floor(math.Log10(lo) * perDecade)
	nb := int(math.Ceil(math.Log10(hi)*perDecade)-l0) + 1
	counts := make([][]float64, k*k)
	for i := range counts {
		counts[i] = make([]float64, nb)
	}
	rows := make([]float64, k)
	for r := range d.Records {
		t, l := d.Records[r].Time, d.Records[r].Label
		for i := 1; i < len(t); i++ {
			rows[l[i-1]]++
			g := t[i] - t[i-1]
			if !(g > 0) {
				continue
			}
			b := min(nb-1, max(0, int(math.Floor(math.Log10(g)*perDecade-l0))))
			counts[int(l[i-1])*k+int(l[i])][b]++
		}
	}
	ylo, yhi := math.Inf(1), 0.0
	shapes := []draw.GlyphDrawer{draw.CircleGlyph{}, draw.TriangleGlyph{}, draw.SquareGlyph{}, draw.PyramidGlyph{}, draw.CrossGlyph{}}
	si := 0
	for a := 0; a < k; a++ {
		for b := 0; b < k; b++ {
			var xy plotter.XYs
			for i, v := range counts[a*k+b] {
				if v == 0 {
					continue
				}
				t0 := math.Pow(10, (l0+float64(i))/perDecade)
				t1 := math.Pow(10, (l0+float64(i)+1)/perDecade)
				xy = append(xy, plotter.XY{X: math.Sqrt(t0 * t1), Y: v / (rows[a] * (t1 - t0))})
				ylo, yhi = math.Min(ylo, xy[len(xy)-1].Y), math.Max(yhi, xy[len(xy)-1].Y)
			}
			if len(xy) == 0 {
				continue
			}
			line, pts, err := plotter.NewLinePoints(xy)
			if err != nil {
				return nil, err
			}
			c := figPalette[si%len(figPalette)]
			line.Color, line.Width = c, vg.Points(0.7)
			pts.Color, pts.Shape, pts.Radius = c, shapes[si%len(shapes)], vg.Points(2)
			p.Add(line, pts)
			p.Legend.Add(fmt.Sprintf("%s \u2192 %s", d.Labels[a], d.Labels[b]), line, pts)
			if psi != nil {
				const nt = 80
				ts := make([]float64, nt)
				for i := range ts {
					ts[i] = lo * math.Pow(hi/lo, float64(i)/float64(nt-1))
				}
				var cxy plotter.XYs
				for i, v := range psi(d.Labels[a], d.Labels[b], ts) {
					if v > 0 && !math.IsInf(v, 0) {
						cxy = append(cxy, plotter.XY{X: ts[i], Y: v})
					}
				}
				if len(cxy) > 1 {
					cl, err := plotter.NewLine(cxy)
					if err != nil {
						return nil, err
					}
					cl.Color, cl.Width, cl.Dashes = c, vg.Points(1), []vg.Length{vg.Points(3), vg.Points(2)}
					p.Add(cl)
				}
			}
			si++
		}
	}
	// Whole decades: gonum's log ticks label decades, and a labelled tick
	// outside the axis range would still take room in the layout.
	decade := func(x float64, up bool) float64 {
		if up {
			return math.Pow(10, math.Ceil(math.Log10(x)))
		}
		return math.Pow(10, math.Floor(math.Log10(x)))
	}
	p.X.Min, p.X.Max = decade(lo, false), decade(hi, true)
	p.Y.Min, p.Y.Max = decade(ylo, false), decade(yhi, true)
	return p, nil
}

// intTicks marks integers: every value when the range is short, else
// multiples of 2, 5, 10, ... so that at most about eight carry a label.
// With parity 0 or 1 only integers of that parity are labelled (the
// current over n events has the parity of n).
type intTicks struct{ parity int }

// Ticks implements plot.Ticker.
func (t intTicks) Ticks(lo, hi float64) []plot.Tick {
	span := hi - lo
	step := 1
	for _, s := range []int{1, 2, 5, 10, 20, 50, 100, 200, 500, 1000} {
		step = s
		if t.parity >= 0 && s%2 == 1 {
			continue
		}
		if span/float64(s) <= 8 {
			break
		}
	}
	var ticks []plot.Tick
	first := int(math.Ceil(lo))
	for c := first; float64(c) <= hi; c++ {
		label := ""
		if t.parity < 0 && c%step == 0 || t.parity >= 0 && ((c-t.parity)%step+step)%step == 0 {
			label = strconv.Itoa(c)
		}
		if label == "" && span > 40 {
			continue // no minor tick on every integer of a long axis
		}
		ticks = append(ticks, plot.Tick{Value: float64(c), Label: label})
	}
	return ticks
}
