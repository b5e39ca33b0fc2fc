package main

import (
	"fmt"
	"io"
	"math"
	"strings"

	"edgewise/models"
)

const describeHelp = `Usage: edgewise describe MODEL.toml [options]

Print a model and its properties at its start values: parameters (free,
fixed or solved from an affinity constraint, with bounds), labels with
their detection probabilities, the affinity constraints, the stationary
law, edge currents, fundamental cycles with their affinities (k_BT), and
the entropy production rate (k_B per unit time).

Example:
  edgewise describe testdata/ring3.toml --format markdown

Options:
`

func cmdDescribe(args []string, stdout, stderr io.Writer) int {
	fs := newFlags("describe", describeHelp, args, stdout, stderr)
	format := fs.StringP("format", "f", "table", "output format: "+formats)
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
	path := fs.Arg(0)
	src, m, net, err := loadModel(path)
	if err != nil {
		fmt.Fprintf(stderr, "edgewise: %v\n", err)
		return 1
	}
	pi, err := net.Stationary()
	if err != nil {
		fmt.Fprintf(stderr, "edgewise: %v\n", err)
		return 1
	}
	g := num
	r := &report{Tool: "edgewise " + version, Command: "describe", Input: path, Checksum: checksum(src)}
	st := table{Title: "Stationary law", Columns: []string{"state", "probability"}}
	for i, s := range net.States {
		st.Rows = append(st.Rows, []string{s, g(pi[i])})
	}
	cur := net.Currents(pi)
	et := table{Title: "Edges (current in the direction from->to, 1/time)", Columns: []string{"edge", "from", "to", "rate from->to", "rate to->from", "labels", "current", "ln(w/w')"}}
	for i, e := range net.Edges {
		lab := func(d int) string {
			if e.Label[d] == models.Hidden {
				return "·"
			}
			return net.Labels[e.Label[d]].Name
		}
		et.Rows = append(et.Rows, []string{fmt.Sprint(i), net.States[e.From], net.States[e.To], g(e.Rate[0]), g(e.Rate[1]), lab(0) + " / " + lab(1), g(cur[i]), g(net.EdgeAffinity(i))})
	}
	ct := table{Title: "Fundamental cycles", Columns: []string{"cycle", "affinity (k_BT)", "cycle current"}}
	for _, c := range net.CycleBasis() {
		a := g(net.Affinity(c))
		if math.IsNaN(net.Affinity(c)) {
			a = "undefined (one-way edges in both senses)"
		}
		ct.Rows = append(ct.Rows, []string{net.CycleName(c), a, g(cur[c.Chord])})
	}
	sigma := net.EntropyProduction(pi)
	db, worst := net.DetailedBalance(1e-10)
	sum := table{Title: "Summary", Columns: []string{"quantity", "value"}, Rows: [][]string{
		{"entropy production sigma (k_B/time)", g(sigma)},
		{"detailed balance", fmt.Sprintf("%v (max |cycle affinity| %s)", db, strings.Replace(g(worst), "NaN", "undefined", 1))},
	}}
	r.Tables = append(modelTables(m), st, et, ct, sum)
	if math.IsInf(sigma, 1) {
		r.Notes = append(r.Notes, "a one-way edge carries current: every affinity through it is infinite")
	}
	if err := emit(*out, *force, stdout, func(w io.Writer) error { return r.write(w, *format) }); err != nil {
		fmt.Fprintf(stderr, "edgewise: %v\n", err)
		return 1
	}
	return 0
}

// modelTables shows a model's parameters, labels and affinity constraints.
func modelTables(m *models.Model) []table {
	g := num
	pt := table{Title: "Parameters (rates in 1/time, detection probabilities without unit)", Columns: []string{"name", "kind", "value", "status", "lower", "upper"}}
	for _, p := range m.Params {
		kind, status := "rate", "free"
		if p.Kind == models.DetectParam {
			kind = "detection"
		}
		if p.Fixed {
			status = "fixed"
		}
		lo, hi := g(p.Lower), g(p.Upper)
		if p.Fixed {
			lo, hi = "", "" // bounds apply to fitting only
		}
		pt.Rows = append(pt.Rows, []string{p.Name, kind, g(p.Value), status, lo, hi})
	}
	vals, err := m.Values(m.Start())
	for i, a := range m.Affinities {
		v := "?"
		if err == nil {
			v = g(vals[a.Solve])
		}
		pt.Rows = append(pt.Rows, []string{a.Solve, "rate", v, fmt.Sprintf("solved (affinity[%d])", i), "", ""})
	}
	lt := table{Title: "Labels", Columns: []string{"label", "detection", "transitions"}}
	for _, l := range m.Labels {
		d := g(l.Detect)
		if l.Param != "" {
			d = "parameter " + l.Param
		}
		var on []string
		for _, e := range m.Edges {
			for dir := 0; dir < 2; dir++ {
				if e.Labels[dir] == l.Name {
					on = append(on, e.Between[dir]+"->"+e.Between[1-dir])
				}
			}
		}
		lt.Rows = append(lt.Rows, []string{l.Name, d, strings.Join(on, ", ")})
	}
	tables := []table{pt, lt}
	if len(m.Affinities) > 0 {
		at := table{Title: "Affinity constraints", Columns: []string{"constraint", "cycle", "affinity (k_BT)", "solved rate"}}
		for i, a := range m.Affinities {
			at.Rows = append(at.Rows, []string{fmt.Sprintf("affinity[%d]", i), a.CycleName(), g(a.Value), a.Solve})
		}
		tables = append(tables, at)
	}
	return tables
}
