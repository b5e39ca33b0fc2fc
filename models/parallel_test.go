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
	// Each basis cycle, written back as a state list and edges, resolves to
	// the same steps through the model (the route of affinity constraints).
	for _, c := range sn.CycleBasis() {
		states, edges := sn.CyclePath(c)
		steps, err := slip.CycleSteps(states, edges)
		if err != nil || !slices.Equal(steps, c.Steps) {
			t.Errorf("cycle %s: steps %v (%v), want %v", sn.CycleName(c), steps, err, c.Steps)
		}
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
		checkCycleBasis(t, trial, net, 2)
	}
}

// TestParallelAffinityExact: an affinity constraint on the cycle of a
// parallel pair holds exactly. (ring3-slip's constraints, one of them on
// the pair A-B, are checked in TestAffinityConstraintsHold along their
// named edges.) On the two-state ring the one cycle, out along edge[0]
// and back along edge[1] or the other way round, is constrained solving a
// rate of either edge, and ln(u0 u1 / (w0 w1)) read off the numeric rates
// by hand equals the value to 1e-13 (a few ulps of the logs).
func TestParallelAffinityExact(t *testing.T) {
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

// TestParallelSimulator: the simulator picks each of several parallel
// channels at its own rate. A ring A-B-C with two extra channels beside
// A-B (three parallel edges in all, one written B->A) labels each of the
// six directed A-B transitions with its own label, so the recorded rate of
// each label estimates the flux pi_from w of its channel; each lies within
// 4 standard errors of the exact value (batch means over 50 batches of
// equal duration, common practice, no source; a correct simulator fails
// one of the six with probability ~4e-4).
func TestParallelSimulator(t *testing.T) {
	net := ring([]float64{2, 1.5, 1}, []float64{0.5, 0.7, 0.9})
	h := Hidden
	net.Edges = append(net.Edges,
		Edge{From: 0, To: 1, Rate: [2]float64{0.3, 1.2}, Label: [2]int{h, h}},
		Edge{From: 1, To: 0, Rate: [2]float64{0.8, 0.1}, Label: [2]int{h, h}})
	ab := []int{0, 3, 4}
	for i, e := range ab {
		net.Edges[e].Label = [2]int{2 * i, 2*i + 1}
		net.Labels = append(net.Labels, Label{Name: "f" + strconv.Itoa(e), Detect: 1}, Label{Name: "b" + strconv.Itoa(e), Detect: 1})
	}
	pi, err := net.Stationary()
	if err != nil {
		t.Fatal(err)
	}
	sim, err := NewSimulator(net, 77)
	if err != nil {
		t.Fatal(err)
	}
	sim.StartStationary()
	ev, _ := sim.Visible(300000, nil)
	const B = 50
	T := ev[len(ev)-1].Time / B
	cnt := make([][]float64, len(net.Labels))
	for l := range cnt {
		cnt[l] = make([]float64, B)
	}
	for _, e := range ev {
		cnt[e.Label][min(int(e.Time/T), B-1)]++
	}
	for i, e := range ab {
		for d := 0; d < 2; d++ {
			ed := net.Edges[e]
			from := ed.From
			if d == 1 {
				from = ed.To
			}
			want := pi[from] * ed.Rate[d]
			l := 2*i + d
			mean, sq := 0.0, 0.0
			for _, c := range cnt[l] {
				mean += c / T
			}
			mean /= B
			for _, c := range cnt[l] {
				sq += (c/T - mean) * (c/T - mean)
			}
			se := math.Sqrt(sq / (B - 1) / B)
			if math.Abs(mean-want) > 4*se {
				t.Errorf("label %s: rate %.5g +- %.2g, exact %.5g", net.Labels[l].Name, mean, se, want)
			}
		}
	}
}
