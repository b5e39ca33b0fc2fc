package main

import (
	"fmt"
	"io"
	"math"
	"strings"

	"edgewise/cmd/edgewise/internal/output"
	"edgewise/models"
)

const describeHelp = `Usage: edgewise describe MODEL.toml [options]

Print a model and its properties at its start values: parameters (free,
fixed or solved from an affinity constraint, with bounds), labels with
their detection probabilities, the affinity constraints, the stationary
law, edge currents, fundamental cycles with their affinities (k_BT), and
the entropy production rate. Rates are in 1/time, in the spec's
time_unit or --time-unit when named. At detailed balance (every cycle
affinity below 1e-10 in size) currents and sigma are exactly 0.

Example:
  edgewise describe testdata/ring3.toml --format markdown

Options:
`

func cmdDescribe(args []string, stdout, stderr io.Writer) int {
	c := newCommand("describe", describeHelp, args, stdout, stderr)
	c.outputFlags(true)
	c.timeUnitFlag()
	if code := c.parse(); code >= 0 {
		return code
	}
	if c.fs.NArg() != 1 {
		return c.usage("want one model spec, got %d arguments", c.fs.NArg())
	}
	if _, err := c.outputFormat(); err != nil {
		return c.usage("%v", err)
	}
	if err := checkTimeUnit(*c.timeUnit); err != nil {
		return c.usage("%v", err)
	}
	files := output.NewFiles(stdout, *c.force)
	defer files.Close()
	if err := files.Claim("-o", *c.out); err != nil {
		return c.fail(1, err)
	}
	path := c.fs.Arg(0)
	src, m, net, err := loadModel(path)
	if err != nil {
		return c.fail(1, err)
	}
	unit, unitNote := c.resolveTimeUnit(m.TimeUnit, "")
	r := c.newReport([]output.Input{{Name: path, SHA256: checksum(src)}}, nil, unit)
	if unitNote != "" {
		r.Note("%s", unitNote)
	}
	if err := describeTables(r, m, net, unit); err != nil {
		return c.fail(1, err)
	}
	if err := c.emitReport(files, r); err != nil {
		return c.fail(1, err)
	}
	return 0
}

// describeTables adds the model's tables and its properties.
func describeTables(r *output.Report, m *models.Model, net *models.Network, u output.TimeUnit) error {
	pi, err := net.Stationary()
	if err != nil {
		return err
	}
	r.Add(modelTables(m, u)...)
	db, worst := net.DetailedBalance(1e-10)
	st := output.NewTable("stationary", "Stationary law", "state", output.Col("probability", "probability", ""))
	for i, s := range net.States {
		st.Add(output.Key(s), s, output.Num(pi[i]))
	}
	cur := net.Currents(pi)
	et := output.NewTable("edges", "Edges (current in the direction from -> to)", "edge",
		output.Col("from", "from", ""), output.Col("to", "to", ""),
		output.Col("rate_forward", "rate from->to", u.Rate()), output.Col("rate_backward", "rate to->from", u.Rate()),
		output.Col("labels", "labels", ""), output.Col("current", "current", u.Rate()), output.Col("log_rate_ratio", "ln(w/w')", "k_BT"))
	for i, e := range net.Edges {
		lab := func(d int) string {
			if e.Label[d] == models.Hidden {
				return "·"
			}
			return net.Labels[e.Label[d]].Name
		}
		from, to := net.States[e.From], net.States[e.To]
		et.Add(fmt.Sprintf("edge_%d", i), fmt.Sprintf("%d: %s-%s", i, from, to),
			output.Text(from), output.Text(to), output.Num(e.Rate[0]), output.Num(e.Rate[1]),
			output.Text(lab(0)+" / "+lab(1)), output.ZeroIf(cur[i], db), output.Num(net.EdgeAffinity(i)))
	}
	ct := output.NewTable("cycles", "Fundamental cycles", "cycle", output.Col("affinity", "affinity", "k_BT"), output.Col("current", "cycle current", u.Rate()))
	for i, cy := range net.CycleBasis() {
		a := output.Num(net.Affinity(cy))
		if math.IsNaN(net.Affinity(cy)) {
			a = output.Undefined("one-way edges in both senses")
		} else if db {
			a = output.ZeroIf(net.Affinity(cy), math.Abs(net.Affinity(cy)) == 0)
		}
		ct.Add(fmt.Sprintf("cycle_%d", i+1), net.CycleName(cy), a, output.ZeroIf(cur[cy.Chord], db))
	}
	sigma := net.EntropyProduction(pi)
	sum := output.NewTable("summary", "Summary", "quantity", output.Col("value", "value", ""), output.Col("unit", "unit", ""))
	sum.Add("sigma", "entropy production sigma", output.ZeroIf(sigma, db), output.Text(u.Entropy()))
	dbText := "no"
	if db {
		dbText = "yes"
	}
	sum.Add("detailed_balance", "detailed balance", output.Text(dbText), output.Empty())
	w := output.Num(worst)
	if math.IsNaN(worst) {
		w = output.Undefined("one-way edges in both senses")
	}
	sum.Add("max_abs_cycle_affinity", "max |cycle affinity|", w, output.Text("k_BT"))
	r.Add(st, et, ct, sum)
	if db {
		r.Note("every cycle affinity is below 1e-10 in size: detailed balance, so currents and sigma are exactly 0 (the numbers would be round-off)")
	}
	if math.IsInf(sigma, 1) {
		r.Note("a one-way edge carries current: every affinity through it is infinite")
	}
	return nil
}

// modelTables shows a model's parameters, labels and affinity constraints.
func modelTables(m *models.Model, u output.TimeUnit) []*output.Table {
	pt := output.NewTable("parameters", "Parameters", "name",
		output.Col("kind", "kind", ""), output.Col("value", "value", ""), output.Col("unit", "unit", ""),
		output.Col("status", "status", ""), output.Col("lower", "lower", ""), output.Col("upper", "upper", ""))
	for _, p := range m.Params {
		kind, status, unit := "rate", "free", u.Rate()
		if p.Kind == models.DetectParam {
			kind, unit = "detection", ""
		}
		if p.Fixed {
			status = "fixed"
		}
		lo, hi := output.Num(p.Lower), output.Num(p.Upper)
		if p.Fixed {
			lo, hi = output.Empty(), output.Empty() // bounds apply to fitting only
		}
		pt.Add(output.Key(p.Name), p.Name, output.Text(kind), output.Num(p.Value), output.Text(unit), output.Text(status), lo, hi)
	}
	vals, err := m.Values(m.Start())
	for i, a := range m.Affinities {
		v := output.Undefined("cannot be solved at the start values")
		if err == nil {
			v = output.Num(vals[a.Solve])
		}
		pt.Add(output.Key(a.Solve), a.Solve, output.Text("rate"), v, output.Text(u.Rate()), output.Text(fmt.Sprintf("solved (affinity[%d])", i)), output.Empty(), output.Empty())
	}
	lt := output.NewTable("labels", "Labels", "label", output.Col("detection", "detection", ""), output.Col("transitions", "transitions", ""))
	for _, l := range m.Labels {
		d := output.Num(l.Detect)
		if l.Param != "" {
			d = output.Text("parameter " + l.Param)
		}
		var on []string
		for _, e := range m.Edges {
			for dir := 0; dir < 2; dir++ {
				if e.Labels[dir] == l.Name {
					on = append(on, e.Between[dir]+"->"+e.Between[1-dir])
				}
			}
		}
		lt.Add(output.Key(l.Name), l.Name, d, output.Text(strings.Join(on, ", ")))
	}
	tables := []*output.Table{pt, lt}
	if len(m.Affinities) > 0 {
		at := output.NewTable("affinity_constraints", "Affinity constraints", "constraint",
			output.Col("cycle", "cycle", ""), output.Col("affinity", "affinity", "k_BT"), output.Col("solve", "solved rate", ""))
		for i, a := range m.Affinities {
			at.Add(fmt.Sprintf("affinity_%d", i), fmt.Sprintf("affinity[%d]", i), output.Text(a.CycleName()), output.Num(a.Value), output.Text(a.Solve))
		}
		tables = append(tables, at)
	}
	return tables
}
