package infer

import (
	"errors"
	"math"
	"slices"
	"strings"
	"testing"

	"edgewise/likelihood"
	"edgewise/models"

	"gonum.org/v1/gonum/stat/distuv"
)

// bootRing3 is a three-state ring with every rate free; bootRing3Null the
// same ring with kac fixed at 0.6: nested in it, one parameter fewer, at an
// interior point of the larger model's space.
const bootRing3 = `name = "ring3free"
states = ["A", "B", "C"]
[[edge]]
between = ["A", "B"]
rates = ["kab", "kba"]
labels = ["+", "-"]
[[edge]]
between = ["B", "C"]
rates = ["kbc", "kcb"]
[[edge]]
between = ["C", "A"]
rates = ["kca", "kac"]
[param.kab]
value = 3.0
[param.kba]
value = 0.5
[param.kbc]
value = 2.0
[param.kcb]
value = 0.4
[param.kca]
value = 1.5
[param.kac]
value = 0.6
`

const bootRing3Null = bootRing3 + "fixed = true\n"

// bootPair fits the null and the alternative to d and returns their
// values and the observed statistic.
func bootPair(tb testing.TB, null, alt *models.Model, d *likelihood.Data, fo FitOptions) (x0, x1 []float64, obs float64) {
	tb.Helper()
	f0, err := Fit(null, d, fo)
	if err != nil {
		tb.Fatal(err)
	}
	f1, err := Fit(alt, d, fo)
	if err != nil {
		tb.Fatal(err)
	}
	return f0.X, f1.X, 2 * (f1.LogLik - f0.LogLik)
}

// Under a regular nested null (one parameter fixed at an interior value)
// the bootstrap distribution of 2 ln LR is close to chi-square with 1
// degree of freedom (Wilks, Ann. Math. Stat. 9, 60 (1938)): an independent
// route to the replicates' law. KS test of the replicates against chi2(1)
// at the 0.001 level (a correct bootstrap fails it once in 1000 runs;
// seeds fixed, so the outcome is reproducible). The replicates are
// identical for 1 and 3 workers and for two shards joined.
func TestBootstrapNestedChiSquare(t *testing.T) {
	null, alt := parseSpec(t, bootRing3Null), parseSpec(t, bootRing3)
	net, err := null.Network(null.Start())
	if err != nil {
		t.Fatal(err)
	}
	d := recSimulate(t, net, 7, 2, 300)
	fo := FitOptions{Starts: 2, Seed: 1, ExploreGaps: -1}
	x0, x1, obs := bootPair(t, null, alt, d, fo)
	const B = 60
	fo.Workers = 3
	res, err := ParametricBootstrap(null, x0, alt, x1, obs, d, BootstrapOptions{Replicates: B, Seed: 5, Fit: fo})
	if err != nil {
		t.Fatal(err)
	}
	if len(res.LR) != B || res.Interrupted {
		t.Fatalf("%d replicates (want %d), interrupted %v", len(res.LR), B, res.Interrupted)
	}
	u := make([]float64, 0, B)
	chi := distuv.ChiSquared{K: 1}
	for i, v := range res.LR {
		if math.IsNaN(v) {
			t.Fatalf("replicate %d failed: %s", res.Index[i], res.Errors[i])
		}
		if v < -1e-6 {
			t.Errorf("replicate %d: 2 ln LR = %g < 0 for nested models: a fit missed its maximum", res.Index[i], v)
		}
		u = append(u, chi.CDF(math.Max(v, 0)))
	}
	ut, err := UniformityTest(u)
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("observed 2 ln LR %.3f; replicates: KS against chi2(1) D = %.3f, p = %.3g", obs, ut.KS, ut.KSP)
	if ut.KSP < 0.001 {
		t.Errorf("bootstrap replicates do not follow chi2(1): KS p = %.3g", ut.KSP)
	}
	p, exceed, used, failed := BootstrapPValue(obs, res.LR)
	if used != B || failed != 0 || p != float64(1+exceed)/float64(1+B) {
		t.Errorf("p = %g from %d exceedances, %d used, %d failed", p, exceed, used, failed)
	}

	// The same replicates with one worker, and as two shards.
	fo.Workers = 1
	const sub = 8
	one, err := ParametricBootstrap(null, x0, alt, x1, obs, d, BootstrapOptions{Replicates: sub, Seed: 5, Fit: fo})
	if err != nil {
		t.Fatal(err)
	}
	var joined []float64
	idx := map[int]float64{}
	for s := range 2 {
		part, err := ParametricBootstrap(null, x0, alt, x1, obs, d, BootstrapOptions{Replicates: sub, Seed: 5, Fit: fo, Shard: Shard{Index: s, Of: 2}})
		if err != nil {
			t.Fatal(err)
		}
		for i, b := range part.Index {
			if b%2 != s {
				t.Errorf("shard %d ran replicate %d", s, b)
			}
			idx[b] = part.LR[i]
		}
	}
	for b := range sub {
		joined = append(joined, idx[b])
	}
	if !slices.Equal(one.LR, res.LR[:sub]) || !slices.Equal(joined, res.LR[:sub]) {
		t.Errorf("replicates depend on the workers or the shards:\n3 workers %v\n1 worker  %v\nshards    %v", res.LR[:sub], one.LR, joined)
	}
}

// Under the null the bootstrap p-value is uniform on {1, ..., B+1}/(B+1)
// (exactly so if the fitted null were the truth; approximately with
// fitted values). Small CI version: 16 data sets from the null, 9
// replicates each; the p-values are checked against the discrete uniform
// law by a chi-square test on its 10 values pooled into 5 bins of
// probability 0.2 (at the 0.001 level), and their mean against 0.55 within
// 4 standard errors. The long version (bootstrap_long_test.go) takes 100 sets of 19.
func TestBootstrapUniformUnderNull(t *testing.T) {
	checkBootstrapUniform(t, 16, 9, 150)
}

func checkBootstrapUniform(t *testing.T, sets, B, events int) {
	null, alt := parseSpec(t, bootRing3Null), parseSpec(t, bootRing3)
	net, err := null.Network(null.Start())
	if err != nil {
		t.Fatal(err)
	}
	fo := FitOptions{Starts: 2, Seed: 1, ExploreGaps: -1}
	var ps []float64
	for s := range sets {
		d := recSimulate(t, net, uint64(100+s), 1, events)
		x0, x1, obs := bootPair(t, null, alt, d, fo)
		res, err := ParametricBootstrap(null, x0, alt, x1, obs, d, BootstrapOptions{Replicates: B, Seed: uint64(s), Fit: fo})
		if err != nil {
			t.Fatal(err)
		}
		p, _, used, _ := BootstrapPValue(obs, res.LR)
		if used != B {
			t.Fatalf("data set %d: %d of %d replicates", s, used, B)
		}
		ps = append(ps, p)
	}
	// p takes the values k/(B+1), k = 1..B+1, each with probability
	// 1/(B+1) under the null; pool them into 5 equal bins.
	bins := make([]float64, 5)
	for _, p := range ps {
		k := int(math.Round(p*float64(B+1))) - 1
		bins[k*5/(B+1)]++
	}
	g := 0.0
	e := float64(len(ps)) / 5
	for _, o := range bins {
		g += (o - e) * (o - e) / e
	}
	pg := distuv.ChiSquared{K: 4}.Survival(g)
	mean := 0.0
	for _, p := range ps {
		mean += p
	}
	mean /= float64(len(ps))
	// Var of the discrete uniform on {1..m}/m: (m^2 - 1)/(12 m^2).
	m := float64(B + 1)
	se := math.Sqrt((m*m - 1) / (12 * m * m) / float64(len(ps)))
	t.Logf("%d p-values: bins %v, chi-square p = %.3g, mean %.3f (want 0.5 + 0.5/%g = %.3f, se %.3f)", len(ps), bins, pg, mean, m, 0.5+0.5/m, se)
	if pg < 0.001 {
		t.Errorf("bootstrap p-values not uniform under the null: chi-square p = %.3g, bins %v", pg, bins)
	}
	if math.Abs(mean-(0.5+0.5/m)) > 4*se {
		t.Errorf("mean bootstrap p-value %.3f, want %.3f within %.3f", mean, 0.5+0.5/m, 4*se)
	}
}

// ReplicateSeed gives distinct seeds to neighbouring replicates and
// seeds (SplitMix64 is a bijection of its input).
func TestReplicateSeed(t *testing.T) {
	seen := map[uint64]bool{}
	for s := range uint64(4) {
		for b := range 1000 {
			v := ReplicateSeed(s*1000003, b)
			if seen[v] {
				t.Fatalf("seed %d replicate %d repeats a value", s, b)
			}
			seen[v] = true
		}
	}
}

// The expected jumps per recorded event equal the simulator's own count
// (models.Simulator.Visible returns the jumps it made) within 4 standard
// errors of the mean over blocks (an independent route: simulation), for
// a ring with a fast hidden pair and missed events; and a run that would
// take too many jumps is refused before any work.
func TestBootstrapJumpCost(t *testing.T) {
	m := parseSpec(t, strings.Replace(strings.Replace(bootRing3, "[param.kbc]\nvalue = 2.0", "[param.kbc]\nvalue = 200.0", 1), "[param.kcb]\nvalue = 0.4", "[param.kcb]\nvalue = 300.0", 1))
	net, err := m.Network(m.Start())
	if err != nil {
		t.Fatal(err)
	}
	net.Labels[0].Detect, net.Labels[1].Detect = 0.8, 0.8
	per, maxRate, err := jumpsPerEvent(net)
	if err != nil {
		t.Fatal(err)
	}
	sim, err := models.NewSimulator(net, 3)
	if err != nil {
		t.Fatal(err)
	}
	sim.StartStationary()
	sim.Steps(10000)
	const blocks, size = 40, 500
	var xs []float64
	var buf []models.Event
	for range blocks {
		var jumps int
		buf, jumps = sim.Visible(size, buf[:0])
		xs = append(xs, float64(jumps)/size)
	}
	mean, sd := 0.0, 0.0
	for _, x := range xs {
		mean += x / blocks
	}
	for _, x := range xs {
		sd += (x - mean) * (x - mean) / (blocks - 1)
	}
	se := math.Sqrt(sd / blocks)
	t.Logf("jumps per event: predicted %.4g, simulated %.4g +- %.2g; largest exit rate %g", per, mean, se, maxRate)
	if math.Abs(mean-per) > 4*se {
		t.Errorf("jumps per event: predicted %.4g, simulated %.4g +- %.2g", per, mean, se)
	}
	if maxRate != 301.5 {
		t.Errorf("largest exit rate %g, want kcb + kca = 301.5", maxRate)
	}
	d := recSimulate(t, net, 1, 1, 1000)
	specNet, err := m.Network(m.Start()) // perfect detection, as the spec says
	if err != nil {
		t.Fatal(err)
	}
	per, _, err = jumpsPerEvent(specNet)
	if err != nil {
		t.Fatal(err)
	}
	_, err = ParametricBootstrap(m, m.Start(), m, m.Start(), 0, d, BootstrapOptions{Replicates: 10, MaxJumps: per * 1000 * 9.5})
	var ce *BootstrapCostError
	if !errors.As(err, &ce) || ce.Replicates != 10 || ce.Events != 1000 {
		t.Errorf("a run over the jump limit: %v", err)
	}
}
