package main

import (
	"fmt"
	"image/color"
	"io"
	"math"
	"path/filepath"
	"strconv"
	"strings"

	"edgewise/infer"
	"edgewise/likelihood"

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
	p.Title.TextStyle.Font.Size = vg.Points(11)
	for _, a := range []*plot.Axis{&p.X, &p.Y} {
		a.Label.TextStyle.Font.Size = vg.Points(10)
		a.Tick.Label.Font.Size = vg.Points(9)
		a.LineStyle.Width = vg.Points(0.6)
		a.Tick.LineStyle.Width = vg.Points(0.6)
	}
	p.Legend.TextStyle.Font.Size = vg.Points(8.5)
	p.Legend.Top = true
	p.Legend.Left = true
	return p
}

// writeFigure draws the plots in one row of panels and writes them to
// path atomically (writeAtomic: no overwrite without force).
func writeFigure(path string, force bool, plots []*plot.Plot, panelW, h vg.Length) error {
	format, err := figFormat(path)
	if err != nil {
		return err
	}
	if len(plots) == 0 {
		return fmt.Errorf("%s: nothing to draw", path)
	}
	w := panelW * vg.Length(len(plots))
	var c vg.CanvasWriterTo
	switch format {
	case "png":
		c = vgimg.PngCanvas{Canvas: vgimg.NewWith(vgimg.UseWH(w, h), vgimg.UseDPI(figDPI))}
	case "svg":
		c = vgsvg.New(w, h)
	case "pdf":
		c = vgpdf.New(w, h)
	}
	dc := draw.New(c)
	if len(plots) == 1 {
		plots[0].Draw(dc)
	} else {
		tiles := draw.Tiles{Rows: 1, Cols: len(plots), PadX: vg.Millimeter * 4}
		cv := plot.Align([][]*plot.Plot{plots}, tiles, dc)
		for i, p := range plots {
			p.Draw(cv[0][i])
		}
	}
	return writeAtomic(path, force, func(out io.Writer) error {
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
	p.Legend.Left, p.Legend.Top = false, false
	p.X.Tick.Marker = intTicks{parity: -1}
	return p, nil
}

// pnPanel is the histogram of P_n(c) over the windows of one length.
func pnPanel(r infer.Fluctuation, post bool) (*plot.Plot, error) {
	s, what := r.Raw, "all windows"
	if post {
		s, what = r.PostSelected, "post-selected windows"
	}
	p := newFigPlot(fmt.Sprintf("n = %d, %s (%d)", r.N, what, s.Windows), "current c (net crossings)", "probability P(c)")
	if s.Windows == 0 {
		return p, nil
	}
	h := &plotter.Histogram{Width: 1, FillColor: figPalette[0], LineStyle: draw.LineStyle{Color: color.White, Width: vg.Points(0.3)}}
	for i, v := range s.Count {
		if v == 0 {
			continue
		}
		c := float64(i - s.Offset)
		h.Bins = append(h.Bins, plotter.HistogramBin{Min: c - 0.5, Max: c + 0.5, Weight: float64(v) / float64(s.Windows)})
	}
	p.Add(h)
	top := 0.0
	for _, b := range h.Bins {
		top = math.Max(top, b.Weight)
	}
	p.Y.Min, p.Y.Max = 0, 1.08*top
	p.X.Tick.Marker = intTicks{parity: r.N % 2}
	return p, nil
}

// gapPanel draws the log-binned densities of the time from an l event to
// the next event when that event is l': psi_{l->l'}(t) estimated as
// N_{ll'}(bin) / (N_{l.} bin width), so that its integral is P(l'|l).
// Both axes are logarithmic; bins hold a factor 10^(1/5) in t.
func gapPanel(d *likelihood.Data) (*plot.Plot, error) {
	k := len(d.Labels)
	p := newFigPlot("inter-transition times", "gap t (record time unit)", "psi(t) (1/time)")
	p.X.Scale, p.Y.Scale = plot.LogScale{}, plot.LogScale{}
	p.X.Tick.Marker, p.Y.Tick.Marker = plot.LogTicks{Prec: -1}, plot.LogTicks{Prec: -1}
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

// figPanelW and figPanelH are the size of one panel: 3.4 in (one journal column) by
// 2.8 in.
var figPanelW, figPanelH = 3.4 * vg.Inch, 2.8 * vg.Inch

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
