package main

import (
	"fmt"
	"image/color"
	"math"
	"strings"

	"edgewise/cmd/edgewise/internal/output"
	"edgewise/infer"
	"edgewise/likelihood"
	"edgewise/models"

	"github.com/spf13/pflag"
	"gonum.org/v1/gonum/stat/distuv"
	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
)

// Profiles of derived quantities for `edgewise fit`: the least dissipation
// within the scheme (infer.ProfileQuantity), set beside the data's
// model-free lower bounds on sigma.

// quantityFlags are the options of the quantity profiles.
type quantityFlags struct {
	which, plot *string
}

func addQuantityFlags(fs *pflag.FlagSet) quantityFlags {
	return quantityFlags{
		which: fs.String("profile-quantity", "", "profile likelihood of derived quantities, comma-separated: sigma (least dissipation within the scheme), F, affinities (each cycle of the basis), or a quantity name of the derived table"),
		plot:  fs.String("profile-plot", "", "write the profile ln L of each --profile-quantity, with the data's bounds on sigma, to this file (.png, .svg, .pdf)"),
	}
}

// list returns the requested quantities.
func (f quantityFlags) list() []string {
	var out []string
	for _, w := range strings.Split(*f.which, ",") {
		if w = strings.TrimSpace(w); w != "" {
			out = append(out, w)
		}
	}
	return out
}

// check validates the options before any work (width: the figure width
// in mm).
func (f quantityFlags) check(width float64) error {
	if *f.which != "" && len(f.list()) == 0 {
		return fmt.Errorf("--profile-quantity %q: name at least one quantity (sigma, F, affinities)", *f.which)
	}
	if *f.plot != "" {
		if len(f.list()) == 0 {
			return fmt.Errorf("--profile-plot needs --profile-quantity")
		}
		if _, err := figFormat(*f.plot); err != nil {
			return fmt.Errorf("--profile-plot: %w", err)
		}
		if !(width >= 40 && width <= 300) {
			return fmt.Errorf("--figure-width %v: want 40 to 300 mm", width)
		}
	}
	return nil
}

// quantityProfiles computes the profiles the flags ask for and adds their
// tables (and figure) to r; nothing when none is asked for.
func quantityProfiles(c *command, files *output.Files, r *output.Report, res *infer.FitResult, d *likelihood.Data, ins likelihood.Instrument, u output.TimeUnit, f quantityFlags, width float64) error {
	which := f.list()
	if len(which) == 0 {
		return nil
	}
	if res.Interrupted {
		r.Note("quantity profiles not computed: the fit was interrupted")
		return nil
	}
	names, err := infer.QuantityNames(res, which)
	if err != nil {
		return err
	}
	ctx, stop := interruptible()
	defer stop()
	pb := c.progress(-1, "profiling "+strings.Join(names, ", "), false)
	var profs []*infer.QuantityProfile
	for _, n := range names {
		p, err := infer.ProfileQuantity(res, d, n, infer.QuantityProfileOptions{Level: res.Level, Workers: res.Options.Workers, Context: ctx, Progress: func(int) { pb.add(1) }})
		if err != nil {
			r.Note("profile of %s not computed: %v", n, err)
			continue
		}
		profs = append(profs, p)
	}
	pb.finish()
	stop()
	if len(profs) == 0 {
		return nil
	}
	bounds, bnote := sigmaBounds(res, d, ins)
	r.Add(quantityTable(profs, res.Level, u))
	for _, p := range profs {
		if p.Kind == models.KindEntropy {
			r.Add(dissipationTable(p, bounds, bnote, res.Level, u))
			for _, s := range dissipationNotes(res.Model.Name, p, bounds, u) {
				r.Note("%s", s)
			}
		}
		for _, n := range p.Notes {
			r.Note("profile of %s: %s", p.Name, n)
		}
		if p.Interrupted {
			r.Note("profile of %s: interrupted; the interval is where the search had got to, not final", p.Name)
		}
	}
	r.Add(pointsTable(profs, u))
	if *f.plot == "" {
		return nil
	}
	var panels []*plot.Plot
	for _, p := range profs {
		if p.Fixed {
			continue
		}
		pl, err := profilePanel(p, bounds, u)
		if err != nil {
			return err
		}
		panels = append(panels, pl)
	}
	if len(panels) == 0 {
		return fmt.Errorf("--profile-plot: every quantity asked for is fixed by the scheme: nothing to draw")
	}
	return writeFigure(files, *f.plot, panels, width)
}

// unitOf writes a quantity's unit in the records' time unit.
func unitOf(unit string, u output.TimeUnit) string {
	if unit == "1" {
		return ""
	}
	return strings.NewReplacer("1/time", u.Rate(), "k_B/time", u.Entropy(), "time", u.Time()).Replace(unit)
}

// profileInterval is the cell of a profile interval, with its open sides
// said in words.
func profileInterval(p *infer.QuantityProfile) output.Cell {
	if p.Fixed {
		return output.Undefined(p.Method)
	}
	method := "profile likelihood"
	var open []string
	if p.LowerOpen {
		if p.ZeroNotRejected {
			open = append(open, "reaches 0: an equilibrium member fits")
		} else {
			open = append(open, "open below: the data set no lower limit")
		}
	}
	if p.UpperOpen {
		open = append(open, "open above: the data set no upper limit")
	}
	if len(open) > 0 {
		method += "; " + strings.Join(open, "; ")
	}
	c := output.Interval(p.Lower, p.Upper, p.Level, method)
	if len(open) > 0 {
		c = c.WithNote(strings.Join(open, "; "))
	}
	return c
}

// quantityTable lists every profile: the value at the maximum with its
// delta-method interval beside the profile interval.
func quantityTable(profs []*infer.QuantityProfile, level float64, u output.TimeUnit) *output.Table {
	t := output.NewTable("quantity_profiles", "Profile likelihood of derived quantities", "quantity",
		output.Col("value", "at the maximum", ""), output.Col("unit", "unit", ""),
		output.Col("delta", pct(level)+" delta method", ""), output.Col("profile", pct(level)+" profile", ""),
		output.Col("points", "points", ""), output.Col("route", "constrained maximum by", ""))
	for _, p := range profs {
		z := distuv.UnitNormal.Quantile(1 - (1-level)/2)
		delta := output.Interval(p.Estimate-z*p.SE, p.Estimate+z*p.SE, level, "delta method")
		if math.IsNaN(p.SE) || math.IsInf(p.SE, 0) {
			delta = output.Undefined("not determined by the data")
		}
		t.Add(output.Key(p.Name), p.Name, output.Num(p.Estimate), text(unitOf(p.Unit, u)), delta, profileInterval(p), output.Count(len(p.Points)), output.Text(p.Method))
	}
	t.Note("profile: the values s with 2 [ln L_max - max ln L | q = s] below the chi-square(1) quantile %.4g; sigma and F by an augmented Lagrangian, each cycle affinity by an exact affinity constraint, sigma = 0 by the best equilibrium member of the scheme", distuv.ChiSquared{K: 1}.Quantile(level))
	return t
}

// boundSet is the data's model-free lower bounds on sigma, when they hold.
type boundSet struct {
	b     *infer.Bounds
	names []string
	est   []infer.Estimate
}

// sigmaBounds estimates the data's lower bounds on sigma for the fitted
// model's visible edge and instrument; nil and the reason when there is no
// single visible edge or the bounds cannot be computed.
func sigmaBounds(res *infer.FitResult, d *likelihood.Data, ins likelihood.Instrument) (*boundSet, string) {
	net, err := res.Model.Network(res.X)
	if err != nil {
		return nil, err.Error()
	}
	s, _, err := likelihood.ModelSensitivity(res.Model, res.X, ins)
	if err != nil {
		return nil, err.Error()
	}
	plus, minus := -1, -1
	for q, row := range s.Rows {
		if row.Kind == likelihood.KindEffective && plus < 0 {
			plus, minus = s.Rows[q].Args[0], s.Rows[q].Args[1]
		}
	}
	if plus < 0 {
		return nil, "the model has no visible edge with labels in both directions"
	}
	perLabel := make([]int, len(net.Labels))
	for _, e := range net.Edges {
		for _, l := range e.Label {
			if l != models.Hidden {
				perLabel[l]++
			}
		}
	}
	multi := false
	for _, n := range perLabel {
		multi = multi || n > 1
	}
	cond := infer.BoundConditions{MultiEdge: multi, DetectForward: net.Labels[plus].Detect, DetectBackward: net.Labels[minus].Detect, DeadTime: ins.DeadTime}
	b, err := infer.EntropyBounds(d, infer.BoundOptions{Labels: infer.EdgeLabels{Forward: net.Labels[plus].Name, Backward: net.Labels[minus].Name}, Level: res.Level, Conditions: cond})
	if err != nil {
		return nil, err.Error()
	}
	return &boundSet{b: b, names: []string{"F*J", "J^2/D", "transition-based"}, est: []infer.Estimate{b.FJ, b.TUR, b.Transition}}, ""
}

// dissipationTable sets the data's bounds, the scheme's sigma at its
// maximum and its least sigma side by side.
func dissipationTable(p *infer.QuantityProfile, bs *boundSet, bnote string, level float64, u output.TimeUnit) *output.Table {
	t := output.NewTable("dissipation", "Entropy production: what the data prove and what the scheme needs", "quantity",
		output.Col("value", "value", u.Entropy()), output.Col("interval", pct(level)+" interval", u.Entropy()), output.Col("note", "note", ""))
	switch {
	case bs == nil:
		t.Add("bounds", "model-free lower bounds", output.Undefined("not computed: "+bnote), output.Empty(), output.Empty())
	case !bs.b.Claimed:
		t.Add("bounds", "model-free lower bounds", output.Undefined("withheld: "+bs.b.Reason), output.Empty(), output.Empty())
	default:
		for i, e := range bs.est {
			if e.Undefined || math.IsNaN(e.Value) {
				t.Add("bound_"+output.Key(bs.names[i]), "data's bound "+bs.names[i], output.Undefined(nonBlank(e.Note, "undefined")), output.Empty(), output.Empty())
				continue
			}
			t.Add("bound_"+output.Key(bs.names[i]), "data's bound "+bs.names[i], output.Num(e.Value), output.Interval(e.Lo, e.Hi, level, e.Method), text(e.Note))
		}
	}
	z := distuv.UnitNormal.Quantile(1 - (1-level)/2)
	delta := output.Interval(p.Estimate-z*p.SE, p.Estimate+z*p.SE, level, "delta method")
	if math.IsNaN(p.SE) || math.IsInf(p.SE, 0) {
		delta = output.Undefined("not determined by the data")
	}
	t.Add("sigma_max", "scheme's sigma at its maximum", output.Num(p.Estimate), delta, output.Text("delta method"))
	switch {
	case p.Fixed:
		t.Add("sigma_least", "scheme's least sigma", output.Num(p.Lower), output.Empty(), output.Text(p.Method))
	case p.ZeroNotRejected:
		t.Add("sigma_least", fmt.Sprintf("scheme's least sigma at %s", pct(level)), output.Zero(), profileInterval(p), output.Text("an equilibrium member of the scheme is not rejected"))
	default:
		note := "profile likelihood"
		if p.LowerOpen {
			note = "the profile stays within the threshold to the end of the search: no lower limit"
		}
		t.Add("sigma_least", fmt.Sprintf("scheme's least sigma at %s", pct(level)), output.Num(p.Lower), profileInterval(p), output.Text(note))
	}
	if eq := p.Equilibrium; eq != nil {
		pv := distuv.ChiSquared{K: 1}.Survival(math.Max(eq.Deviance, 0))
		verdict := "rejected"
		if p.ZeroNotRejected {
			verdict = "not rejected"
		}
		t.Add("equilibrium", "scheme's best equilibrium member", output.Zero(), output.Empty(), output.Text(fmt.Sprintf("%s: 2 [ln L_max - ln L] = %s, p = %s (chi-square(1))", verdict, num(eq.Deviance), pval(pv))))
	}
	if bs != nil && bs.b.Claimed {
		t.Note("the bounds hold for any scheme (given: %s); the least sigma holds within this scheme only", strings.Join(bs.b.Validity.Assumes, "; "))
	}
	return t
}

func nonBlank(s, alt string) string {
	if s == "" {
		return alt
	}
	return s
}

// dissipationNotes say in words what the sigma profile means.
func dissipationNotes(scheme string, p *infer.QuantityProfile, bs *boundSet, u output.TimeUnit) []string {
	var out []string
	switch {
	case p.Fixed:
		out = append(out, fmt.Sprintf("sigma of scheme %s is fixed by the scheme (%s)", scheme, p.Method))
	case p.ZeroNotRejected:
		out = append(out, fmt.Sprintf("the data do not prove that the system is driven, within scheme %s: its best equilibrium member (sigma = 0) is not rejected at %s confidence (2 [ln L_max - ln L] = %.3g, below %.3g); the least sigma at that level is 0", scheme, pct(p.Level), p.Equilibrium.Deviance, p.Threshold))
	case p.LowerOpen:
		out = append(out, fmt.Sprintf("within scheme %s the data set no lower limit on sigma down to %s %s", scheme, num(p.Lower), u.Entropy()))
	default:
		out = append(out, fmt.Sprintf("least dissipation within scheme %s: sigma >= %s %s at %s (profile likelihood); the data reject every member of the scheme that dissipates less", scheme, num(p.Lower), u.Entropy(), pct(p.Level)))
		if bs != nil && bs.b.Claimed {
			best, name := math.Inf(-1), ""
			for i, e := range bs.est {
				if !e.Undefined && e.Hi > best {
					best, name = e.Hi, bs.names[i]
				}
			}
			if name != "" && p.Lower > best {
				out = append(out, fmt.Sprintf("the scheme's least sigma %s lies above the upper end %s of the data's largest bound (%s): the extra dissipation comes from the scheme, not from what the records show on their own", num(p.Lower), num(best), name))
			}
		}
	}
	return out
}

// pointsTable lists every point of every profile, for figures of one's own.
func pointsTable(profs []*infer.QuantityProfile, u output.TimeUnit) *output.Table {
	t := output.NewTable("profile_points", "Points of the profiles", "point",
		output.MachineCol("quantity", "quantity", ""), output.Col("value", "value held", ""), output.Col("unit", "unit", ""),
		output.Col("log_likelihood", "ln L_p", "nats"), output.Col("deviance", "2 [ln L_max - ln L_p]", ""),
		output.Col("slope", "d ln L_p/ds", ""), output.Col("route", "route", ""), output.Col("status", "status", ""))
	for _, p := range profs {
		for i, q := range p.Points {
			slope := output.Num(q.Slope)
			if math.IsNaN(q.Slope) {
				slope = output.Undefined("no gradient at sigma = 0")
			}
			status := q.Status
			if !q.Converged {
				status = "NOT converged: " + status
			}
			t.Add(fmt.Sprintf("%s_%d", output.Key(p.Name), i+1), fmt.Sprintf("%s, %d", p.Name, i+1), output.Text(p.Name), output.Num(q.Value), text(unitOf(p.Unit, u)),
				output.Fixed(q.LogLik, 3), output.Fixed(math.Max(q.Deviance, 0), 3), slope, output.Text(q.Route), output.Text(status))
		}
	}
	return t
}

// profilePanel draws ln L_p - ln L_max against the quantity, the
// threshold of the level, and for sigma the data's bounds as vertical
// lines. Points far below the threshold (the equilibrium member of a
// clearly driven scheme) are left off the frame and named in the legend.
func profilePanel(p *infer.QuantityProfile, bs *boundSet, u output.TimeUnit) (*plot.Plot, error) {
	unit := unitOf(p.Unit, u)
	xl := p.Name
	if unit != "" {
		xl += " (" + unit + ")"
	}
	pl := newFigPlot(fmt.Sprintf("profile of %s, %s interval [%s, %s]", p.Name, pct(p.Level), num(p.Lower), num(p.Upper)), xl, "ln L_p - ln L_max (nats)")
	floor := -1.5 * p.Threshold
	var xy plotter.XYs
	var off []string
	for _, q := range p.Points {
		y := q.LogLik - p.LogLikMax
		if math.IsInf(y, 0) || math.IsNaN(y) {
			continue
		}
		if y < floor {
			off = append(off, fmt.Sprintf("%s = %s: %.4g", p.Name, num(q.Value), y))
			continue
		}
		xy = append(xy, plotter.XY{X: q.Value, Y: y})
	}
	if len(xy) == 0 {
		return pl, emptyPanel(pl, "no profile point within the frame")
	}
	xmin, xmax := xy[0].X, xy[len(xy)-1].X
	ln, sc, err := plotter.NewLinePoints(xy)
	if err != nil {
		return nil, err
	}
	ln.Color, ln.Width = figPalette[0], vg.Points(0.8)
	sc.Color, sc.Shape, sc.Radius = figPalette[0], draw.CircleGlyph{}, vg.Points(1.8)
	pl.Add(ln, sc)
	pl.Legend.Add("profile", ln, sc)
	// Vertical lines: the data's bounds (sigma only).
	var vlines []struct {
		x     float64
		name  string
		color color.Color
	}
	if p.Kind == models.KindEntropy && bs != nil && bs.b.Claimed {
		for i, e := range bs.est {
			if !e.Undefined && !math.IsNaN(e.Value) {
				vlines = append(vlines, struct {
					x     float64
					name  string
					color color.Color
				}{e.Value, fmt.Sprintf("data's bound %s = %s", bs.names[i], num(e.Value)), figPalette[1+i%4]})
			}
		}
	}
	for _, v := range vlines {
		xmin, xmax = math.Min(xmin, v.x), math.Max(xmax, v.x)
	}
	ymin := math.Max(floor, -p.Threshold)
	for _, q := range xy {
		ymin = math.Min(ymin, q.Y)
	}
	ymax := 0.15 * p.Threshold
	for i, v := range vlines {
		l, err := plotter.NewLine(plotter.XYs{{X: v.x, Y: ymin}, {X: v.x, Y: ymax}})
		if err != nil {
			return nil, err
		}
		l.Color, l.Width = v.color, vg.Points(0.9)
		l.Dashes = []vg.Length{vg.Points(4 - float64(i)), vg.Points(2)}
		pl.Add(l)
		pl.Legend.Add(v.name, l)
	}
	thr := plotter.NewFunction(func(float64) float64 { return -p.Threshold / 2 })
	thr.XMin, thr.XMax = xmin, xmax
	thr.Color, thr.Width, thr.Dashes = color.Gray{Y: 90}, vg.Points(0.7), []vg.Length{vg.Points(2), vg.Points(2)}
	pl.Add(thr)
	pl.Legend.Add(fmt.Sprintf("%s threshold", pct(p.Level)), thr)
	for _, o := range off {
		pl.Legend.Add("off the frame: " + o)
	}
	pad := 0.04 * math.Max(xmax-xmin, 1e-12)
	pl.X.Min, pl.X.Max = xmin-pad, xmax+pad
	pl.Y.Min, pl.Y.Max = ymin, ymax+0.45*(ymax-ymin)
	pl.Legend.Top, pl.Legend.Left = true, true
	return pl, nil
}
