package infer

import (
	"math/rand/v2"
	"strings"
	"testing"
)

// Records from a two-cycle scheme whose driven cycle runs off the visible
// edge: the shape test of the data rejects, so every ring (its
// psi(++)/psi(--) is constant in t) is ruled out for that reason, while the
// two-cycle candidate survives; the chain (no cycle) is ruled out too, and
// the ring is nested in the two-cycle scheme as a sub-graph.
func TestCompareRulesOutRingByShape(t *testing.T) {
	truth := readSpec(t, "../testdata/compare/truth-twocycle.toml")
	d := truthData(t, truth, 21, 1, 20000)
	fams, err := Families(FamilyOptions{Chains: StateRange{Min: 4, Max: 4}})
	if err != nil {
		t.Fatal(err)
	}
	cands := []Candidate{
		{Name: "twocycle", Model: readSpec(t, "../testdata/compare/twocycle.toml")},
		{Name: "ring4", Model: readSpec(t, "../testdata/compare/ring4.toml")},
		{Name: fams[0].Name, Model: fams[0]},
	}
	res, err := Compare(cands, d, CompareOptions{Fit: FitOptions{Starts: 4, Seed: 1, Workers: 2}})
	if err != nil {
		t.Fatal(err)
	}
	by := map[string]Ranked{}
	for _, r := range res.Ranked {
		by[r.Name] = r
		if r.Impossible != nil {
			t.Logf("%-22s %v", r.Name, r.Impossible)
			continue
		}
		if r.Fit == nil {
			t.Fatalf("%s: fit failed: %s", r.Name, r.Err)
		}
		t.Logf("%-22s lnL %.2f k %d BIC %.2f verdict %s %q", r.Name, r.Fit.LogLik, r.Fit.Effective(), r.BIC, r.Consistency.Verdict(), r.Consistency.Reasons)
	}
	if !res.Evidence.ShapeDiffers {
		t.Fatalf("the data's shape test does not reject (p = %.3g)", res.Evidence.ShapeP)
	}
	if res.Ranked[0].Name != "twocycle" {
		t.Errorf("best by BIC is %s, want twocycle", res.Ranked[0].Name)
	}
	if c := by["twocycle"].Consistency; c.RuledOut() {
		t.Errorf("twocycle ruled out: %q", c.Reasons)
	}
	if c := by["ring4"].Consistency; !c.ShapeRuledOut {
		t.Errorf("ring4 not ruled out by the shape test: constant ratio %v, reasons %q", c.ShapeConstant, c.Reasons)
	}
	if c := by[fams[0].Name]; c.Impossible == nil || c.Impossible.From != "+" && c.Impossible.From != "-" {
		t.Errorf("the chain is not ruled out as impossible: %+v", c.Impossible)
	}
	found := false
	for _, n := range res.Nested {
		if n.Small == "ring4" && n.Large == "twocycle" {
			found = true
			if n.Boundary != 2 || !strings.Contains(n.How, "A-C") {
				t.Errorf("nesting ring4 in twocycle: %+v", n)
			}
		}
	}
	if !found {
		t.Errorf("ring4 not found nested in twocycle: %+v", res.Nested)
	}
}

// The CI version of the topology-recovery check (the long one is
// TestTopologyRecoveryLong): records from a 3-state ring (seeded random
// rates) and from the shipped two-cycle scheme (a ring with the chord
// A-C), 10^4 events each, four candidates; the generating topology ranks
// first by BIC.
func TestTopologyRecoverySmall(t *testing.T) {
	fams, err := Families(FamilyOptions{Rings: StateRange{Min: 3, Max: 4}, Chords: StateRange{Min: 4, Max: 4}, Loops: StateRange{Min: 3, Max: 3}})
	if err != nil {
		t.Fatal(err)
	}
	var cands []Candidate
	byName := map[string]int{}
	for i, m := range fams {
		if m.Name == "ring4+chord(B,D)" {
			continue
		}
		byName[m.Name] = i
		cands = append(cands, Candidate{Name: m.Name, Model: m})
	}
	for ti, name := range []string{"ring3", "ring4+chord(A,C)"} {
		rng := rand.New(rand.NewPCG(uint64(ti), 99))
		truth := randomRatesModel(fams[byName[name]], rng)
		if ti == 1 {
			truth = readSpec(t, "../testdata/compare/truth-twocycle.toml")
		}
		d := truthData(t, truth, uint64(60+ti), 1, 10000)
		res, err := Compare(cands, d, CompareOptions{Fit: FitOptions{Starts: 3, Seed: 1, Workers: 2}})
		if err != nil {
			t.Fatal(err)
		}
		if res.Ranked[0].Name != name {
			for _, r := range res.Ranked {
				t.Logf("%s: BIC %.2f k %d", r.Name, r.BIC, r.Fit.Effective())
			}
			t.Errorf("truth %s: first by BIC is %s", name, res.Ranked[0].Name)
		}
	}
}
