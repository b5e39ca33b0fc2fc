package infer

import (
	"math"
	"slices"
	"testing"

	"edgewise/models"
)

// recBinom returns C(n, k) as a float64 (exact for the small values used).
func recBinom(n, k int) float64 {
	if k < 0 || k > n {
		return 0
	}
	r := 1.0
	for i := 1; i <= k; i++ {
		r = r * float64(n-k+i) / float64(i)
	}
	return r
}

// TestKSExact checks the exact two-sample p-value two ways:
//   - against brute force over all C(n+m, n) interleavings of the two
//     samples (every one equally likely under the null), for small n, m;
//   - for n = m, against the closed form of Gnedenko and Korolyuk (Dokl.
//     Akad. Nauk SSSR 80, 525 (1951); formula from memory, checked here
//     against the brute force too):
//     P(D >= k/n) = 2 sum_{j>=1} (-1)^{j+1} C(2n, n - j k) / C(2n, n).
func TestKSExact(t *testing.T) {
	for _, nm := range [][2]int{{3, 4}, {4, 4}, {5, 7}, {6, 6}, {2, 9}} {
		n, m := nm[0], nm[1]
		// Enumerate subsets of positions of the x sample among n+m.
		tot := n + m
		counts := map[float64]int{}
		all := 0
		for mask := 0; mask < 1<<tot; mask++ {
			if recPopcount(mask) != n {
				continue
			}
			var x, y []float64
			for b := 0; b < tot; b++ {
				if mask>>b&1 == 1 {
					x = append(x, float64(b))
				} else {
					y = append(y, float64(b))
				}
			}
			counts[math.Round(ksDistance(x, y)*float64(n*m))]++
			all++
		}
		keys := make([]float64, 0, len(counts))
		for k := range counts {
			keys = append(keys, k)
		}
		slices.Sort(keys)
		for _, k := range keys {
			ge := 0
			for k2, c := range counts {
				if k2 >= k {
					ge += c
				}
			}
			want := float64(ge) / float64(all)
			got, exact := KSPValue(k/float64(n*m), n, m)
			if !exact || math.Abs(got-want) > 1e-12 {
				t.Errorf("n=%d m=%d D=%v/%d: p %v, brute force %v", n, m, k, n*m, got, want)
			}
		}
	}
	for _, n := range []int{5, 10, 30, 100} {
		for k := 1; k <= n; k++ {
			want := 0.0
			for j := 1; n-j*k >= 0; j++ {
				want += 2 * math.Pow(-1, float64(j+1)) * recBinom(2*n, n-j*k) / recBinom(2*n, n)
			}
			got, _ := KSPValue(float64(k)/float64(n), n, n)
			if math.Abs(got-want) > 1e-9 {
				t.Errorf("n=m=%d D=%d/%d: p %v, Gnedenko-Korolyuk %v", n, k, n, got, want)
			}
		}
	}
}

func recPopcount(x int) int {
	c := 0
	for ; x > 0; x &= x - 1 {
		c++
	}
	return c
}

// TestKolmogorovQ: the limiting distribution at its tabulated critical
// values (Smirnov's table as quoted in statistics texts, from memory):
// Q(1.2238) = 0.10, Q(1.3581) = 0.05, Q(1.6276) = 0.01, to the 4-5 digits
// quoted (2e-4). And the asymptotic p-value with Stephens' correction
// against the exact one for unequal samples near the exact limit
// (n m <= 10^4: 60 x 150 and 40 x 250), within 0.02 absolute for D from
// 0.12 to 0.30 (p from 0.7 to 7e-4). For n = m the lattice of D is coarse
// (steps 1/n) and the continuous limit is off by up to 0.02 at n = 100.
func TestKolmogorovQ(t *testing.T) {
	for _, c := range [][2]float64{{1.2238, 0.10}, {1.3581, 0.05}, {1.6276, 0.01}} {
		if got := kolmogorovQ(c[0]); math.Abs(got-c[1]) > 2e-4 {
			t.Errorf("Q(%v) = %v, want %v", c[0], got, c[1])
		}
	}
	if kolmogorovQ(0.1) != 1 || kolmogorovQ(10) > 1e-80 {
		t.Errorf("Q tails: %v %v", kolmogorovQ(0.1), kolmogorovQ(10))
	}
	for _, nm := range [][2]int{{60, 150}, {40, 250}} {
		n, m := nm[0], nm[1]
		s := math.Sqrt(float64(n*m) / float64(n+m))
		for k := 12; k <= 30; k++ {
			d := math.Ceil(float64(k)/100*float64(n*m)-1e-9) / float64(n*m)
			exact, ok := KSPValue(d, n, m)
			asym := kolmogorovQ((s + 0.12 + 0.11/s) * d)
			if !ok || math.Abs(exact-asym) > 0.02 {
				t.Errorf("%dx%d D = %v: exact %v, asymptotic %v", n, m, d, exact, asym)
			}
		}
	}
	if _, exact := KSPValue(0.1, 101, 100); exact {
		t.Error("n m > 10^4 should use the asymptotic form")
	}
}

// TestShapeSize: on a unicyclic ring with perfect detection the ++ and --
// shapes are identical, so at the 5% level the test may reject at most 5%
// of replicates; over 200 replicates the binomial 3-sigma upper limit is
// 0.05 + 3 sqrt(0.05 0.95 / 200) = 0.096. (The test is conservative
// because each sample is scaled by its own mean; the size is logged.)
func TestShapeSize(t *testing.T) {
	net := recRing([]float64{1.2, 0.9, 1.1, 1.0}, []float64{1.0, 1.0, 0.8, 1.1}, 1)
	rej := 0
	const reps = 200
	for r := 0; r < reps; r++ {
		d := recSimulate(t, net, uint64(500+r), 1, 1500)
		res, err := ShapeTest(d, 0, 1)
		if err != nil {
			t.Fatal(err)
		}
		if res.P < 0.05 {
			rej++
		}
	}
	frac := float64(rej) / reps
	t.Logf("shape test size at 5%%: %.3f (%d of %d)", frac, rej, reps)
	if frac > 0.096 {
		t.Errorf("rejection rate %.3f on identical shapes", frac)
	}
}

// recTwoCycle builds a network with a driven cycle that avoids the visible
// edge: A-B visible (+: A->B), cycle A-B-C-A through it, and cycle B-C-D-B
// away from it, strongly driven (affinity ln(4^3) = 4.16).
func recTwoCycle() *models.Network {
	h := models.Hidden
	return &models.Network{
		States: []string{"A", "B", "C", "D"},
		Labels: []models.Label{{Name: "+", Detect: 1}, {Name: "-", Detect: 1}},
		Edges: []models.Edge{
			{From: 0, To: 1, Rate: [2]float64{2, 1}, Label: [2]int{0, 1}},
			{From: 1, To: 2, Rate: [2]float64{4, 1}, Label: [2]int{h, h}},
			{From: 2, To: 0, Rate: [2]float64{1, 1}, Label: [2]int{h, h}},
			{From: 2, To: 3, Rate: [2]float64{4, 1}, Label: [2]int{h, h}},
			{From: 3, To: 1, Rate: [2]float64{4, 1}, Label: [2]int{h, h}},
		},
	}
}

// TestShapePower: the shapes differ when a driven cycle avoids the visible
// edge, and when events are missed (p = 0.7 on the shipped ring); with
// 10^5 events each must give p < 1e-3. A control on the same ring with
// perfect detection must not (p > 1e-3; a false alarm has probability 1e-3).
func TestShapePower(t *testing.T) {
	ring3 := recModel(t, "../testdata/ring3.toml")
	missed := ring3.Clone()
	for i := range missed.Labels {
		missed.Labels[i].Detect = 0.7
	}
	ring4 := recRing([]float64{1.2, 0.9, 1.1, 1.0}, []float64{1.0, 1.0, 0.8, 1.1}, 1)
	for _, c := range []struct {
		name   string
		net    *models.Network
		differ bool
	}{{"cycle avoiding the edge", recTwoCycle(), true}, {"ring3, 30% missed", missed, true}, {"ring4, perfect detection", ring4, false}} {
		d := recSimulate(t, c.net, 77, 1, 100000)
		res, err := ShapeTest(d, 0, 1)
		if err != nil {
			t.Fatal(err)
		}
		t.Logf("%s: N++ %d N-- %d D %.4f p %.3g", c.name, res.NPlus, res.NMinus, res.D, res.P)
		if c.differ != (res.P < 1e-3) {
			t.Errorf("%s: p = %.3g (D = %.4f), want differ=%v", c.name, res.P, res.D, c.differ)
		}
	}
}
