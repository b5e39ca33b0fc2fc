package main

import (
	"bytes"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestInspectDemo: inspect reads the shipped demo records in every format;
// the estimate of F (4.3739, cycle affinity of the generating ring 4.3175)
// and the stamp (version, input checksum, seed) appear in each.
func TestInspectDemo(t *testing.T) {
	src, err := os.ReadFile("../../testdata/ring3-demo.csv")
	if err != nil {
		t.Fatal(err)
	}
	sum := checksum(src)
	for _, f := range []string{"table", "markdown", "latex", "csv"} {
		var out, errb bytes.Buffer
		if code := run([]string{"inspect", "../../testdata/ring3-demo.csv", "--per-record", "--boot", "200", "--seed", "7", "--format", f}, &out, &errb); code != 0 {
			t.Fatalf("%s: code %d: %s", f, code, errb.String())
		}
		o := out.String()
		for _, want := range []string{"4.3739", "seed 7", "shape of the ++ and --", "second-order Markov", "Holm p", "may be stated", sum[:12]} {
			if !strings.Contains(o, want) {
				t.Errorf("%s: %q missing", f, want)
			}
		}
		if f == "markdown" {
			// Every table line has one more unescaped "|" than columns.
			cols := 0
			for _, line := range strings.Split(o, "\n") {
				if !strings.HasPrefix(line, "|") {
					cols = 0
					continue
				}
				n := strings.Count(line, "|") - strings.Count(line, `\|`)
				if cols == 0 {
					cols = n
				} else if n != cols {
					t.Errorf("markdown row with %d separators, header %d: %s", n, cols, line)
				}
			}
		}
	}
	r := runJSON(t, "inspect", "../../testdata/ring3-demo.csv", "--per-record", "--boot", "200", "--seed", "7")
	if len(r.Stamp.Inputs) != 1 || r.Stamp.Inputs[0].SHA256 != sum || r.Stamp.Seed == nil || *r.Stamp.Seed != 7 || len(r.Tables) < 6 {
		t.Errorf("json stamp %+v, %d tables", r.Stamp, len(r.Tables))
	}
	if F := r.num(t, "edge", "F", "value"); math.Abs(F-4.3739) > 1e-4 {
		t.Errorf("F = %g", F)
	}
}

// TestInspectStdinAndErrors: "-" reads standard input; a bad file fails with
// exit code 1 and a message naming file, line and column; bad usage is 2;
// -o refuses to overwrite without --force.
func TestInspectStdinAndErrors(t *testing.T) {
	dir := t.TempDir()
	good := filepath.Join(dir, "good.tsv")
	os.WriteFile(good, []byte("time\tlabel\n0\tfwd\n1\tfwd\n1.5\tbwd\n2\tfwd\n3\tfwd\n"), 0o644)
	in, err := os.Open(good)
	if err != nil {
		t.Fatal(err)
	}
	defer in.Close()
	old := os.Stdin
	os.Stdin = in
	defer func() { os.Stdin = old }()
	var out, errb bytes.Buffer
	if code := run([]string{"inspect", "-", "--rename", "fwd=+,bwd=-", "--format", "csv"}, &out, &errb); code != 0 {
		t.Fatalf("stdin: code %d: %s", code, errb.String())
	}
	if !strings.Contains(out.String(), "; stdin sha256") || !strings.Contains(out.String(), "\nlabels,plus,+,count,count,,count,4,") {
		t.Errorf("stdin output:\n%s", out.String())
	}
	bad := filepath.Join(dir, "bad.csv")
	os.WriteFile(bad, []byte("time,label\n1,+\n0.5,-\n"), 0o644)
	out.Reset()
	errb.Reset()
	if code := run([]string{"inspect", bad}, &out, &errb); code != 1 || !strings.Contains(errb.String(), "edgewise inspect: ") || !strings.Contains(errb.String(), "bad.csv:3:1: time:") {
		t.Errorf("bad file: code %d, stderr %q", code, errb.String())
	}
	if code := run([]string{"inspect", good, "--rename", "fwd=+"}, &out, &errb); code != 1 || !strings.Contains(errb.String(), `unknown label "bwd"`) {
		t.Errorf("unknown label: code %d, stderr %q", code, errb.String())
	}
	if code := run([]string{"inspect", good, "--rename", "fwd"}, &out, &errb); code != 2 {
		t.Errorf("bad --rename: code %d", code)
	}
	if code := run([]string{"inspect", good, "--format", "nope"}, &out, &errb); code != 2 {
		t.Errorf("bad format: code %d", code)
	}
	if code := run([]string{"inspect", "--help"}, &out, &errb); code != 0 || !strings.Contains(out.String(), "testdata/ring3-demo.csv") {
		t.Errorf("help: code %d", code)
	}
	o := filepath.Join(dir, "o.md")
	for i, want := range []int{0, 1} {
		if code := run([]string{"inspect", good, "--rename", "fwd=+,bwd=-", "-o", o, "--format", "markdown"}, &out, &errb); code != want {
			t.Errorf("write %d: code %d, want %d", i, code, want)
		}
	}
	if code := run([]string{"inspect", good, "--rename", "fwd=+,bwd=-", "-o", o, "--force"}, &out, &errb); code != 0 {
		t.Errorf("--force: code %d", code)
	}
	// The old name of --fano-events still works, with a note on stderr.
	errb.Reset()
	if code := run([]string{"inspect", good, "--rename", "fwd=+,bwd=-", "--window", "3", "-o", "/dev/null"}, &out, &errb); code != 0 || !strings.Contains(errb.String(), "--fano-events") {
		t.Errorf("--window: code %d: %s", code, errb.String())
	}
}

// TestSimulateInspectRoundTrip: records written by simulate are read back
// by inspect with the right counts, and the time unit of the stamp is
// used and said.
func TestSimulateInspectRoundTrip(t *testing.T) {
	dir := t.TempDir()
	p := filepath.Join(dir, "sim.csv")
	var out, errb bytes.Buffer
	if code := run([]string{"simulate", "../../testdata/ring3.toml", "-n", "3000", "-r", "2", "--seed", "3", "--time-unit", "ms", "-o", p}, &out, &errb); code != 0 {
		t.Fatalf("simulate: %s", errb.String())
	}
	r := runJSON(t, "inspect", p, "--boot", "0", "--shape-resamples", "0")
	if r.num(t, "data", "records", "value") != 2 || r.num(t, "data", "events", "value") != 6000 {
		t.Errorf("records/events wrong")
	}
	if r.Stamp.TimeUnit == nil || *r.Stamp.TimeUnit != "ms" || r.table(t, "labels").Columns[1].Unit != "1/ms" {
		t.Errorf("time unit not read back: %v", r.table(t, "labels").Columns)
	}
	found := false
	for _, n := range r.Notes {
		found = found || strings.Contains(n, "time unit ms read from the records' stamp")
	}
	if !found {
		t.Errorf("no note on the time unit: %v", r.Notes)
	}
}

// TestInspectTrace: a state trace becomes labelled events "X>Y"; the
// shipped example (600 samples of a three-state ring) has 58 changes of
// state, of which 13 are A>B. Without --edge, its six labels are an error
// that names them and shows the --edge to write.
func TestInspectTrace(t *testing.T) {
	r := runJSON(t, "inspect", "../../testdata/infer/ring3-trace.csv", "--edge", "A>B,B>A")
	if r.num(t, "data", "events", "value") != 58 || r.cell(t, "data", "file_kind", "value").Text != "state trace" || r.num(t, "labels", "A_B", "count") != 13 {
		t.Errorf("trace counts wrong")
	}
	if _, ok := r.table(t, "edge").row("F_bootstrap"); ok {
		t.Error("bootstrap row shown for an undefined F")
	}
	if c := r.cell(t, "edge", "F", "value"); c.Kind != "undefined" || !strings.Contains(c.Reason, "neither a ++ pair") {
		t.Errorf("F: %+v", c)
	}
	var out, errb bytes.Buffer
	if code := run([]string{"inspect", "../../testdata/infer/ring3-trace.csv"}, &out, &errb); code != 2 || !strings.Contains(errb.String(), "6 labels") || !strings.Contains(errb.String(), "--edge A>B,") {
		t.Errorf("many labels without --edge: code %d: %s", code, errb.String())
	}
}

// TestWrongKindOfFile: a spec where records are expected, and records
// where a spec is expected, get a message saying so and the usage line,
// with exit code 2.
func TestWrongKindOfFile(t *testing.T) {
	for _, c := range []struct {
		args []string
		want string
	}{
		{[]string{"inspect", "../../testdata/ring3.toml"}, "this looks like a model spec (TOML), not records"},
		{[]string{"fluct", "../../testdata/ring3.toml"}, "this looks like a model spec (TOML), not records"},
		{[]string{"describe", "../../testdata/ring3-demo.csv"}, "this looks like records"},
		{[]string{"simulate", "../../testdata/ring3-demo.csv"}, "this looks like records"},
		{[]string{"predict", "../../testdata/ring3-demo.csv"}, "this looks like records"},
		{[]string{"predict", "../../testdata/ring3.toml", "../../testdata/ring3-demo.csv"}, "this looks like records"},
		{[]string{"predict", "../../testdata/ring3.toml", "../../testdata/ring3.toml"}, "this looks like a model spec (TOML), not records"},
	} {
		var out, errb bytes.Buffer
		code := run(c.args, &out, &errb)
		if code != 2 || !strings.Contains(errb.String(), c.want) || !strings.Contains(errb.String(), "Usage: edgewise "+c.args[0]) {
			t.Errorf("%v: code %d: %s", c.args, code, errb.String())
		}
	}
}
