package main

import (
	"fmt"
	"io"
	"math"
	"strconv"

	"edgewise/models"
)

const describeHelp = `Usage: edgewise describe MODEL.toml [options]

Print the properties of a model at its start values: stationary law, edge
currents, fundamental cycles with their affinities (k_BT), and the entropy
production rate (k_B per unit time).

Example:
  edgewise describe testdata/ring3.toml --format markdown

Options:
`

func cmdDescribe(args []string, stdout, stderr io.Writer) int {
	fs := newFlags("describe", describeHelp, args, stdout, stderr)
	format := fs.StringP("format", "f", "table", "output format: table, markdown, csv or json")
	if code := parseFlags(fs, args); code >= 0 {
		return code
	}
	if fs.NArg() != 1 {
		fs.Usage()
		return 2
	}
	path := fs.Arg(0)
	src, net, err := loadModel(path)
	if err != nil {
		fmt.Fprintf(stderr, "edgewise: %v\n", err)
		return 1
	}
	pi, err := net.Stationary()
	if err != nil {
		fmt.Fprintf(stderr, "edgewise: %v\n", err)
		return 1
	}
	g := func(x float64) string { return strconv.FormatFloat(x, 'g', 6, 64) }
	r := &report{Tool: "edgewise " + version, Command: "describe", Input: path, Checksum: checksum(src)}
	st := table{Title: "Stationary law", Columns: []string{"state", "probability"}}
	for i, s := range net.States {
		st.Rows = append(st.Rows, []string{s, g(pi[i])})
	}
	cur := net.Currents(pi)
	et := table{Title: "Edges (current in the direction from->to, 1/time)", Columns: []string{"from", "to", "rate from->to", "rate to->from", "labels", "current", "ln(w/w')"}}
	for i, e := range net.Edges {
		lab := func(d int) string {
			if e.Label[d] == models.Hidden {
				return "·"
			}
			return net.Labels[e.Label[d]].Name
		}
		et.Rows = append(et.Rows, []string{net.States[e.From], net.States[e.To], g(e.Rate[0]), g(e.Rate[1]), lab(0) + " / " + lab(1), g(cur[i]), g(net.EdgeAffinity(i))})
	}
	ct := table{Title: "Fundamental cycles", Columns: []string{"cycle", "affinity (k_BT)", "cycle current"}}
	for _, c := range net.CycleBasis() {
		ct.Rows = append(ct.Rows, []string{c.Names(net.States), g(net.Affinity(c)), g(cur[c.Chord])})
	}
	sigma := net.EntropyProduction(pi)
	db, worst := net.DetailedBalance(1e-10)
	sum := table{Title: "Summary", Columns: []string{"quantity", "value"}, Rows: [][]string{
		{"entropy production sigma (k_B/time)", g(sigma)},
		{"detailed balance", fmt.Sprintf("%v (max |cycle affinity| %s)", db, g(worst))},
	}}
	r.Tables = []table{st, et, ct, sum}
	if math.IsInf(sigma, 1) {
		r.Notes = append(r.Notes, "a one-way edge carries current: every affinity through it is infinite")
	}
	if err := r.write(stdout, *format); err != nil {
		fmt.Fprintf(stderr, "edgewise: %v\n", err)
		return 2
	}
	return 0
}
