package main

import (
	"bytes"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// fit --profile-quantity sigma,F on the driven demo ring: the three
// tables, the least sigma equal to the lower end of sigma's profile
// interval and below the estimate, F's profile interval around its
// estimate, the note that states the least dissipation, and the figure
// (PNG signature of ISO/IEC 15948).
func TestFitProfileQuantity(t *testing.T) {
	dir := t.TempDir()
	fig := filepath.Join(dir, "profile.png")
	r := runJSON(t, "fit", demo, "../../testdata/ring3.toml", "--starts", "2", "--no-profile", "--profile-quantity", "sigma,F", "--profile-plot", fig)
	for _, k := range []string{"quantity_profiles", "dissipation", "profile_points"} {
		if !r.hasTable(k) {
			t.Fatalf("no table %s", k)
		}
	}
	sig := r.cell(t, "quantity_profiles", "sigma", "profile")
	least := r.num(t, "dissipation", "sigma_least", "value")
	est := r.num(t, "dissipation", "sigma_max", "value")
	if sig.Lower == nil || *sig.Lower != least || !(least < est) || !(*sig.Upper > est) {
		t.Errorf("least sigma %v, profile %+v, estimate %v", least, sig, est)
	}
	eq := r.cell(t, "dissipation", "equilibrium", "note")
	if !strings.HasPrefix(eq.Text, "rejected") {
		t.Errorf("equilibrium member of a driven ring: %q", eq.Text)
	}
	if !strings.Contains(strings.Join(r.Notes, "\n"), "least dissipation within scheme ring3: sigma >= ") {
		t.Errorf("no statement of the least dissipation in %q", r.Notes)
	}
	var f jRow
	for _, row := range r.table(t, "quantity_profiles").Rows {
		if strings.HasPrefix(row.Label, "F[") {
			f = row
		}
	}
	if c := f.Cells["profile"]; c.Lower == nil || !(*c.Lower < *f.Cells["value"].Value && *f.Cells["value"].Value < *c.Upper) {
		t.Errorf("F row %+v", f)
	}
	b, err := os.ReadFile(fig)
	if err != nil || !bytes.HasPrefix(b, []byte("\x89PNG\r\n\x1a\n")) || len(b) < 1000 {
		t.Errorf("figure: %d bytes, %v", len(b), err)
	}
}

// At detailed balance the output says that the data do not prove driving
// within the scheme, and the least sigma is an exact zero. Records are
// simulated from the ring with kac raised to 45 (kab kbc kca = 3*2*1.5 =
// 9 = kba kcb kac = 0.5*0.4*45: Kolmogorov's criterion, sigma = 0).
func TestFitProfileQuantityEquilibrium(t *testing.T) {
	dir := t.TempDir()
	src, err := os.ReadFile("../../testdata/ring3.toml")
	if err != nil {
		t.Fatal(err)
	}
	spec := string(src)
	i := strings.Index(spec, "[param.kac]")
	if i < 0 {
		t.Fatal("ring3.toml has no kac")
	}
	j := i + strings.Index(spec[i:], "value")
	k := j + strings.Index(spec[j:], "\n")
	spec = spec[:j] + "value = 45.0" + spec[k:]
	eqSpec := filepath.Join(dir, "eq.toml")
	if err := os.WriteFile(eqSpec, []byte(spec), 0o644); err != nil {
		t.Fatal(err)
	}
	recs := filepath.Join(dir, "eq.csv")
	runOut(t, "simulate", eqSpec, "-n", "3000", "--seed", "4", "-o", recs)
	r := runJSON(t, "fit", recs, eqSpec, "--starts", "2", "--no-profile", "--profile-quantity", "sigma")
	if c := r.cell(t, "dissipation", "sigma_least", "value"); c.Kind != "zero" {
		t.Errorf("least sigma %+v, want an exact zero", c)
	}
	if !strings.Contains(strings.Join(r.Notes, "\n"), "the data do not prove that the system is driven, within scheme") {
		t.Errorf("notes %q", r.Notes)
	}
}

// Bad requests: usage errors before any work, an unknown quantity named.
func TestFitProfileQuantityBadInput(t *testing.T) {
	for _, c := range []struct {
		args []string
		code int
		msg  string
	}{
		{[]string{"--profile-plot", "x.png"}, 2, "--profile-plot needs --profile-quantity"},
		{[]string{"--profile-quantity", " , "}, 2, "name at least one quantity"},
		{[]string{"--profile-quantity", "sigma", "--profile-plot", "x.gif"}, 2, "figure format"},
		{[]string{"--profile-quantity", "entropy"}, 1, `"entropy" is neither sigma, F, affinities`},
	} {
		var out, errb bytes.Buffer
		args := append([]string{"fit", demo, "../../testdata/ring3.toml", "--starts", "1", "--no-profile"}, c.args...)
		if code := run(args, &out, &errb); code != c.code || !strings.Contains(errb.String(), c.msg) {
			t.Errorf("%v: code %d, stderr %q; want %d and %q", c.args, code, errb.String(), c.code, c.msg)
		}
	}
}
