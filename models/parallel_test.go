package models

import (
	"math"
	"math/rand/v2"
	"os"
	"slices"
	"strconv"
	"strings"
	"testing"
)

// TestParallelSpecs: the shipped specs with parallel edges parse, keep
// each edge's own rates and labels, count the cycle a parallel pair closes
// (|E| - |V| + 1, Schnakenberg, Rev. Mod. Phys. 48, 571 (1976), section V),
// name it with its edges, and survive Write -> Parse unchanged.
func TestParallelSpecs(t *testing.T) {
	two := parseFile(t, "../testdata/twostate-parallel.toml")
	net, err := two.Network(two.Start())
	if err != nil {
		t.Fatal(err)
	}
	if len(net.Edges) != 2 || net.Edges[0].Rate != [2]float64{4, 0.5} || net.Edges[1].Rate != [2]float64{3, 0.4} {
		t.Fatalf("edges %+v", net.Edges)
	}
	if net.Edges[0].Label != [2]int{Hidden, Hidden} || net.Labels[net.Edges[1].Label[0]].Name != "+" || net.Labels[net.Edges[1].Label[1]].Name != "-" {
		t.Fatalf("labels %+v", net.Edges)
	}
	if p := net.Parallel(0); !slices.Equal(p, []int{1}) {
		t.Errorf("Parallel(0) = %v, want [1]", p)
	}
	cycles := net.CycleBasis()
	if len(cycles) != 1 || len(cycles[0].States) != 2 {
		t.Fatalf("two-state ring: cycle basis %+v", cycles)
	}
	// ln(u0 u1 / (w0 w1)) = ln(4*3 / (0.4*0.5)) = ln 60, up to the sign of
	// the basis orientation.
	if a := net.Affinity(cycles[0]); math.Abs(math.Abs(a)-math.Log(60)) > 1e-14 {
		t.Errorf("affinity %.16g, want +-ln 60", a)
	}
	if got := net.CycleName(cycles[0]); got != "Loaded-Empty-Loaded via edges 1, 0" {
		t.Errorf("cycle name %q", got)
	}
	checkRoundTrip(t, two)

	slip := parseFile(t, "../testdata/ring3-slip.toml")
	checkRoundTrip(t, slip)
	if !slices.Equal(slip.Affinities[1].Edges, []int{0, 3}) || slip.Affinities[1].CycleName() != "A-B-A via edges 0, 3" {
		t.Errorf("constraint %+v", slip.Affinities[1])
	}
	sn, err := slip.Network(slip.Start())
	if err != nil {
		t.Fatal(err)
	}
	if got, want := len(sn.CycleBasis()), len(sn.Edges)-len(sn.States)+1; got != 2 || want != 2 {
		t.Errorf("ring3-slip: %d cycles, want %d", got, want)
	}
	// A cycle that avoids the parallel pair is named by its states alone.
	r3 := parseFile(t, "../testdata/ring3.toml")
	rn, _ := r3.Network(r3.Start())
	if got := rn.CycleName(rn.CycleBasis()[0]); strings.Contains(got, "via") {
		t.Errorf("ring3 cycle named %q", got)
	}
}

// TestParallelCycleBasisSigma: random networks with extra parallel edges
// (up to three channels on one pair): |E| - |V| + 1 basis cycles, each a
// closed walk over its edges that uses every edge once, and the edge form
// of sigma equals the cycle form sum_C J_chord A_C (Schnakenberg 1976,
// eq. 7.6). Tolerance as in TestCycleBasisAndSigma.
func TestParallelCycleBasisSigma(t *testing.T) {
	rng := rand.New(rand.NewPCG(21, 22))
	rate := func() float64 { return math.Pow(10, 2*(rng.Float64()-0.5)) }
	for trial := 0; trial < 50; trial++ {
		k := 2 + rng.IntN(5)
		net := randomNetwork(rng, k, 2)
		if k == 2 {
			net.Edges = net.Edges[:1]
		}
		for extra := 1 + rng.IntN(3); extra > 0; extra-- {
			e := net.Edges[rng.IntN(len(net.Edges))]
			from, to := e.From, e.To
			if rng.IntN(2) == 0 {
				from, to = to, from
			}
			net.Edges = append(net.Edges, Edge{From: from, To: to, Rate: [2]float64{rate(), rate()}, Label: [2]int{Hidden, Hidden}})
		}
		if err := net.Validate(); err != nil {
			t.Fatalf("trial %d: %v", trial, err)
		}
		cycles := net.CycleBasis()
		if got, want := len(cycles), len(net.Edges)-len(net.States)+1; got != want {
			t.Fatalf("trial %d: %d cycles, want %d", trial, got, want)
		}
		for _, c := range cycles {
			if len(c.States) != len(c.Steps) || len(c.States) < 2 {
				t.Fatalf("trial %d: malformed cycle %+v", trial, c)
			}
			seen := map[int]bool{}
			for i, s := range c.Steps {
				e := net.Edges[s.Edge]
				from, to := e.From, e.To
				if !s.Forward {
					from, to = to, from
				}
				if from != c.States[i] || to != c.States[(i+1)%len(c.States)] || seen[s.Edge] {
					t.Fatalf("trial %d: step %d of %s does not join its states or repeats an edge", trial, i, net.CycleName(c))
				}
				seen[s.Edge] = true
			}
		}
		pi, err := net.Stationary()
		if err != nil {
			t.Fatal(err)
		}
		j := net.Currents(pi)
		cyc := 0.0
		for _, c := range cycles {
			cyc += j[c.Chord] * net.Affinity(c)
		}
		sigma := net.EntropyProduction(pi)
		if sigma < 0 || math.Abs(sigma-cyc) > 1e-9*math.Abs(sigma)+1e-14 {
			t.Fatalf("trial %d: sigma %g, cycle form %g", trial, sigma, cyc)
		}
	}
}

// TestParallelAffinityExact: the constraint on the two-state cycle of a
// parallel pair (out along edge[0], back along edge[3] of ring3-slip) holds
// exactly, read off the numeric rates by hand: kab * sba / (kba * sab) = 1,
// so its log is 0 to rounding (1e-13 absolute; the rates span six
// decades, |ln w| < 20). The same constraint written for the two-state
// ring, solving a rate of either edge, holds too.
func TestParallelAffinityExact(t *testing.T) {
	rng := rand.New(rand.NewPCG(23, 24))
	m := parseFile(t, "../testdata/ring3-slip.toml")
	free := m.Free()
	for trial := 0; trial < 50; trial++ {
		x := m.Start()
		for i := range x {
			x[i] *= math.Pow(10, 6*rng.Float64()-3)
		}
		net, err := m.Network(x)
		if err != nil {
			t.Fatal(err)
		}
		e0, e3 := net.Edges[0].Rate, net.Edges[3].Rate
		if a := math.Log(e0[0]) + math.Log(e3[1]) - math.Log(e0[1]) - math.Log(e3[0]); math.Abs(a) > 1e-13 {
			t.Fatalf("trial %d (%v = %v): step-slip cycle affinity %g, want 0", trial, free, x, a)
		}
	}
	base := "states=[\"E\",\"L\"]\n[[edge]]\nbetween=[\"E\",\"L\"]\nrates=[\"u0\",\"w1\"]\n[[edge]]\nbetween=[\"L\",\"E\"]\nrates=[\"u1\",\"w0\"]\nlabels=[\"+\",\"-\"]\n"
	params := map[string]string{"u0": "4", "w1": "0.5", "u1": "3", "w0": "0.4"}
	for _, c := range []struct {
		edges string
		solve string
		value float64 // affinity of E->L along edge[0], back along edge[1]: ln(u0 u1/(w0 w1))
	}{{"[0, 1]", "w0", 2.5}, {"[0, 1]", "u0", -1}, {"[1, 0]", "u1", 3}} {
		src := base
		for _, name := range sortedKeys(params) {
			if name != c.solve {
				src += "[param." + name + "]\nvalue=" + params[name] + "\n"
			}
		}
		v := strconv.FormatFloat(c.value, 'g', -1, 64)
		src += "[[affinity]]\ncycle=[\"E\",\"L\",\"E\"]\nedges=" + c.edges + "\nvalue=" + v + "\nsolve=\"" + c.solve + "\"\n"
		mm, err := Parse(strings.NewReader(src), "two.toml")
		if err != nil {
			t.Fatalf("%s: %v", c.edges, err)
		}
		checkRoundTrip(t, mm)
		net, err := mm.Network(mm.Start())
		if err != nil {
			t.Fatal(err)
		}
		r0, r1 := net.Edges[0].Rate, net.Edges[1].Rate
		got := math.Log(r0[0]*r1[0]) - math.Log(r0[1]*r1[1]) // u0 u1 / (w1 w0)
		if c.edges == "[1, 0]" {
			got = -got // E->L along edge[1] is w0, back along edge[0] is w1
		}
		if math.Abs(got-c.value) > 1e-13 {
			t.Errorf("edges %s solve %s: affinity %.16g, want %g", c.edges, c.solve, got, c.value)
		}
	}
}

// TestParallelErrors: the problems a parallel pair brings are reported with
// file, line and key, and name the edges involved.
func TestParallelErrors(t *testing.T) {
	raw, err := os.ReadFile("../testdata/ring3-slip.toml")
	if err != nil {
		t.Fatal(err)
	}
	src := string(raw)
	cases := []struct{ from, to, want string }{
		{"edges = [0, 1, 2]\n", "", "ring3-slip.toml:45: affinity[0].cycle: states A and B are joined by the parallel edges edge[0] (A-B, rates kab, kba) and edge[3] (A-B, rates sab, sba), so the state list does not say which one the cycle takes; add edges = [...]"},
		{"edges = [0, 1, 2]\n", "edges = [1, 1, 2]\n", "ring3-slip.toml:46: affinity[0].edges: step 1 (A to B): edge[1] (B-C, rates kbc, kcb) does not join them; edge[0] and edge[3] join A and B"},
		{"edges = [0, 1, 2]\n", "edges = [7, 1, 2]\n", "affinity[0].edges: step 1 (A to B): there is no edge[7] (the spec has 4 edges, numbered from 0)"},
		{"edges = [0, 1, 2]\n", "edges = [0, 1]\n", "ring3-slip.toml:46: affinity[0].edges: 2 edge indices for the 3 steps of the cycle A-B-C-A; give one per step"},
		{"edges = [0, 1, 2]\n", "edges = [0, -1, 2]\n", "affinity[0].edges: item 2: want an edge index (an integer from 0), not -1"},
		{"edges = [0, 1, 2]\n", "edges = \"0 1 2\"\n", "affinity[0].edges: want a list of edge indices"},
		{"edges = [0, 3]\n", "edges = [3, 3]\n", "affinity[1].cycle: states [A B A] do not form a cycle: a cycle of two states needs two parallel edges between them"},
		{"edges = [0, 3]\n", "", "affinity[1].cycle: states A and B are joined by the parallel edges"},
		{"rates = [\"sab\", \"sba\"]\n", "rates = [\"kab\", \"kba\"]\nlabels = [\"+\", \"-\"]\n", "ring3-slip.toml:27: edge[3]: repeats edge[0] (A-B): same states, rate names and labels"},
	}
	for _, c := range cases {
		s := strings.Replace(src, c.from, c.to, 1)
		if c.from == "rates = [\"sab\", \"sba\"]\n" {
			// The repeated edge's rates are kab, kba: drop sab's table and
			// the slip constraint that solves sba.
			s = strings.Replace(s, "[param.sab]\nvalue = 0.2\n", "", 1)
			s = s[:strings.LastIndex(s, "[[affinity]]")]
		}
		_, err := Parse(strings.NewReader(s), "ring3-slip.toml")
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("want error containing %q, got %v", c.want, err)
		}
	}
	// A parallel channel with its own names is accepted, and so is the
	// same pair of names in the other direction (a symmetric channel).
	ok := "states=[\"A\",\"B\"]\n[[edge]]\nbetween=[\"A\",\"B\"]\nrates=[\"k\",\"m\"]\nlabels=[\"+\"]\n[[edge]]\nbetween=[\"A\",\"B\"]\nrates=[\"m\",\"k\"]\n[param.k]\nvalue=1\n[param.m]\nvalue=2\n"
	if _, err := Parse(strings.NewReader(ok), "x.toml"); err != nil {
		t.Errorf("mirror channel refused: %v", err)
	}
}
