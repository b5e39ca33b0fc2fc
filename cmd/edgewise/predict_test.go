package main

import (
	"bytes"
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
)

// predictJSON runs predict with args and decodes its json report.
func predictJSON(t *testing.T, args ...string) report {
	t.Helper()
	var out, errb bytes.Buffer
	if code := run(append([]string{"predict", "-f", "json"}, args...), &out, &errb); code != 0 {
		t.Fatalf("predict %v: code %d: %s", args, code, errb.String())
	}
	var r report
	if err := json.Unmarshal(out.Bytes(), &r); err != nil {
		t.Fatal(err)
	}
	return r
}

// cell returns the value in the row whose first cell starts with key.
func cell(t *testing.T, r report, title, key string, col int) float64 {
	t.Helper()
	for _, tb := range r.Tables {
		if !strings.HasPrefix(tb.Title, title) {
			continue
		}
		for _, row := range tb.Rows {
			if strings.HasPrefix(row[0], key) {
				v, err := strconv.ParseFloat(row[col], 64)
				if err != nil {
					t.Fatalf("%s/%s: %q", title, key, row[col])
				}
				return v
			}
		}
	}
	t.Fatalf("no row %q in table %q", key, title)
	return 0
}

// TestPredictRing3: for a unicyclic ring with perfect detection the
// effective affinity equals the cycle affinity ln(3*2*1.5/(0.5*0.4*0.6)) =
// 4.31749 (Polettini and Esposito, PRL 119, 240601 (2017)), F*J equals
// sigma (Schnakenberg's sigma = J A for one cycle), the post-selected
// count-stopped slope is F for every n, and the raw slope is not. The
// printed values have 5 significant digits, hence the tolerances.
func TestPredictRing3(t *testing.T) {
	r := predictJSON(t, "../../testdata/ring3.toml", "--n", "5,20")
	A := math.Log(3.0 * 2 * 1.5 / (0.5 * 0.4 * 0.6))
	F := cell(t, r, "Predicted rates", "effective affinity", 1)
	if math.Abs(F-A) > 1e-4 {
		t.Errorf("F = %g, want %g", F, A)
	}
	sigma := cell(t, r, "Predicted rates", "entropy production", 1)
	if fj := cell(t, r, "Predicted rates", "lower bound F*J", 1); math.Abs(fj-sigma) > 1e-4*sigma {
		t.Errorf("F*J = %g, sigma = %g", fj, sigma)
	}
	for _, n := range []string{"5", "20"} {
		if post := cell(t, r, "Count-stopped", n, 2); math.Abs(post-A) > 1e-4 {
			t.Errorf("n=%s: post-selected slope %g, want %g", n, post, A)
		}
		if raw := cell(t, r, "Count-stopped", n, 1); math.Abs(raw-A) < 0.05 {
			t.Errorf("n=%s: raw slope %g should carry the boundary term", n, raw)
		}
	}
}

// TestPredictAgainstData: the demo records were simulated from ring3, so
// every z-score is small (|z| < 4), and a dead time or missed events lower
// the predicted F below the cycle affinity (design notes, section 7).
func TestPredictAgainstData(t *testing.T) {
	r := predictJSON(t, "../../testdata/ring3.toml", "--data", "../../testdata/ring3-demo.csv", "--n", "5")
	for _, key := range []string{"P(+|+)", "P(-|-)", "effective affinity", "current J"} {
		if z := cell(t, r, "Model against data", key, 4); math.Abs(z) > 4 {
			t.Errorf("%s: z = %g", key, z)
		}
	}
	if ll := cell(t, r, "Log-likelihood", "ln L per gap", 1); !(ll < 0) || math.IsInf(ll, 0) {
		t.Errorf("ln L per gap %g", ll)
	}
	if !strings.Contains(r.Checksum, " ") {
		t.Errorf("stamp should carry both inputs' checksums: %q", r.Checksum)
	}
	A := math.Log(3.0 * 2 * 1.5 / (0.5 * 0.4 * 0.6))
	dead := predictJSON(t, "../../testdata/ring3.toml", "--dead-time", "0.02", "--n", "5")
	if F := cell(t, dead, "Predicted rates", "effective affinity", 1); !(F < A-0.01) {
		t.Errorf("dead time: F = %g, want below %g", F, A)
	}
}

// TestPredictErrors: unknown labels in the data name the file and line; a
// bad flag is a usage error; the output is not overwritten.
func TestPredictErrors(t *testing.T) {
	dir := t.TempDir()
	bad := filepath.Join(dir, "bad.csv")
	os.WriteFile(bad, []byte("time,label\n0.5,+\n0.7,x\n"), 0o644)
	var out, errb bytes.Buffer
	if code := run([]string{"predict", "../../testdata/ring3.toml", "--data", bad}, &out, &errb); code != 1 || !strings.Contains(errb.String(), "bad.csv:3") {
		t.Errorf("unknown label: code %d, %s", code, errb.String())
	}
	errb.Reset()
	if code := run([]string{"predict", "../../testdata/ring3.toml", "--labels", "+,nope"}, &out, &errb); code != 2 {
		t.Errorf("bad --labels: code %d", code)
	}
	o := filepath.Join(dir, "p.txt")
	if code := run([]string{"predict", "../../testdata/ring3.toml", "-o", o}, &out, &errb); code != 0 {
		t.Fatal(errb.String())
	}
	if code := run([]string{"predict", "../../testdata/ring3.toml", "-o", o}, &out, &errb); code != 1 {
		t.Errorf("overwrite without --force: code %d", code)
	}
	if code := run([]string{"predict", "--help"}, &out, &errb); code != 0 || !strings.Contains(out.String(), "Example:") {
		t.Errorf("help: code %d", code)
	}
}
