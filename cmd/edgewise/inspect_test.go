package main

import (
	"bytes"
	"encoding/json"
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
	sum := checksum(src)[:12]
	for _, f := range []string{"table", "markdown", "latex", "csv", "json"} {
		var out, errb bytes.Buffer
		if code := run([]string{"inspect", "../../testdata/ring3-demo.csv", "--per-record", "--boot", "200", "--seed", "7", "--format", f}, &out, &errb); code != 0 {
			t.Fatalf("%s: code %d: %s", f, code, errb.String())
		}
		o := out.String()
		for _, want := range []string{"4.3739", "seed 7", "shape of the ++ and --", "second-order Markov", "Holm p", "may be stated"} {
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
		if f != "json" && !strings.Contains(o, sum) {
			t.Errorf("%s: checksum %s missing", f, sum)
		}
		if f == "json" {
			var r report
			if err := json.Unmarshal(out.Bytes(), &r); err != nil || r.Checksum != checksum(src) || len(r.Tables) < 6 {
				t.Errorf("json: %v, %d tables", err, len(r.Tables))
			}
		}
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
	if !strings.Contains(out.String(), "input stdin") || !strings.Contains(out.String(), "\n+,4,") {
		t.Errorf("stdin output:\n%s", out.String())
	}
	bad := filepath.Join(dir, "bad.csv")
	os.WriteFile(bad, []byte("time,label\n1,+\n0.5,-\n"), 0o644)
	out.Reset()
	errb.Reset()
	if code := run([]string{"inspect", bad}, &out, &errb); code != 1 || !strings.Contains(errb.String(), "bad.csv:3:1: time:") {
		t.Errorf("bad file: code %d, stderr %q", code, errb.String())
	}
	if code := run([]string{"inspect", good, "--rename", "fwd=+"}, &out, &errb); code != 1 || !strings.Contains(errb.String(), `unknown label "bwd"`) {
		t.Errorf("unknown label: code %d, stderr %q", code, errb.String())
	}
	if code := run([]string{"inspect", good, "--rename", "fwd"}, &out, &errb); code != 2 {
		t.Errorf("bad --labels: code %d", code)
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
}

// TestSimulateInspectRoundTrip: records written by simulate are read back
// by inspect with the right counts.
func TestSimulateInspectRoundTrip(t *testing.T) {
	dir := t.TempDir()
	p := filepath.Join(dir, "sim.csv")
	var out, errb bytes.Buffer
	if code := run([]string{"simulate", "../../testdata/ring3.toml", "-n", "3000", "-r", "2", "--seed", "3", "-o", p}, &out, &errb); code != 0 {
		t.Fatalf("simulate: %s", errb.String())
	}
	if code := run([]string{"inspect", p, "--format", "csv"}, &out, &errb); code != 0 {
		t.Fatalf("inspect: %s", errb.String())
	}
	if !strings.Contains(out.String(), "records,2\n") || !strings.Contains(out.String(), "events,6000\n") {
		t.Errorf("output:\n%s", out.String())
	}
}

// TestInspectTrace: a state trace becomes labelled events "X>Y"; the
// shipped example (600 samples of a three-state ring) has 58 changes of
// state, of which 13 are A>B.
func TestInspectTrace(t *testing.T) {
	var out, errb bytes.Buffer
	if code := run([]string{"inspect", "../../testdata/infer/ring3-trace.csv", "--edge", "A>B,B>A", "--format", "csv"}, &out, &errb); code != 0 {
		t.Fatalf("code %d: %s", code, errb.String())
	}
	for _, want := range []string{"events,58\n", "file kind,state trace\n", "A>B,13,", "neither a ++ pair"} {
		if !strings.Contains(out.String(), want) {
			t.Errorf("%q missing:\n%s", want, out.String())
		}
	}
	if strings.Contains(out.String(), "F, bootstrap") {
		t.Error("bootstrap row shown for an undefined F")
	}
}
