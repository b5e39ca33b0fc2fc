package main

import (
	"bytes"
	"encoding/csv"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

func TestRunExitCodes(t *testing.T) {
	var out, errb bytes.Buffer
	if code := run([]string{"version"}, &out, &errb); code != 0 || !strings.Contains(out.String(), version) {
		t.Fatalf("version: code %d out %q", code, out.String())
	}
	if code := run(nil, &out, &errb); code != 2 {
		t.Fatalf("no command: code %d, want 2", code)
	}
	if code := run([]string{"nonsense"}, &out, &errb); code != 2 {
		t.Fatalf("unknown command: code %d, want 2", code)
	}
}

// TestHelpCommand: "edgewise help CMD" prints exactly "edgewise CMD
// --help", for every command.
func TestHelpCommand(t *testing.T) {
	for cmd := range commands {
		var a, b, errb bytes.Buffer
		if code := run([]string{"help", cmd}, &a, &errb); code != 0 {
			t.Fatalf("help %s: code %d", cmd, code)
		}
		if code := run([]string{cmd, "--help"}, &b, &errb); code != 0 {
			t.Fatalf("%s --help: code %d", cmd, code)
		}
		if a.String() != b.String() || !strings.Contains(a.String(), "Example:") {
			t.Errorf("help %s differs from %s --help", cmd, cmd)
		}
	}
	var out, errb bytes.Buffer
	if code := run([]string{"help", "nope"}, &out, &errb); code != 2 {
		t.Errorf("help of an unknown command: code %d", code)
	}
}

// TestDescribeRing3: the cycle affinity of the shipped ring equals
// ln(3*2*1.5/(0.5*0.4*0.6)) = 4.3175 (cycle affinity definition,
// Schnakenberg, Rev. Mod. Phys. 48, 571 (1976)), in every format: the csv
// is parsed with comment lines skipped, the json decoded, and the cell is
// found in the cycles table, with its sign.
func TestDescribeRing3(t *testing.T) {
	A := math.Log(3.0 * 2 * 1.5 / (0.5 * 0.4 * 0.6))
	for _, f := range []string{"table", "markdown", "latex", "csv", "json"} {
		var out, errb bytes.Buffer
		if code := run([]string{"describe", "../../testdata/ring3.toml", "--format", f}, &out, &errb); code != 0 {
			t.Fatalf("%s: code %d: %s", f, code, errb.String())
		}
		found := false
		switch f {
		case "csv":
			cr := csv.NewReader(strings.NewReader(out.String()))
			cr.Comment = '#'
			rows, err := cr.ReadAll()
			if err != nil {
				t.Fatalf("csv does not parse: %v", err)
			}
			for _, row := range rows {
				found = found || (row[0] == "cycles" && row[2] == "B-C-A-B" && row[3] == "affinity" && strings.HasPrefix(row[7], "4.3174"))
			}
		case "json":
			r := runJSON(t, "describe", "../../testdata/ring3.toml")
			found = r.table(t, "cycles").Rows[0].Label == "B-C-A-B" && math.Abs(r.num(t, "cycles", "cycle_1", "affinity")-A) < 1e-12
		default:
			found = strings.Contains(out.String(), "B-C-A-B") && strings.Contains(out.String(), "4.3175")
		}
		if !found {
			t.Errorf("%s: cycle B-C-A-B with affinity 4.3175 missing:\n%s", f, out.String())
		}
	}
	var out, errb bytes.Buffer
	if code := run([]string{"describe", "missing.toml"}, &out, &errb); code != 1 || !strings.HasPrefix(errb.String(), "edgewise describe: ") {
		t.Errorf("missing file: code %d, %q", code, errb.String())
	}
	if code := run([]string{"describe", "--format", "nope", "../../testdata/ring3.toml"}, &out, &errb); code != 2 {
		t.Errorf("bad format: code %d, want 2", code)
	}
	if code := run([]string{"describe", "--help"}, &out, &errb); code != 0 || !strings.Contains(out.String(), "Example:") {
		t.Errorf("help: code %d", code)
	}
}

// TestDescribeConstraints: a spec with two affinity constraints shows the
// solved rates and the cycles with exactly the imposed affinities; at
// detailed balance currents and sigma are exactly 0 (not round-off).
func TestDescribeConstraints(t *testing.T) {
	r := runJSON(t, "describe", "../../testdata/offedge.toml")
	if v := r.num(t, "parameters", "kbo", "value"); math.Abs(v-0.36244) > 1e-5 {
		t.Errorf("kbo = %g", v)
	}
	if c := r.cell(t, "affinity_constraints", "affinity_0", "cycle"); c.Text != "Open-Shut-Bound-Open" {
		t.Errorf("constraint cycle %q", c.Text)
	}
	want := map[string]float64{"Shut-Bound-Open-Shut": 1, "Bound-Charged-Open-Bound": 4}
	for _, row := range r.table(t, "cycles").Rows {
		if w, ok := want[row.Label]; ok {
			if v := *row.Cells["affinity"].Value; math.Abs(v-w) > 1e-12 {
				t.Errorf("%s: affinity %g, want %g", row.Label, v, w)
			}
			delete(want, row.Label)
		}
	}
	if len(want) > 0 {
		t.Errorf("cycles missing: %v", want)
	}
	b := runJSON(t, "describe", "../../testdata/balanced.toml")
	if c := b.cell(t, "summary", "sigma", "value"); c.Kind != "zero" {
		t.Errorf("balanced sigma: %+v, want an exact zero", c)
	}
	for _, row := range b.table(t, "edges").Rows {
		if c := row.Cells["current"]; c.Kind != "zero" {
			t.Errorf("balanced current %s: %+v", row.Label, c)
		}
	}
}

// TestSimulateDeterministicAndSafe: the same seed gives byte-identical
// files, an existing file is kept without --force, and the event count is
// as asked; the stamp records the instrument, time unit and edge.
func TestSimulateDeterministicAndSafe(t *testing.T) {
	dir := t.TempDir()
	a, b := filepath.Join(dir, "a.csv"), filepath.Join(dir, "b.csv")
	var out, errb bytes.Buffer
	for _, p := range []string{a, b} {
		if code := run([]string{"simulate", "../../testdata/ring3.toml", "-n", "500", "-r", "3", "--seed", "9", "--time-unit", "ms", "-o", p}, &out, &errb); code != 0 {
			t.Fatalf("code %d: %s", code, errb.String())
		}
	}
	x, _ := os.ReadFile(a)
	y, _ := os.ReadFile(b)
	if !bytes.Equal(x, y) {
		t.Fatal("same seed, different output")
	}
	if n := strings.Count(string(x), "\n"); n != 2+1500 {
		t.Fatalf("%d lines, want 1502", n)
	}
	first, _, _ := strings.Cut(string(x), "\n")
	st := parseSimStamp(strings.TrimPrefix(first, "# "))
	for k, v := range map[string]string{"seed": "9", "events": "500", "records": "3", "dead_time": "0", "frame": "0", "time_unit": "ms", "edge": "+,-", "spec": "ring3.toml"} {
		if st[k] != v {
			t.Errorf("stamp %s = %q, want %q (%s)", k, st[k], v, first)
		}
	}
	if code := run([]string{"simulate", "../../testdata/ring3.toml", "-o", a}, &out, &errb); code != 1 {
		t.Fatalf("overwrite without --force: code %d", code)
	}
	y, _ = os.ReadFile(a)
	if !bytes.Equal(x, y) {
		t.Fatal("file changed without --force")
	}
	// Outputs are readable by others (CreateTemp alone would leave 0600).
	if st, err := os.Stat(a); err != nil || st.Mode().Perm() != 0o644 {
		t.Fatalf("output mode %v (%v), want -rw-r--r--", st.Mode().Perm(), err)
	}
}

// TestParseOldStamp: the stamp of the shipped demo records (written
// before the stamp had semicolons) is read.
func TestParseOldStamp(t *testing.T) {
	st := parseSimStamp("edgewise 0.1.0-dev simulate ring3.toml sha256 7ac5994f2645 seed 1 events 5000 records 4 dead-time 0.5 frame 0")
	if st["dead_time"] != "0.5" || st["seed"] != "1" || st["records"] != "4" {
		t.Errorf("%v", st)
	}
	if parseSimStamp("made by hand") != nil {
		t.Error("a plain comment read as a stamp")
	}
}
