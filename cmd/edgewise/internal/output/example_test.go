package output_test

import (
	"math"
	"os"

	"edgewise/cmd/edgewise/internal/output"
)

// A command builds a report of typed cells and renders it in any format.
func Example() {
	u := output.TimeUnit("ms")
	t := output.NewTable("affinity", "Effective affinity of the visible edge", "quantity",
		output.Col("value", "value", ""),
		output.Col("se", "SE", ""),
		output.Col("interval", "95% interval", ""),
	)
	t.Add("F", "F = ln[P(+|+)/P(-|-)] (k_BT)", output.Num(1.23456789), output.Num(0.0123), output.Interval(1.21, 1.26, 0.95, "delta method"))
	t.Add("J", "current J ("+u.Rate()+")", output.ZeroIf(-3.9e-17, true), output.Undefined("too few events"), output.Empty())
	t.Add("lnL", "ln L (nats)", output.Fixed(-334271.234567, 2), output.Empty(), output.Empty())
	t.Add("z", "z of F", output.Num(math.Inf(1)), output.Empty(), output.Empty())
	r := &output.Report{
		Command: "inspect",
		Stamp:   output.Stamp{Tool: "edgewise 1.0", Inputs: []output.Input{{Name: "a.csv", SHA256: "0123456789abcdef"}}, Seed: output.SeedOf(7), TimeUnit: u},
		Tables:  []*output.Table{t},
	}
	r.Note("estimates assume stationary records")
	if err := output.Render(os.Stdout, r, output.Terminal, output.Options{Width: 80}); err != nil {
		panic(err)
	}
	if err := output.Render(os.Stdout, r, output.CSV, output.Options{}); err != nil {
		panic(err)
	}
	// Output:
	// Effective affinity of the visible edge
	// quantity                           value      SE  95% interval
	// ──────────────────────────────────────────────────────────────
	// F = ln[P(+|+)/P(-|-)] (k_BT)      1.2346  0.0123  [1.21, 1.26]
	// current J (1/ms)                       0    n/aᵃ
	// ln L (nats)                   -334271.23
	// z of F                              +inf
	//
	// ᵃ too few events
	//
	// Notes
	// 1. estimates assume stationary records
	//
	// (edgewise 1.0 inspect; a.csv sha256 0123456789ab; seed 7; time unit ms)
	// # edgewise 1.0 inspect; a.csv sha256 0123456789abcdef; seed 7; time unit ms
	// table,row,row_label,column,column_label,unit,kind,value,lower,upper,level,method,text,reason,note
	// affinity,F,F = ln[P(+|+)/P(-|-)] (k_BT),value,value,,number,1.23456789,,,,,,,
	// affinity,F,F = ln[P(+|+)/P(-|-)] (k_BT),se,SE,,number,0.0123,,,,,,,
	// affinity,F,F = ln[P(+|+)/P(-|-)] (k_BT),interval,95% interval,,interval,,1.21,1.26,0.95,delta method,,,
	// affinity,J,current J (1/ms),value,value,,zero,0,,,,,,,
	// affinity,J,current J (1/ms),se,SE,,undefined,nan,,,,,,too few events,
	// affinity,lnL,ln L (nats),value,value,,fixed,-334271.234567,,,,,,,
	// affinity,z,z of F,value,value,,number,inf,,,,,,+inf,
	// notes,note_1,,note,note,,text,,,,,,estimates assume stationary records,,
}
