package main

import (
	"bytes"
	"encoding/json"
	"fmt"
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
	r := predictJSON(t, "../../testdata/ring3.toml", "--windows", "5,20")
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
// every z-score is small (|z| < 4) and no check rejects after Holm, while
// the same records set against ring4 are rejected; a dead time or missed
// events lower the predicted F below the cycle affinity (design notes,
// section 7).
func TestPredictAgainstData(t *testing.T) {
	r := predictJSON(t, "../../testdata/ring3.toml", "--data", "../../testdata/ring3-demo.csv", "--windows", "5", "--fixed-time")
	for _, key := range []string{"P(+|+)", "P(-|-)", "effective affinity", "current J", "fluctuation slope, n = 5, all", "fluctuation slope, n = 5, post", "fluctuation slope, n = 5, fixed"} {
		if z := cell(t, r, "Model against data", key, 7); math.Abs(z) > 4 {
			t.Errorf("%s: z = %g", key, z)
		}
		if p := cell(t, r, "Model against data", key, 6); !(p > 0.05) {
			t.Errorf("%s: Holm p = %g", key, p)
		}
	}
	wrong := predictJSON(t, "../../testdata/ring4.toml", "--data", "../../testdata/ring3-demo.csv", "--windows", "5")
	if z := cell(t, wrong, "Model against data", "effective affinity", 7); !(z > 10) || math.IsInf(z, 0) {
		t.Errorf("ring3 data against ring4: z of F = %g, want large and finite", z)
	}
	if ll := cell(t, r, "Log-likelihood", "ln L per gap", 1); !(ll < 0) || math.IsInf(ll, 0) {
		t.Errorf("ln L per gap %g", ll)
	}
	if !strings.Contains(r.Checksum, " ") {
		t.Errorf("stamp should carry both inputs' checksums: %q", r.Checksum)
	}
	A := math.Log(3.0 * 2 * 1.5 / (0.5 * 0.4 * 0.6))
	dead := predictJSON(t, "../../testdata/ring3.toml", "--dead-time", "0.02", "--windows", "5")
	if F := cell(t, dead, "Predicted rates", "effective affinity", 1); !(F < A-0.01) {
		t.Errorf("dead time: F = %g, want below %g", F, A)
	}
}

// TestPredictSmallCounts: with a handful of events, where some pairs are
// never seen (the case of 0 of 14 '-' events followed by '-'), every z is
// a finite number and every p lies in [0, 1].
func TestPredictSmallCounts(t *testing.T) {
	dir := t.TempDir()
	small := filepath.Join(dir, "small.csv")
	var b strings.Builder
	b.WriteString("time,label\n")
	labels := "++-+++-++-+++++-++-+++-++++-+++-++-++++-++-+"
	for i, c := range labels {
		fmt.Fprintf(&b, "%g,%c\n", 0.7*float64(i)+0.1*float64(i%3), c)
	}
	os.WriteFile(small, []byte(b.String()), 0o644)
	r := predictJSON(t, "../../testdata/ring3.toml", "--data", small, "--windows", "5")
	for _, tb := range r.Tables {
		if !strings.HasPrefix(tb.Title, "Model against data") {
			continue
		}
		for _, row := range tb.Rows {
			z, err := strconv.ParseFloat(row[7], 64)
			if err != nil || math.IsInf(z, 0) || math.IsNaN(z) {
				t.Errorf("%s: z %q", row[0], row[7])
			}
			if p, err := strconv.ParseFloat(row[5], 64); err != nil || p < 0 || p > 1 {
				t.Errorf("%s: p %q", row[0], row[5])
			}
		}
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
	if code := run([]string{"predict", "../../testdata/ring3.toml", "--edge", "+,nope"}, &out, &errb); code != 2 {
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

// TestPredictBoundsOnlyWhenValid: at detailed balance (sigma = 0) an
// instrument that detects the two directions with different probabilities,
// or one with a dead time, shows F*J > 0; predict must then not call F*J or
// J^2/D a lower bound (the recorded process is the coarse-graining of a
// chain whose entropy production is sigma + J ln(p+/p-), or not Markov at
// all; design notes, section 8).
func TestPredictBoundsOnlyWhenValid(t *testing.T) {
	src, err := os.ReadFile("../../testdata/balanced.toml")
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	uneq := filepath.Join(dir, "uneq.toml")
	os.WriteFile(uneq, append(src, []byte("\n[label.out]\ndetect = 0.5\n")...), 0o644)
	for _, args := range [][]string{{uneq}, {"../../testdata/balanced.toml", "--dead-time", "0.3"}} {
		r := predictJSON(t, append(args, "--windows", "5")...)
		F := cell(t, r, "Predicted rates", "effective affinity", 1)
		if sigma := cell(t, r, "Predicted rates", "entropy production", 1); sigma != 0 || math.Abs(F) < 1e-3 {
			t.Fatalf("%v: want sigma = 0 and F != 0 for this test to mean something; sigma %g F %g", args, sigma, F)
		}
		for _, tb := range r.Tables {
			for _, row := range tb.Rows {
				if strings.Contains(row[0], "lower bound") {
					t.Errorf("%v: %q shown although it is not a bound here", args, row[0])
				}
			}
		}
		found := false
		for _, n := range r.Notes {
			found = found || strings.Contains(n, "not lower bounds")
		}
		if !found {
			t.Errorf("%v: no note saying why the bounds are not shown: %v", args, r.Notes)
		}
	}
	// Equal detection keeps the bound, and the stamp records the options.
	r := predictJSON(t, "../../testdata/ring3.toml", "--windows", "5", "--dead-time", "0")
	if _, ok := findRow(r, "lower bound F*J"); !ok {
		t.Error("bound missing for a valid instrument")
	}
	if !strings.Contains(r.Command, "--dead-time 0") {
		t.Errorf("stamp %q does not record the options", r.Command)
	}
}

func findRow(r report, key string) ([]string, bool) {
	for _, tb := range r.Tables {
		for _, row := range tb.Rows {
			if strings.HasPrefix(row[0], key) {
				return row, true
			}
		}
	}
	return nil, false
}

// TestUsageErrorsSayWhy: a bad flag or value is reported on stderr with
// the command's name and exit code 2, never silently.
func TestUsageErrorsSayWhy(t *testing.T) {
	dir := t.TempDir()
	nonrev := filepath.Join(dir, "nonrev.toml")
	os.WriteFile(nonrev, []byte("states=[\"A\",\"B\",\"C\"]\n[[edge]]\nbetween=[\"A\",\"B\"]\nrates=[\"k\",\"m\"]\nlabels=[\"+\",\"\"]\n[[edge]]\nbetween=[\"B\",\"C\"]\nrates=[\"k\",\"m\"]\nlabels=[\"\",\"-\"]\n[[edge]]\nbetween=[\"C\",\"A\"]\nrates=[\"k\",\"m\"]\n[param.k]\nvalue=2\n[param.m]\nvalue=1\n"), 0o644)
	cases := []struct {
		args []string
		want string
	}{
		{[]string{"describe", "../../testdata/ring3.toml", "--bogus"}, "edgewise describe: unknown flag: --bogus"},
		{[]string{"simulate", "../../testdata/ring3.toml", "--events", "abc"}, "edgewise simulate: invalid argument"},
		{[]string{"simulate", "../../testdata/ring3.toml", "--events", "0"}, "--events and --records must be at least 1"},
		{[]string{"predict", "../../testdata/ring3.toml", "--windows", "100000"}, "want 2 to 2000 events"},
		{[]string{"predict", "../../testdata/ring3.toml", "--dead-time", "-1"}, "dead time -1"},
		{[]string{"predict", nonrev, "--edge", "+,-"}, "do not sit on reversed transitions"},
	}
	for _, c := range cases {
		var out, errb bytes.Buffer
		if code := run(c.args, &out, &errb); code != 2 || !strings.Contains(errb.String(), c.want) {
			t.Errorf("%v: code %d, stderr %q; want 2 and %q", c.args, code, errb.String(), c.want)
		}
	}
	// Without --labels, labels that are not one edge give no current
	// table, but the rest of the prediction is still made.
	var out, errb bytes.Buffer
	if code := run([]string{"predict", nonrev}, &out, &errb); code != 0 || !strings.Contains(out.String(), "no pair of labels forms one visible edge") {
		t.Errorf("non-reverse labels: code %d: %s %s", code, errb.String(), out.String())
	}
}

// TestPredictFrames: records with frame-limited timestamps are possible
// under the model only when predict is told the frame length.
func TestPredictFrames(t *testing.T) {
	dir := t.TempDir()
	fr := filepath.Join(dir, "fr.csv")
	var out, errb bytes.Buffer
	if code := run([]string{"simulate", "../../testdata/ring3.toml", "-n", "2000", "--frame", "0.5", "-o", fr}, &out, &errb); code != 0 {
		t.Fatal(errb.String())
	}
	r := predictJSON(t, "../../testdata/ring3.toml", "--data", fr, "--frame", "0.5", "--windows", "5")
	if ll := cell(t, r, "Log-likelihood", "ln L per gap", 1); !(ll < 0) {
		t.Errorf("framed ln L per gap %g: a probability per gap must be below 1", ll)
	}
}
