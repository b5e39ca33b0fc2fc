package infer

import (
	"math"
	"math/rand/v2"
	"os"
	"strings"
	"testing"

	"edgewise/models"
)

// familyModel returns the generated model with the given name.
func familyModel(t *testing.T, o FamilyOptions, name string) *models.Model {
	t.Helper()
	ms, err := Families(o)
	if err != nil {
		t.Fatal(err)
	}
	for _, m := range ms {
		if m.Name == name {
			return m
		}
	}
	t.Fatalf("no model %s", name)
	return nil
}

// cycleAffinity computes ln(prod forward / prod backward) along a closed
// state list directly from the network's edges (an independent route from
// the constraint code).
func cycleAffinity(t *testing.T, net *models.Network, cyc []string) float64 {
	t.Helper()
	idx := map[string]int{}
	for i, s := range net.States {
		idx[s] = i
	}
	a := 0.0
	for i := 0; i+1 < len(cyc); i++ {
		x, y := idx[cyc[i]], idx[cyc[i+1]]
		found := false
		for _, e := range net.Edges {
			switch {
			case e.From == x && e.To == y:
				a += math.Log(e.Rate[0] / e.Rate[1])
				found = true
			case e.From == y && e.To == x:
				a += math.Log(e.Rate[1] / e.Rate[0])
				found = true
			}
		}
		if !found {
			t.Fatalf("no edge %s-%s", cyc[i], cyc[i+1])
		}
	}
	return a
}

// TestVisibleCyclesCount: the cycles through a directed edge of the
// complete graph K_n are the ordered choices of k - 2 intermediate states,
// sum_{k=3}^{n} (n-2)!/(n-k)!: 1, 4, 15 for n = 3, 4, 5. A ring has one,
// a ring with a chord two, a ring with a side loop one, a chain none.
func TestVisibleCyclesCount(t *testing.T) {
	cases := map[string]int{
		"graph3#3": 1, "graph4#15": 4, "graph5#95": 15,
		"ring6": 1, "ring6+chord(B,E)": 2, "ring5+loop3@D": 1, "chain5(E-D-A-B-C)": 0,
	}
	o := FamilyOptions{Rings: StateRange{6, 6}, Chords: StateRange{6, 6}, Loops: StateRange{5, 5}, Chains: StateRange{5, 5}, Exhaustive: 5}
	for name, want := range cases {
		m := familyModel(t, o, name)
		cyc, err := VisibleCycles(m, "+")
		if err != nil {
			t.Fatal(err)
		}
		if len(cyc) != want {
			t.Errorf("%s: %d cycles, want %d: %v", name, len(cyc), want, cyc)
		}
		for i, c := range cyc {
			if c[0] != "A" || c[1] != "B" || c[len(c)-1] != "A" {
				t.Errorf("%s: cycle %v does not start with the + step A->B", name, c)
			}
			if i > 0 && len(c) < len(cyc[i-1]) {
				t.Errorf("%s: cycles not shortest first", name)
			}
		}
	}
}

// TestTightCoupling: after imposing the assumption with value 3.2, at the
// start values and at random rates, every cycle that crosses the visible
// edge in the + direction has affinity 3.2 (computed from the network's
// rates, not from the constraints), a cycle of the same block that avoids
// the visible edge has affinity 0, and the side loop of ring+loop stays
// free. The number of constraints is the rank of the crossing cycles:
// 1 for a ring, 2 for a ring with a chord, 1 for a ring with a loop, 6 for
// the complete graph on 5 states (all of its 10 - 5 + 1 = 6 cycles).
func TestTightCoupling(t *testing.T) {
	const F = 3.2
	o := FamilyOptions{Rings: StateRange{4, 4}, Chords: StateRange{5, 5}, Loops: StateRange{4, 4}, Chains: StateRange{3, 3}, Exhaustive: 5}
	cases := []struct {
		name      string
		nCons     int
		zero      [][]string // cycles forced to affinity 0
		free      []string   // a cycle left free
		inherited int
	}{
		{"ring4", 1, nil, nil, 0},
		{"ring5+chord(B,D)", 2, [][]string{{"B", "C", "D", "B"}}, nil, 0},
		{"ring4+loop3@C", 1, nil, []string{"C", "E", "F", "C"}, 0},
		{"graph5#95", 6, [][]string{{"C", "D", "E", "C"}}, nil, 0},
		{"chain3(A-B-C)", 0, nil, nil, 0},
	}
	rng := rand.New(rand.NewPCG(1, 2))
	for _, c := range cases {
		m := familyModel(t, o, c.name)
		tc, err := TightCoupling(m, "+", F)
		if err != nil {
			t.Fatalf("%s: %v", c.name, err)
		}
		if len(tc.Affinities) != c.nCons || len(tc.Params) != len(m.Params)-c.nCons {
			t.Errorf("%s: %d constraints, %d parameters left", c.name, len(tc.Affinities), len(tc.Params))
		}
		for _, a := range tc.Affinities {
			if strings.HasPrefix(a.Solve, "kAB") || strings.HasPrefix(a.Solve, "kBA") {
				t.Errorf("%s: solves the visible edge's rate %s", c.name, a.Solve)
			}
		}
		cycles, _ := VisibleCycles(tc, "+")
		var freeVals []float64
		for trial := 0; trial < 5; trial++ {
			x := tc.Start()
			if trial > 0 {
				for i := range x {
					x[i] = math.Exp(2 * rng.NormFloat64())
				}
			}
			net, err := tc.Network(x)
			if err != nil {
				t.Fatal(err)
			}
			// Tolerance: sums of at most 10 logs of rates within e^{+-10}
			// and one linear solve, rounding ~1e-14.
			for _, cyc := range cycles {
				if a := cycleAffinity(t, net, cyc); math.Abs(a-F) > 1e-10 {
					t.Errorf("%s: cycle %v affinity %v, want %v", c.name, cyc, a, F)
				}
			}
			for _, cyc := range c.zero {
				if a := cycleAffinity(t, net, cyc); math.Abs(a) > 1e-10 {
					t.Errorf("%s: cycle %v affinity %v, want 0", c.name, cyc, a)
				}
			}
			if c.free != nil {
				freeVals = append(freeVals, cycleAffinity(t, net, c.free))
			}
		}
		if c.free != nil && math.Abs(freeVals[1]-freeVals[2]) < 1e-3 {
			t.Errorf("%s: side loop affinity does not vary with the rates: %v", c.name, freeVals)
		}
	}
}

// TestTightCouplingSpec: a hand-written spec with an existing constraint
// on the side loop keeps it and adds the main cycle's, solving the rate
// against the cycle on its closing step (C->A is direction 0 of edge C-A,
// so m3, the rate A->C); a contradicting
// constraint on the crossing cycle is refused and an agreeing one is not
// repeated; a label on two edges is refused.
func TestTightCouplingSpec(t *testing.T) {
	src := `name = "loop"
states = ["A", "B", "C", "D", "E"]
[[edge]]
between = ["A", "B"]
rates = ["k1", "m1"]
labels = ["+", "-"]
[[edge]]
between = ["B", "C"]
rates = ["k2", "m2"]
[[edge]]
between = ["C", "A"]
rates = ["k3", "m3"]
[[edge]]
between = ["C", "D"]
rates = ["k4", "m4"]
[[edge]]
between = ["D", "E"]
rates = ["k5", "m5"]
[[edge]]
between = ["E", "C"]
rates = ["k6", "m6"]
[param.k1]
value = 1
[param.m1]
value = 1
[param.k2]
value = 1
[param.m2]
value = 1
[param.k3]
value = 1
[param.m3]
value = 1
[param.k4]
value = 1
[param.m4]
value = 1
[param.k5]
value = 1
[param.m5]
value = 1
[param.k6]
value = 2
[[affinity]]
cycle = ["C", "D", "E", "C"]
value = 5
solve = "m6"
`
	m, err := models.Parse(strings.NewReader(src), "loop.toml")
	if err != nil {
		t.Fatal(err)
	}
	tc, err := TightCoupling(m, "+", -1.5)
	if err != nil {
		t.Fatal(err)
	}
	if len(tc.Affinities) != 2 || tc.Affinities[1].Solve != "m3" {
		t.Fatalf("constraints %+v", tc.Affinities)
	}
	net, err := tc.Network(tc.Start())
	if err != nil {
		t.Fatal(err)
	}
	if a := cycleAffinity(t, net, []string{"A", "B", "C", "A"}); math.Abs(a+1.5) > 1e-12 {
		t.Errorf("main cycle %v", a)
	}
	if a := cycleAffinity(t, net, []string{"C", "D", "E", "C"}); math.Abs(a-5) > 1e-12 {
		t.Errorf("side loop %v", a)
	}
	// The crossing cycle already constrained to another value.
	bad := cloneModel(tc)
	bad.Affinities[1].Value = 0.5
	if _, err := TightCoupling(bad, "+", -1.5); err == nil || !strings.Contains(err.Error(), "fix cycle A-B-C-A at 0.5 k_BT, which contradicts the known affinity -1.5") {
		t.Errorf("contradiction: %v", err)
	}
	// Imposing the same value again adds nothing.
	if again, err := TightCoupling(tc, "+", -1.5); err != nil || len(again.Affinities) != 2 {
		t.Errorf("repeat: %v %+v", err, again)
	}
	if _, err := TightCoupling(m, "-", 1); err != nil {
		t.Errorf("minus direction: %v", err)
	}
	if _, err := TightCoupling(m, "x", 1); err == nil || !strings.Contains(err.Error(), `no edge carries the label "x"`) {
		t.Errorf("unknown label: %v", err)
	}
	if _, err := TightCoupling(m, "+", math.Inf(1)); err == nil {
		t.Error("infinite affinity accepted")
	}
	two := cloneModel(m)
	two.Edges[1].Labels = [2]string{"+", ""}
	if _, err := VisibleCycles(two, "+"); err == nil || !strings.Contains(err.Error(), "2 directed edges") {
		t.Errorf("label on two edges: %v", err)
	}
}

// TestTightCouplingParallel: parallel edges. A hidden channel beside B-C
// of the loop model gives two crossing cycles A-B-C-A, one per channel,
// told apart by their edges; tight coupling constrains both (so the
// two-state cycle of the pair, their difference, has affinity 0). On the
// two-state ring (twostate-parallel.toml) the one crossing cycle runs out
// along the visible edge and back along the hidden one. Every constraint
// is checked on the numeric rates along the named edges.
func TestTightCouplingParallel(t *testing.T) {
	m := readSpec(t, "../testdata/twostate-parallel.toml")
	paths, err := VisibleCyclePaths(m, "+")
	if err != nil {
		t.Fatal(err)
	}
	if len(paths) != 1 || paths[0].String() != "Loaded-Empty-Loaded via edges 1, 0" {
		t.Fatalf("two-state ring: %v", paths)
	}
	tc, err := TightCoupling(m, "+", 3)
	if err != nil {
		t.Fatal(err)
	}
	net, err := tc.Network(tc.Start())
	if err != nil {
		t.Fatal(err)
	}
	if len(tc.Affinities) != 1 {
		t.Fatalf("constraints %+v", tc.Affinities)
	}
	if a := edgeCycleAffinity(t, net, paths[0]); math.Abs(a-3) > 1e-12 {
		t.Errorf("two-state cycle affinity %g, want 3", a)
	}

	loop := readSpec(t, "../testdata/ring3.toml")
	loop.Edges = append(loop.Edges, models.EdgeSpec{Between: [2]string{"C", "B"}, Rates: [2]string{"kcb", "kbc"}})
	loop.Edges[3].Rates = [2]string{"scb", "sbc"}
	loop.Params = append(loop.Params, models.Param{Name: "scb", Value: 0.3, Upper: math.Inf(1)}, models.Param{Name: "sbc", Value: 0.2, Upper: math.Inf(1)})
	loop, err = roundTrip(loop)
	if err != nil {
		t.Fatal(err)
	}
	paths, err = VisibleCyclePaths(loop, "+")
	if err != nil {
		t.Fatal(err)
	}
	want := []string{"A-B-C-A via edges 0, 1, 2", "A-B-C-A via edges 0, 3, 2"}
	if len(paths) != 2 || paths[0].String() != want[0] || paths[1].String() != want[1] {
		t.Fatalf("ring with a parallel B-C channel: %v, want %v", paths, want)
	}
	if _, err := TopologyKey(loop, "+"); err == nil || !strings.Contains(err.Error(), "two edges join C and B (parallel edges)") {
		t.Errorf("topology key with parallel edges: %v", err)
	}
	states, _ := VisibleCycles(loop, "+")
	if len(states) != 2 || strings.Join(states[0], "-") != "A-B-C-A" || strings.Join(states[1], "-") != "A-B-C-A" {
		t.Errorf("state lists %v", states)
	}
	tc, err = TightCoupling(loop, "+", 2.5)
	if err != nil {
		t.Fatal(err)
	}
	if len(tc.Affinities) != 2 {
		t.Fatalf("constraints %+v", tc.Affinities)
	}
	rng := rand.New(rand.NewPCG(31, 32))
	for trial := 0; trial < 5; trial++ {
		x := tc.Start()
		for i := range x {
			x[i] *= math.Exp(2 * rng.NormFloat64())
		}
		net, err := tc.Network(x)
		if err != nil {
			t.Fatal(err)
		}
		for _, p := range paths {
			if a := edgeCycleAffinity(t, net, p); math.Abs(a-2.5) > 1e-12 {
				t.Errorf("trial %d: %v affinity %g, want 2.5", trial, p, a)
			}
		}
		pair := CyclePath{States: []string{"B", "C", "B"}, Edges: []int{1, 3}}
		if a := edgeCycleAffinity(t, net, pair); math.Abs(a) > 1e-12 {
			t.Errorf("trial %d: parallel pair affinity %g, want 0", trial, a)
		}
	}
}

// readSpec reads a model spec file.
func readSpec(tb testing.TB, path string) *models.Model {
	tb.Helper()
	f, err := os.Open(path)
	if err != nil {
		tb.Fatal(err)
	}
	defer f.Close()
	m, err := models.Parse(f, path)
	if err != nil {
		tb.Fatal(err)
	}
	return m
}

// edgeCycleAffinity computes ln(prod forward / prod backward) along the
// named edges of a cycle, directly from the network's rates: step i runs
// along edge p.Edges[i] from p.States[i] to p.States[i+1].
func edgeCycleAffinity(t *testing.T, net *models.Network, p CyclePath) float64 {
	t.Helper()
	a := 0.0
	for i, k := range p.Edges {
		e := net.Edges[k]
		from, to := net.States[e.From], net.States[e.To]
		switch {
		case from == p.States[i] && to == p.States[i+1]:
			a += math.Log(e.Rate[0] / e.Rate[1])
		case to == p.States[i] && from == p.States[i+1]:
			a += math.Log(e.Rate[1] / e.Rate[0])
		default:
			t.Fatalf("edge %d does not join %s and %s", k, p.States[i], p.States[i+1])
		}
	}
	return a
}
