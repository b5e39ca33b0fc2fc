package main

import (
	"bytes"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"github.com/santhosh-tekuri/jsonschema/v6"
)

// planFast are options that keep a plan under a few seconds in tests.
var planFast = []string{"--kl-events", "20000", "--starts", "2", "--replicate-starts", "2", "--seed", "3"}

// TestPlanCommand: the JSON report of plan holds the summary and the power
// rows, follows docs/schema/plan.json, and its numbers obey the formulas
// they are stated with (events for SE(F) = V_F/SE^2 + 1, events for ln LR
// 10 = 10/KL + 1, expected ln LR = (n - 1) KL).
func TestPlanCommand(t *testing.T) {
	args := append([]string{"plan", "../../testdata/ring4.toml", "../../testdata/plan/ring4-eq.toml", "--events", "60,2e2", "--replicates", "20", "--se", "0.2"}, planFast...)
	r := runJSON(t, args...)
	kl := r.num(t, "summary", "KL", "value")
	if !(kl > 0 && kl > 3*r.num(t, "summary", "KL", "se")) {
		t.Errorf("KL %v", kl)
	}
	if got, want := r.num(t, "summary", "events_lnLR_10", "value"), math.Ceil(10/kl+1); got != want {
		t.Errorf("events for ln LR 10: %v, want %v", got, want)
	}
	if got, want := r.num(t, "summary", "events_se", "value"), math.Ceil(r.num(t, "summary", "F_variance", "value")/0.04+1); got != want {
		t.Errorf("events for SE 0.2: %v, want %v", got, want)
	}
	for _, n := range []float64{60, 200} {
		row := "n_" + formatInt(n)
		p := r.num(t, "power", row, "power")
		if !(p >= 0 && p <= 1) {
			t.Errorf("%s: power %v", row, p)
		}
		if got := r.num(t, "power", row, "expected_lnLR"); math.Abs(got-(n-1)*kl) > 1e-9*got {
			t.Errorf("%s: expected ln LR %v, want %v", row, got, (n-1)*kl)
		}
	}
	if !r.hasTable("closest") || r.hasTable("fixed_time") {
		t.Errorf("tables: %v", r.Tables)
	}
	if len(r.Notes) == 0 || !strings.Contains(strings.Join(r.Notes, " "), "taken as they are") {
		t.Errorf("no note that A's free parameters are taken as they are: %q", r.Notes)
	}
	// Schema.
	c := jsonschema.NewCompiler()
	s, err := c.Compile(filepath.Join("..", "..", "docs", "schema", "plan.json"))
	if err != nil {
		t.Fatal(err)
	}
	for _, a := range [][]string{args, append([]string{"plan", "../../testdata/compare/truth-twocycle.toml", "../../testdata/compare/ring4.toml", "--events", "none"}, planFast...)} {
		inst, err := jsonschema.UnmarshalJSON(bytes.NewReader(runOut(t, append(a, "--format", "json")...)))
		if err != nil {
			t.Fatal(err)
		}
		if err := s.Validate(inst); err != nil {
			t.Errorf("%v: %v", a, err)
		}
	}
}

func formatInt(x float64) string { return strconv.FormatFloat(x, 'f', -1, 64) }

// TestPlanMulticyclic: a two-cycle A gets the fixed-time departure table,
// whose best row is the summary's, and a figure is written.
func TestPlanMulticyclic(t *testing.T) {
	dir := t.TempDir()
	fig := filepath.Join(dir, "power.png")
	r := runJSON(t, append([]string{"plan", "../../testdata/compare/truth-twocycle.toml", "../../testdata/compare/ring4.toml", "--events", "none", "--plot", fig}, planFast...)...)
	best := math.Inf(1)
	for _, row := range r.table(t, "fixed_time").Rows {
		v := r.num(t, "fixed_time", row.Key, "events")
		if d := r.num(t, "fixed_time", row.Key, "departure"); !(d != 0 && v > 0) {
			t.Errorf("%s: departure %v, events %v", row.Key, d, v)
		}
		best = math.Min(best, v)
	}
	if got := r.num(t, "summary", "events_fixed_time", "value"); got != best {
		t.Errorf("summary %v, best row %v", got, best)
	}
	if st, err := os.Stat(fig); err != nil || st.Size() < 1000 {
		t.Errorf("figure: %v", err)
	}
}

// TestPlanBadInput: schemes with different labels, a target power out of
// (0, 1), records given as a spec, and a likelihood-ratio decision
// between non-nested schemes are refused with a clear message.
func TestPlanBadInput(t *testing.T) {
	dir := t.TempDir()
	other := filepath.Join(dir, "other.toml")
	src, _ := os.ReadFile("../../testdata/ring4.toml")
	os.WriteFile(other, bytes.ReplaceAll(src, []byte(`labels = ["+", "-"]`), []byte(`labels = ["open", "close"]`)), 0o644)
	cases := []struct {
		args []string
		code int
		want string
	}{
		{[]string{"../../testdata/ring4.toml", other}, 1, "same labels"},
		{[]string{"../../testdata/ring4.toml", "../../testdata/plan/ring4-eq.toml", "--power", "1.5"}, 2, "--power 1.5"},
		{[]string{"../../testdata/ring4.toml", "../../testdata/plan/ring4-eq.toml", "--power", "0"}, 2, "--power 0"},
		{[]string{"../../testdata/ring4-demo.csv", "../../testdata/plan/ring4-eq.toml"}, 2, "not a model spec"},
		{[]string{"../../testdata/ring4.toml", "../../testdata/compare/twocycle.toml", "--decision", "lr", "--events", "none"}, 1, "not nested"},
		{[]string{"../../testdata/ring4.toml"}, 2, "want A.toml B.toml"},
	}
	for _, c := range cases {
		var out, errb bytes.Buffer
		code := run(append(append([]string{"plan"}, c.args...), planFast...), &out, &errb)
		if code != c.code || !strings.Contains(errb.String(), c.want) {
			t.Errorf("%v: code %d, stderr %q; want code %d and %q", c.args, code, errb.String(), c.code, c.want)
		}
	}
}

// TestPlanImpossibleCommand: against a chain (labels strictly alternate)
// ring4's records hold ++ pairs: the KL rate is infinite, the first such
// pair rules the chain out, and the report says so.
func TestPlanImpossibleCommand(t *testing.T) {
	chain := filepath.Join(t.TempDir(), "chain.toml")
	os.WriteFile(chain, []byte(`name = "chain3"
states = ["S1", "S2", "S3"]
[[edge]]
between = ["S1", "S2"]
rates = ["k12", "k21"]
labels = ["+", "-"]
[[edge]]
between = ["S2", "S3"]
rates = ["k23", "k32"]
[param.k12]
value = 1.0
[param.k21]
value = 1.0
[param.k23]
value = 1.0
[param.k32]
value = 1.0
`), 0o644)
	r := runJSON(t, append([]string{"plan", "../../testdata/ring4.toml", chain, "--events", "5", "--replicates", "10"}, planFast...)...)
	if kl := r.num(t, "summary", "KL", "value"); !math.IsInf(kl, 1) {
		t.Errorf("KL %v, want +inf", kl)
	}
	if n := r.num(t, "summary", "events_lnLR_10", "value"); n != 2 {
		t.Errorf("events for ln LR 10: %v, want 2", n)
	}
	if !strings.Contains(strings.Join(r.Notes, " "), `cannot produce "+" followed by "+"`) {
		t.Errorf("notes %q", r.Notes)
	}
}
