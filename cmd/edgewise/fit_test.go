package main

import (
	"bytes"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"edgewise/models"
)

// fit -> --model-out -> simulate -> fit: the fitted spec is accepted by
// simulate, and a refit of its records reproduces each rate within its
// profile interval (or, for a rate the data do not determine, says so).
func TestFitRoundTrip(t *testing.T) {
	dir := t.TempDir()
	fitted := filepath.Join(dir, "fitted.toml")
	r := runJSON(t, "fit", "../../testdata/ring3-demo.csv", "../../testdata/ring3.toml", "--starts", "3", "--model-out", fitted)
	if !r.hasTable("parameters") || !r.hasTable("derived") {
		t.Fatalf("tables missing: %v", r.Tables)
	}
	src, err := os.ReadFile(fitted)
	if err != nil {
		t.Fatal(err)
	}
	m, err := models.Parse(bytes.NewReader(src), fitted)
	if err != nil {
		t.Fatalf("fitted spec does not parse: %v", err)
	}
	byName := map[string]float64{}
	for _, p := range m.Params {
		byName[p.Name] = p.Value
	}
	for _, row := range r.table(t, "parameters").Rows {
		v := r.num(t, "parameters", row.Key, "value")
		if got := byName[row.Label]; got != v {
			t.Errorf("%s: spec value %v, fitted %v", row.Label, got, v)
		}
	}
	recs := filepath.Join(dir, "sim.csv")
	runOut(t, "simulate", fitted, "-n", "20000", "--seed", "8", "-o", recs)
	r2 := runJSON(t, "fit", recs, fitted, "--starts", "2")
	for _, row := range r2.table(t, "parameters").Rows {
		c := r2.cell(t, "parameters", row.Key, "interval")
		truth := byName[row.Label]
		if c.Lower == nil || c.Upper == nil {
			if !strings.Contains(c.Reason, "not determined") {
				t.Errorf("%s: no interval and no reason: %+v", row.Label, c)
			}
			continue
		}
		// A 95% interval misses its truth 5% of the time; at 4 rates a
		// miss beyond 3 half-widths would be a defect, not chance.
		mid, half := (*c.Lower+*c.Upper)/2, (*c.Upper-*c.Lower)/2
		if math.Abs(truth-mid) > 3*half {
			t.Errorf("%s: refit interval [%g, %g] far from the simulated value %g", row.Label, *c.Lower, *c.Upper, truth)
		}
	}
}

func TestFitBadInput(t *testing.T) {
	dir := t.TempDir()
	other := filepath.Join(dir, "other.csv")
	os.WriteFile(other, []byte("time,label\n0,up\n1,down\n2,up\n"), 0o644)
	alt := filepath.Join(dir, "alt.csv")
	os.WriteFile(alt, []byte("time,label\n0,+\n1,+\n2,-\n3,+\n"), 0o644)
	chain := filepath.Join(dir, "chain.toml")
	os.WriteFile(chain, []byte("name = \"chain2\"\nstates = [\"A\", \"B\"]\n[[edge]]\nbetween = [\"A\", \"B\"]\nrates = [\"kab\", \"kba\"]\nlabels = [\"+\", \"-\"]\n[param.kab]\nvalue = 1.0\n[param.kba]\nvalue = 1.0\n"), 0o644)
	for _, c := range []struct {
		args []string
		code int
		msg  string
	}{
		{[]string{"fit", other, "../../testdata/ring3.toml"}, 1, `label(s) "up", "down"`},
		{[]string{"fit", alt, chain}, 1, "alt.csv:3: label: the records are impossible under chain2"},
		{[]string{"fit", "../../testdata/ring3-demo.csv", "../../testdata/ring3.toml", "--bootstrap", "5"}, 2, "--bootstrap"},
		{[]string{"fit", "../../testdata/ring3.toml", "../../testdata/ring3.toml"}, 2, "looks like a model spec"},
		{[]string{"fit", "../../testdata/ring3-demo.csv"}, 2, "want RECORDS MODEL"},
		{[]string{"fit", "../../testdata/ring3-demo.csv", "../../testdata/ring3.toml", "--starts", "0"}, 2, "--starts"},
		{[]string{"compare", "../../testdata/ring3-demo.csv"}, 2, "no candidates"},
		{[]string{"plan", "../../testdata/ring3.toml", "../../testdata/ring3.toml", "--power", "1.2"}, 2, "--power"},
		{[]string{"plan", "../../testdata/ring3.toml", "../../testdata/balanced.toml"}, 1, "with the same labels"},
		{[]string{"compare", "../../testdata/ring3-demo.csv", "--chords", "3"}, 2, "make no candidate"},
	} {
		var out, errb bytes.Buffer
		code := run(c.args, &out, &errb)
		if code != c.code || !strings.Contains(errb.String(), c.msg) {
			t.Errorf("%v: code %d (want %d), stderr %q (want %q)", c.args, code, c.code, errb.String(), c.msg)
		}
	}
}

// The README's main command: the shipped two-cycle records against the
// shipped candidates and the chain family. The two-cycle scheme ranks
// first and is consistent; the ring is ruled out by the shape test (its
// driven cycle runs through the visible edge); the chains (equilibrium by
// construction) cannot produce the records.
func TestCompareShippedExample(t *testing.T) {
	r := runJSON(t, "compare", "../../testdata/compare/lidlock.csv", "../../testdata/compare/ring4.toml", "../../testdata/compare/twocycle.toml", "--chains", "3-4")
	rk := r.table(t, "ranking")
	if rk.Rows[0].Key != "twocycle" {
		t.Errorf("first by BIC: %s", rk.Rows[0].Key)
	}
	if v := r.cell(t, "ranking", "twocycle", "verdict").Text; v != "consistent" {
		t.Errorf("twocycle: %s", v)
	}
	for _, row := range rk.Rows[1:] {
		if v := r.cell(t, "ranking", row.Key, "verdict").Text; v != "ruled out" {
			t.Errorf("%s: %s", row.Key, v)
		}
	}
	if v := r.cell(t, "consistency", "ring4", "rules").Text; !strings.Contains(v, "shape") {
		t.Errorf("ring4 structural rules: %q", v)
	}
	notes := strings.Join(r.Notes, "\n")
	if !strings.Contains(notes, "chain4(A-B-C-D) is ruled out: the records are impossible") {
		t.Errorf("chain reason missing from the notes")
	}
}
