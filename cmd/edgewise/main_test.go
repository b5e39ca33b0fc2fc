package main

import (
	"bytes"
	"encoding/csv"
	"encoding/json"
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

// TestDescribeRing3: the cycle affinity of the shipped ring equals
// ln(3*2*1.5/(0.5*0.4*0.6)) = 4.3175 (cycle affinity definition,
// Schnakenberg, Rev. Mod. Phys. 48, 571 (1976)), in every format: the csv
// is parsed with comment lines skipped, the json decoded, and the cell is
// found in the cycles table, with its sign.
func TestDescribeRing3(t *testing.T) {
	want := []string{"B-C-A-B", "4.3175"}
	for _, f := range []string{"table", "markdown", "latex", "csv", "json"} {
		var out, errb bytes.Buffer
		if code := run([]string{"describe", "../../testdata/ring3.toml", "--format", f}, &out, &errb); code != 0 {
			t.Fatalf("%s: code %d: %s", f, code, errb.String())
		}
		found := false
		switch f {
		case "csv":
			cr := csv.NewReader(strings.NewReader(out.String()))
			cr.Comment, cr.FieldsPerRecord = '#', -1
			rows, err := cr.ReadAll()
			if err != nil {
				t.Fatalf("csv does not parse: %v", err)
			}
			for _, row := range rows {
				found = found || (len(row) >= 2 && row[0] == want[0] && row[1] == want[1])
			}
		case "json":
			var r report
			if err := json.Unmarshal(out.Bytes(), &r); err != nil {
				t.Fatalf("json does not parse: %v", err)
			}
			for _, tb := range r.Tables {
				for _, row := range tb.Rows {
					found = found || (tb.Title == "Fundamental cycles" && row[0] == want[0] && row[1] == want[1])
				}
			}
		default:
			sep := map[string]string{"table": " │ ", "markdown": " | ", "latex": " & "}[f]
			found = strings.Contains(out.String(), want[0]+sep+want[1])
		}
		if !found {
			t.Errorf("%s: cycle %s with affinity %s missing:\n%s", f, want[0], want[1], out.String())
		}
	}
	var out, errb bytes.Buffer
	if code := run([]string{"describe", "missing.toml"}, &out, &errb); code != 1 {
		t.Errorf("missing file: code %d, want 1", code)
	}
	if code := run([]string{"describe", "--format", "nope", "../../testdata/ring3.toml"}, &out, &errb); code != 2 {
		t.Errorf("bad format: code %d, want 2", code)
	}
	if code := run([]string{"describe", "--help"}, &out, &errb); code != 0 || !strings.Contains(out.String(), "Example:") {
		t.Errorf("help: code %d", code)
	}
}

// TestDescribeConstraintsAndLatex: a spec with two affinity constraints
// shows the solved rates and the cycles with exactly the imposed
// affinities; latex output is a booktabs table with escaped specials.
func TestDescribeConstraintsAndLatex(t *testing.T) {
	var out, errb bytes.Buffer
	if code := run([]string{"describe", "../../testdata/offedge.toml", "-f", "csv"}, &out, &errb); code != 0 {
		t.Fatalf("code %d: %s", code, errb.String())
	}
	for _, want := range []string{"kbo,rate,0.36244,solved (affinity[0])", "affinity[0],Open-Shut-Bound-Open,1,kbo", "Shut-Bound-Open-Shut,1,", "Bound-Charged-Open-Bound,4,"} {
		if !strings.Contains(out.String(), want) {
			t.Errorf("missing %q in\n%s", want, out.String())
		}
	}
	out.Reset()
	if code := run([]string{"describe", "../../testdata/ring3.toml", "-f", "latex"}, &out, &errb); code != 0 {
		t.Fatalf("code %d: %s", code, errb.String())
	}
	s := out.String()
	if strings.Count(s, "\\toprule") != strings.Count(s, "\\bottomrule") || !strings.Contains(s, "affinity (k\\_BT)") || strings.Contains(s, "k_BT") {
		t.Errorf("latex output malformed:\n%s", s)
	}
	if got := texRow([]string{"[1, 2]", "[3]"}); got != `{}[1, 2] & [3]` {
		t.Errorf("texRow: %s", got)
	}
	if got := texEscape(`50% of a_b & {x} $1 #2 ~ ^ \`); got != `50\% of a\_b \& \{x\} \$1 \#2 \textasciitilde{} \textasciicircum{} \textbackslash{}` {
		t.Errorf("texEscape: %s", got)
	}
}

// TestSimulateDeterministicAndSafe: the same seed gives byte-identical
// files, an existing file is kept without --force, and the event count is
// as asked.
func TestSimulateDeterministicAndSafe(t *testing.T) {
	dir := t.TempDir()
	a, b := filepath.Join(dir, "a.csv"), filepath.Join(dir, "b.csv")
	var out, errb bytes.Buffer
	for _, p := range []string{a, b} {
		if code := run([]string{"simulate", "../../testdata/ring3.toml", "-n", "500", "-r", "3", "--seed", "9", "-o", p}, &out, &errb); code != 0 {
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
