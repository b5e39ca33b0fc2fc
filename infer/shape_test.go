package infer

import (
	"math"
	"math/rand/v2"
	"slices"
	"testing"

	"edgewise/models"
)

// TestKSExact checks the exact two-sample p-value (up to n m = 10^6) two ways:
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
	lc := func(n, k int) float64 { // ln C(n, k)
		a, _ := math.Lgamma(float64(n + 1))
		b, _ := math.Lgamma(float64(k + 1))
		c, _ := math.Lgamma(float64(n - k + 1))
		return a - b - c
	}
	for _, n := range []int{5, 10, 30, 100, 1000} {
		for k := 1; k <= n; k++ {
			if n == 1000 && k%10 != 0 || k > 200 {
				continue // each n = 1000 value costs 10^6 steps
			}
			want := 0.0
			for j := 1; n-j*k >= 0; j++ {
				want += 2 * math.Pow(-1, float64(j+1)) * math.Exp(lc(2*n, n-j*k)-lc(2*n, n))
			}
			got, exact := KSPValue(float64(k)/float64(n), n, n)
			if !exact {
				continue // below 1e-10: the asymptotic value is used
			}
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
	if _, exact := KSPValue(0.1, 1001, 1000); exact {
		t.Error("n m > 10^6 should use the asymptotic form")
	}
	if p, exact := KSPValue(0.9, 50, 60); exact || !(p > 0 && p < 1e-10) {
		t.Errorf("tiny p: %v exact %v, want the asymptotic value", p, exact)
	}
}

// TestShapeBootstrapSize: the bootstrap calibration brings both tests to
// their nominal size on identical shapes: over 200 replicates (1500 events
// of a weakly driven ring, 99 resamples each) the rejection rate at 5%
// must lie in the binomial 3-sigma band [0.004, 0.096] (the uncalibrated
// tests reject about 1% and 0%, see TestShapeSize).
func TestShapeBootstrapSize(t *testing.T) {
	net := recRing([]float64{1.2, 0.9, 1.1, 1.0}, []float64{1.0, 1.0, 0.8, 1.1}, 1)
	rej, rejAD := 0, 0
	const reps = 200
	for r := 0; r < reps; r++ {
		d := recSimulate(t, net, uint64(700+r), 1, 1500)
		res, err := ShapeTest(d, 0, 1, ShapeOptions{Bootstrap: 99, Seed: uint64(r)})
		if err != nil {
			t.Fatal(err)
		}
		if res.PBoot <= 0.05 {
			rej++
		}
		if res.ADPBoot <= 0.05 {
			rejAD++
		}
	}
	frac, fracAD := float64(rej)/reps, float64(rejAD)/reps
	t.Logf("bootstrap-calibrated size at 5%%: KS %.3f, Anderson-Darling %.3f", frac, fracAD)
	for _, f := range []float64{frac, fracAD} {
		if f < 0.004 || f > 0.096 {
			t.Errorf("calibrated size %.3f outside [0.004, 0.096]", f)
		}
	}
}

// TestShapeSize: on a unicyclic ring with perfect detection the ++ and --
// shapes are identical, so at the 5% level the test may reject at most 5%
// of replicates; over 200 replicates the binomial 3-sigma upper limit is
// 0.05 + 3 sqrt(0.05 0.95 / 200) = 0.096. (The test is conservative
// because each sample is scaled by its own mean; the size is logged.)
func TestShapeSize(t *testing.T) {
	net := recRing([]float64{1.2, 0.9, 1.1, 1.0}, []float64{1.0, 1.0, 0.8, 1.1}, 1)
	rej, rejAD := 0, 0
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
		if res.AD.P < 0.05 {
			rejAD++
		}
	}
	frac, fracAD := float64(rej)/reps, float64(rejAD)/reps
	t.Logf("shape test size at 5%%: KS %.3f (%d of %d), Anderson-Darling %.3f", frac, rej, reps, fracAD)
	if frac > 0.096 || fracAD > 0.096 {
		t.Errorf("rejection rates %.3f (KS), %.3f (AD) on identical shapes", frac, fracAD)
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
// 10^5 events each must give a KS p < 1e-3 and an Anderson-Darling p at
// or below 0.01 (the end of its table). A control ring with perfect
// detection must not (false alarms: probability 1e-3 and 0.01).
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
		res, err := ShapeTest(d, 0, 1, ShapeOptions{Bootstrap: 99, Seed: 1})
		if err != nil {
			t.Fatal(err)
		}
		if c.differ != (res.PBoot <= 0.01 && res.ADPBoot <= 0.01) {
			t.Errorf("%s: bootstrap p-values %v, %v (smallest possible 0.01), want differ=%v", c.name, res.PBoot, res.ADPBoot, c.differ)
		}
		t.Logf("%s: N++ %d N-- %d D %.4f p %.3g; AD T %.2f p %s%.3g", c.name, res.NPlus, res.NMinus, res.D, res.P, res.AD.T, res.AD.PBound, res.AD.P)
		if c.differ != (res.P < 1e-3) {
			t.Errorf("%s: p = %.3g (D = %.4f), want differ=%v", c.name, res.P, res.D, c.differ)
		}
		if c.differ != (res.AD.P <= 0.01) {
			t.Errorf("%s: Anderson-Darling p = %s%.3g (T = %.2f), want differ=%v", c.name, res.AD.PBound, res.AD.P, res.AD.T, c.differ)
		}
	}
}

// recADDirect computes A^2 from its integral form, sum_i n_i times the
// integral of (F_i - H_N)^2 / (H_N (1 - H_N)) dH_N over the pooled sample
// (Scholz and Stephens 1987, eq. 2), with each empirical distribution
// function evaluated by binary search: a route independent of ADTest's
// merge.
func recADDirect(x, y []float64) float64 {
	z := append(slices.Clone(x), y...)
	slices.Sort(z)
	N := float64(len(z))
	cdf := func(s []float64, v float64) float64 {
		i, _ := slices.BinarySearch(s, v)
		for i < len(s) && s[i] <= v {
			i++
		}
		return float64(i) / float64(len(s))
	}
	a := 0.0
	for j := 0; j < len(z)-1; j++ {
		h := float64(j+1) / N
		for _, s := range [][]float64{x, y} {
			f := cdf(s, z[j])
			a += float64(len(s)) * (f - h) * (f - h) / (h * (1 - h)) / N
		}
	}
	return a
}

// TestADTwoSample checks the Anderson-Darling statistic against its
// integral form (1e-9 relative), the finite-N variance against the
// asymptotic variance of A^2, 2(pi^2 - 9)/3 = 0.5797 (the one-sample
// Anderson-Darling limit, which the k = 2 statistic shares; from memory),
// and, by simulation, the mean 1 and variance sigma_N^2 at n = 30, 50
// (10^4 replicates: the mean has SE 0.0075, tolerance 0.03 = 4 SE; the
// variance of A^2 is heavy-tailed, its relative SE measured over seeds is
// about 2.5%, tolerance 10%) and the
// size of the test at 5% (2000 replicates, 3-sigma band [0.035, 0.065]).
func TestADTwoSample(t *testing.T) {
	rng := rand.New(rand.NewPCG(17, 18))
	draw := func(n int) []float64 {
		v := make([]float64, n)
		for i := range v {
			v[i] = rng.ExpFloat64()
		}
		slices.Sort(v)
		return v
	}
	for _, nm := range [][2]int{{3, 4}, {10, 25}, {200, 150}} {
		x, y := draw(nm[0]), draw(nm[1])
		got, want := ADTest(x, y).A2, recADDirect(x, y)
		if math.Abs(got-want) > 1e-9*want {
			t.Errorf("n=%v: A2 %v, integral form %v", nm, got, want)
		}
	}
	if v := adVariance(2000000, []int{1000000, 1000000}); math.Abs(v-2*(math.Pi*math.Pi-9)/3) > 1e-3 {
		t.Errorf("large-N variance %v, want %v", v, 2*(math.Pi*math.Pi-9)/3)
	}
	var a2 []float64
	for r := 0; r < 10000; r++ {
		a2 = append(a2, ADTest(draw(30), draw(50)).A2)
	}
	m, v := meanVar(a2)
	want := adVariance(80, []int{30, 50})
	if math.Abs(m-1) > 0.03 || math.Abs(v/want-1) > 0.10 {
		t.Errorf("A2 mean %v (want 1), variance %v (want %v)", m, v, want)
	}
	rej := 0
	for r := 0; r < 2000; r++ {
		if res := ADTest(draw(40), draw(60)); res.P < 0.05 {
			rej++
		}
	}
	frac := float64(rej) / 2000
	t.Logf("A2 mean %.3f var %.3f (sigma_N^2 %.3f); size at 5%%: %.3f", m, v, want, frac)
	if frac < 0.035 || frac > 0.065 {
		t.Errorf("size %v", frac)
	}
}

// TestADTable checks the table of the Anderson-Darling p-value against
// its source and the p-value against a documented one.
//
//   - The interpolation coefficients b0, b1, b2 of Scholz and Stephens
//     (JASA 82, 918 (1987), Table 2) as SciPy transcribes them
//     (scipy/scipy, scipy/stats/_morestats.py, anderson_ksamp), for the
//     levels 25%, 10%, 5%, 2.5%, 1%, 0.5%, 0.1%: at m = k - 1 = 1 the
//     critical value is b0 + b1 + b2, which adTable must hold to the 3
//     decimals of the coefficients (tolerance 5e-4, half the last digit).
//   - At each table point the p-value is the level itself (to rounding).
//   - SciPy's documented example (anderson_ksamp docstring: two normal
//     samples of 50 and 30, statistic 3.4444310693448936, p-value
//     0.013106682406720973): SciPy interpolates log p by a quadratic fitted
//     to all seven points, this package logit p linearly between the two
//     neighbours, so the two differ a little; tolerance 3% relative (the
//     difference here is 0.4%; 3% is well below the 0.01-0.025 spacing of
//     the neighbouring levels).
//   - Beyond the table the end values come with their bound.
func TestADTable(t *testing.T) {
	b0 := []float64{0.675, 1.281, 1.645, 1.96, 2.326, 2.573, 3.085}
	b1 := []float64{-0.245, 0.25, 0.678, 1.149, 1.822, 2.364, 3.615}
	b2 := []float64{-0.105, -0.305, -0.362, -0.391, -0.396, -0.345, -0.154}
	sig := []float64{0.25, 0.1, 0.05, 0.025, 0.01, 0.005, 0.001}
	if len(adTable) != len(sig) {
		t.Fatalf("table has %d points, the source %d", len(adTable), len(sig))
	}
	for i, e := range adTable {
		if want := b0[i] + b1[i] + b2[i]; math.Abs(e.t-want) > 5e-4 || e.p != sig[i] {
			t.Errorf("point %d: (%v, %v), source (%v, %v)", i, e.t, e.p, want, sig[i])
		}
		if p, b := adPValue(e.t); math.Abs(p-e.p) > 1e-12*e.p || b != "" {
			t.Errorf("at table point %v: p %v %q, want %v", e.t, p, b, e.p)
		}
	}
	if p, _ := adPValue(3.4444310693448936); math.Abs(p/0.013106682406720973-1) > 0.03 {
		t.Errorf("SciPy example: p %v, documented 0.013106682406720973", p)
	}
	if p, b := adPValue(0.1); p != 0.25 || b != ">" {
		t.Errorf("below the table: %v %q", p, b)
	}
	if p, b := adPValue(7); p != 0.001 || b != "<" {
		t.Errorf("above the table: %v %q", p, b)
	}
}
