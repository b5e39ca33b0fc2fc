package main

import (
	"bytes"
	"os"
	"strings"
	"testing"
)

const demo = "../../testdata/ring3-demo.csv"

// TestFluctCommand: the worked example runs in every format and shows the
// verdicts, the bounds and the cautions; the ring's post-selected slope at
// n = 3 agrees with F (exact for a ring, Polettini and Esposito 2017).
func TestFluctCommand(t *testing.T) {
	for _, f := range []string{"table", "markdown", "latex", "csv", "json"} {
		var out, errb bytes.Buffer
		code := run([]string{"fluct", demo, "--windows", "3,5", "--fixed-time", "--bounds", "--boot", "50", "--format", f}, &out, &errb)
		if code != 0 {
			t.Fatalf("%s: code %d: %s", f, code, errb.String())
		}
		s := strings.ReplaceAll(out.String(), `\*`, "*") // markdown escapes F*J
		for _, want := range []string{"post-selected", "fixed time", "F*J", "uncertainty relation", "stationarity"} {
			if !strings.Contains(s, want) {
				t.Errorf("%s: %q missing", f, want)
			}
		}
	}
	r := runJSON(t, "fluct", demo, "--windows", "3", "--post-select", "only", "--boot", "50")
	rows := r.table(t, "fluct").Rows
	if len(rows) != 1 || rows[0].Key != "n3_post_selected" || !strings.Contains(rows[0].Cells["reading"].Text, "no evidence against slope = F") {
		t.Errorf("rows %+v", rows)
	}
	if r.Stamp.Seed == nil || *r.Stamp.Seed != 1 || len(r.Stamp.Inputs[0].SHA256) != 64 {
		t.Errorf("stamp: %+v", r.Stamp)
	}
}

// TestFluctStdin: "-" reads standard input and stamps the same checksum as
// the file.
func TestFluctStdin(t *testing.T) {
	f, err := os.Open(demo)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	old := os.Stdin
	os.Stdin = f
	defer func() { os.Stdin = old }()
	ra := runJSON(t, "fluct", "-", "--windows", "3")
	rb := runJSON(t, "fluct", demo, "--windows", "3")
	if ra.Stamp.Inputs[0].SHA256 != rb.Stamp.Inputs[0].SHA256 || ra.Stamp.Inputs[0].Name != "stdin" {
		t.Errorf("inputs %+v and %+v", ra.Stamp.Inputs, rb.Stamp.Inputs)
	}
}

// TestFluctUsage: help with a worked example; bad options are usage
// errors (2), a missing file a failure (1).
func TestFluctUsage(t *testing.T) {
	var out, errb bytes.Buffer
	if code := run([]string{"fluct", "--help"}, &out, &errb); code != 0 || !strings.Contains(out.String(), "Example:") || !strings.Contains(out.String(), "ring4-demo.csv") {
		t.Errorf("help: code %d", code)
	}
	for _, args := range [][]string{
		{"fluct", demo, "--windows", "0"},
		{"fluct", demo, "--windows", "a"},
		{"fluct", demo, "--post-select", "some"},
		{"fluct", demo, "--edge", "+"},
		{"fluct", demo, "--plot", "x.gif"},
		{"fluct", demo, "--figure-width", "10"},
		{"fluct"},
	} {
		errb.Reset()
		if code := run(args, &out, &errb); code != 2 || !strings.HasPrefix(errb.String(), "edgewise fluct: ") {
			t.Errorf("%v: code %d, want 2: %s", args, code, errb.String())
		}
	}
	if code := run([]string{"fluct", "missing.csv"}, &out, &errb); code != 1 {
		t.Errorf("missing file: code %d, want 1", code)
	}
	if code := run([]string{"fluct", demo, "--edge", "a,b"}, &out, &errb); code != 1 || !strings.Contains(errb.String(), "not both in") {
		t.Errorf("unknown labels: code %d: %s", code, errb.String())
	}
}

// TestInspectFluctSameD: inspect and fluct --bounds use one estimator of
// the current's diffusion coefficient, so on the same file with the same
// seed and replicate count they print the same D, SE, interval and method
// (and the same J). The value must also be a number, so that agreement
// of two undefined rows cannot pass.
func TestInspectFluctSameD(t *testing.T) {
	ra := runJSON(t, "inspect", demo, "--seed", "3", "--boot", "150", "--shape-resamples", "0")
	rb := runJSON(t, "fluct", demo, "--windows", "3", "--bounds", "--seed", "3", "--boot", "150")
	for _, q := range []string{"D", "J"} {
		for _, col := range []string{"value", "se", "interval", "method"} {
			a, b := ra.cell(t, "edge", q, col), rb.cell(t, "bounds", q, col)
			if a.Kind != b.Kind || a.Text != b.Text || a.Method != b.Method || (a.Value == nil) != (b.Value == nil) || a.Value != nil && *a.Value != *b.Value ||
				a.Lower != nil && (b.Lower == nil || *a.Lower != *b.Lower || *a.Upper != *b.Upper) {
				t.Errorf("%s %s differs: inspect %+v fluct %+v", q, col, a, b)
			}
		}
	}
	if c := ra.cell(t, "edge", "D", "value"); c.Kind != "number" || !strings.Contains(ra.cell(t, "edge", "D", "method").Text, "jackknife") {
		t.Errorf("D: %+v", c)
	}
}

// TestFluctBoundsWithheld: an instrument stated to break the bounds
// (--dead-time, unequal --detect, --multi-edge) withholds them with the
// reason, through infer.BoundsValid; a bad --detect is a usage error.
func TestFluctBoundsWithheld(t *testing.T) {
	for _, flag := range [][]string{{"--dead-time", "0.05"}, {"--detect", "0.9,0.8"}, {"--multi-edge"}} {
		r := runJSON(t, append([]string{"fluct", demo, "--windows", "5", "--bounds"}, flag...)...)
		withheld := false
		for _, n := range r.Notes {
			withheld = withheld || strings.HasPrefix(n, "entropy-production bounds withheld:")
		}
		if c := r.cell(t, "bounds", "FJ", "value"); c.Kind != "undefined" || !strings.Contains(c.Reason, "withheld") {
			t.Errorf("%v: F*J %+v", flag, c)
		}
		if !withheld {
			t.Errorf("%v: no withholding note: %q", flag, r.Notes)
		}
	}
	var out, errb bytes.Buffer
	if code := run([]string{"fluct", demo, "--bounds", "--detect", "1.2,0.5"}, &out, &errb); code != 2 {
		t.Errorf("bad --detect: code %d", code)
	}
}
