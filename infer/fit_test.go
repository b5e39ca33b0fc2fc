package infer

import (
	"math"
	"strings"
	"testing"

	"edgewise/likelihood"
	"edgewise/models"

	"gonum.org/v1/gonum/mat"
)

// fitRing3Spec is a 3-state ring with all six rates free; the visible edge
// A<->B carries + and -. 4N - 6 = 6: every rate is determined (empirical).
const fitRing3Spec = `
name = "ring3free"
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

func parseSpec(tb testing.TB, src string) *models.Model {
	tb.Helper()
	m, err := models.Parse(strings.NewReader(src), "test.toml")
	if err != nil {
		tb.Fatal(err)
	}
	return m
}

func truthData(tb testing.TB, m *models.Model, seed uint64, records, events int) *likelihood.Data {
	tb.Helper()
	net, err := m.Network(m.Start())
	if err != nil {
		tb.Fatal(err)
	}
	return recSimulate(tb, net, seed, records, events)
}

// The maximum is never below ln L at the true parameters (a property of a
// maximum), every start reaches it, the estimates lie within 4 standard
// errors of the truth, and every parameter is determined.
func TestFitRing3(t *testing.T) {
	m := parseSpec(t, fitRing3Spec)
	d := truthData(t, m, 11, 1, 20000)
	truth := m.Start()
	llTrue, err := likelihood.ModelLogLik(m, truth, d, likelihood.Options{})
	if err != nil {
		t.Fatal(err)
	}
	res, err := Fit(m, d, FitOptions{Starts: 5, Seed: 3, Workers: 2})
	if err != nil {
		t.Fatal(err)
	}
	if res.LogLik < llTrue-1e-6 {
		t.Errorf("max ln L %.6f below ln L at the truth %.6f", res.LogLik, llTrue)
	}
	if len(res.Optima) < 1 || res.Optima[0].Starts < 3 {
		t.Errorf("best optimum reached by %d of 5 starts: %+v", res.Optima[0].Starts, res.Starts)
	}
	if res.Effective() != 6 {
		t.Errorf("effective parameters %d, want 6; eigenvalues %v; %v", res.Effective(), res.Ident.Eigenvalues, res.Ident.Statements)
	}
	for j, p := range res.Params {
		if !p.Determined || !(p.SELog > 0) || math.IsInf(p.SELog, 0) {
			t.Errorf("%s: determined %v, SE(ln) %v", p.Name, p.Determined, p.SELog)
			continue
		}
		if z := (math.Log(p.Value) - math.Log(truth[j])) / p.SELog; math.Abs(z) > 4 {
			t.Errorf("%s = %.4g, truth %.4g, z = %.2f", p.Name, p.Value, truth[j], z)
		}
	}
}

// Results do not depend on the number of workers (bit for bit).
func TestFitWorkersInvariant(t *testing.T) {
	m := parseSpec(t, fitRing3Spec)
	d := truthData(t, m, 12, 2, 3000)
	a, err := Fit(m, d, FitOptions{Starts: 4, Seed: 9, Workers: 1})
	if err != nil {
		t.Fatal(err)
	}
	b, err := Fit(m, d, FitOptions{Starts: 4, Seed: 9, Workers: 3})
	if err != nil {
		t.Fatal(err)
	}
	if a.LogLik != b.LogLik {
		t.Fatalf("ln L %v (1 worker) != %v (3 workers)", a.LogLik, b.LogLik)
	}
	for j := range a.X {
		if a.X[j] != b.X[j] || a.Params[j].SELog != b.Params[j].SELog {
			t.Errorf("%s: %v/%v vs %v/%v", a.Free[j], a.X[j], a.Params[j].SELog, b.X[j], b.Params[j].SELog)
		}
	}
}

// fitLeavesSpec: two hidden leaves C1, C2 hang on B with entry rates a1,
// a2 and one tied return rate r. An excursion from B lasts Exp(r) whichever
// leaf it visits, so only a1 + a2 enters the law of the records: ln L is
// exactly flat along a1 + a2 = const.
const fitLeavesSpec = `
name = "leaves"
states = ["A", "B", "C1", "C2"]
[[edge]]
between = ["A", "B"]
rates = ["kab", "kba"]
labels = ["+", "-"]
[[edge]]
between = ["B", "C1"]
rates = ["a1", "r"]
[[edge]]
between = ["B", "C2"]
rates = ["a2", "r"]
[param.kab]
value = 1.0
[param.kba]
value = 2.0
[param.a1]
value = 1.0
[param.a2]
value = 2.0
[param.r]
value = 0.7
`

func TestFitNamesFlatSum(t *testing.T) {
	m := parseSpec(t, fitLeavesSpec)
	d := truthData(t, m, 13, 1, 20000)
	res, err := Fit(m, d, FitOptions{Starts: 3, Seed: 1, Workers: 2})
	if err != nil {
		t.Fatal(err)
	}
	if res.Effective() != 4 {
		t.Fatalf("effective %d, want 4 (eigenvalues %v)", res.Effective(), res.Ident.Eigenvalues)
	}
	byName := map[string]ParamFit{}
	for _, p := range res.Params {
		byName[p.Name] = p
	}
	// Where on the ridge the search stops decides which of a1, a2 carries
	// the flat direction (d ln a1 : d ln a2 = a2 : -a1), so at least one
	// of them is undetermined and the others are determined.
	if byName["a1"].Determined && byName["a2"].Determined {
		t.Errorf("a1 and a2 both reported as determined")
	}
	for _, n := range []string{"kab", "kba", "r"} {
		if !byName[n].Determined {
			t.Errorf("%s reported as undetermined", n)
		}
	}
	if len(res.Ident.Statements) != 1 {
		t.Errorf("statements %q, want one", res.Ident.Statements)
	}
	// The sum itself is estimated within 4 of its standard errors
	// (delta method from the information restricted to the determined
	// direction: crude bound, the sum is 3).
	sum := byName["a1"].Value + byName["a2"].Value
	if math.Abs(sum-3) > 0.5 {
		t.Errorf("a1 + a2 = %.3f, truth 3", sum)
	}
}

// Profile intervals: at each finite end the profile deviance equals the
// chi-square(1) 95% quantile 3.8415 (checked by an independent
// maximisation with the parameter held at the end), and the interval holds
// the estimate.
func TestFitProfileEnds(t *testing.T) {
	m := parseSpec(t, fitRing3Spec)
	d := truthData(t, m, 14, 1, 5000)
	res, err := Fit(m, d, FitOptions{Starts: 3, Seed: 2, Workers: 2, Profile: true})
	if err != nil {
		t.Fatal(err)
	}
	for j, p := range res.Params {
		pi := p.Profile
		if pi == nil {
			t.Fatalf("%s: no profile", p.Name)
		}
		if !(pi.Lower < p.Value && p.Value < pi.Upper) {
			t.Errorf("%s: interval [%g, %g] does not hold the estimate %g", p.Name, pi.Lower, pi.Upper, p.Value)
		}
		for _, end := range []struct {
			v    float64
			open bool
		}{{pi.Lower, pi.LowerOpen}, {pi.Upper, pi.UpperOpen}} {
			if end.open {
				continue
			}
			dev := 2 * (res.LogLik - profileAt(t, m, d, res.X, j, end.v))
			if math.Abs(dev-3.8415) > 0.05 {
				t.Errorf("%s at %g: profile deviance %.4f, want 3.8415", p.Name, end.v, dev)
			}
		}
	}
}

// profileAt maximises ln L with free parameter j held at v, starting from
// x: the model's parameter j is made fixed, and a fresh Fit runs on the
// rest (a route independent of profileSide's warm starts and secant).
func profileAt(t *testing.T, m *models.Model, d *likelihood.Data, x []float64, j int, v float64) float64 {
	t.Helper()
	mm := *m
	mm.Params = append([]models.Param(nil), m.Params...)
	free := m.Free()
	for i := range mm.Params {
		for k, name := range free {
			if mm.Params[i].Name == name {
				mm.Params[i].Value = x[k]
				if k == j {
					mm.Params[i].Value = v
					mm.Params[i].Fixed = true
				}
			}
		}
	}
	res, err := Fit(&mm, d, FitOptions{Starts: 1, Workers: 2})
	if err != nil {
		t.Fatal(err)
	}
	return res.LogLik
}

// The naming of flat directions on constructed information matrices with
// known flat subspaces: I = sum_k lambda_k c_k c_k^T over the determined
// combinations c_k (in ln-rate coordinates).
func TestNameFlatDirections(t *testing.T) {
	kinds := []models.ParamKind{models.RateParam, models.RateParam, models.RateParam, models.RateParam}
	names := []string{"k1", "k3", "k4", "k5"}
	build := func(cs [][]float64, lam []float64) *mat.SymDense {
		info := mat.NewSymDense(4, nil)
		for k, c := range cs {
			for i := 0; i < 4; i++ {
				for j := i; j < 4; j++ {
					info.SetSym(i, j, info.At(i, j)+lam[k]*c[i]*c[j])
				}
			}
		}
		return info
	}
	cases := []struct {
		cs   [][]float64
		x    []float64
		want string
		eff  int
	}{
		// k1 determined; only ln k3 - ln k4 + ln k5 among the others.
		{[][]float64{{1, 0, 0, 0}, {0, 1, -1, 1}}, []float64{1, 2, 3, 4}, "only the combination k3*k5/k4 is determined", 2},
		// only the sum k3 + k4 (c proportional to the values 2, 3), k1
		// and k5 determined.
		{[][]float64{{1, 0, 0, 0}, {0, 0, 0, 1}, {0, 2, 3, 0}}, []float64{1, 2, 3, 4}, "only the sum k3 + k4 is determined", 3},
		// k5 not determined at all.
		{[][]float64{{1, 0, 0, 0}, {0, 1, 0, 0}, {0, 0, 1, 0}}, []float64{1, 2, 3, 4}, "the data do not determine k5 at all", 3},
	}
	for i, c := range cases {
		lam := make([]float64, len(c.cs))
		for k := range lam {
			lam[k] = 1e4 * float64(k+1)
		}
		id, err := analyseInformation(build(c.cs, lam), names, kinds, c.x, nil)
		if err != nil {
			t.Fatal(err)
		}
		if id.Effective != c.eff {
			t.Errorf("case %d: effective %d, want %d", i, id.Effective, c.eff)
		}
		if len(id.Statements) != 1 || !strings.Contains(id.Statements[0], c.want) {
			t.Errorf("case %d: statements %q, want %q", i, id.Statements, c.want)
		}
	}
}

// The parametric bootstrap of a fit: the percentile intervals hold the
// estimates, their spread agrees with the observed-information standard
// errors within the Monte Carlo error of 40 replicates (the SD of an SD
// from 40 draws is about 11%: a factor 1.5 is far outside it), and the
// result does not depend on the number of workers.
func TestBootstrapFit(t *testing.T) {
	m := parseSpec(t, fitRing3Spec)
	d := truthData(t, m, 41, 2, 2500)
	res, err := Fit(m, d, FitOptions{Starts: 2, Seed: 1, Workers: 2})
	if err != nil {
		t.Fatal(err)
	}
	a, err := BootstrapFit(res, d, BootOptions{Replicates: 40, Seed: 5, Workers: 1})
	if err != nil {
		t.Fatal(err)
	}
	b, err := BootstrapFit(res, d, BootOptions{Replicates: 40, Seed: 5, Workers: 3})
	if err != nil {
		t.Fatal(err)
	}
	if a.Failed > 2 {
		t.Errorf("%d of 40 replicates failed", a.Failed)
	}
	for j, p := range a.Params {
		if p != b.Params[j] {
			t.Errorf("%s: %+v (1 worker) != %+v (3 workers)", p.Name, p, b.Params[j])
		}
		if !(p.Lo < p.Value && p.Value < p.Hi) {
			t.Errorf("%s: bootstrap interval [%g, %g] misses the estimate %g", p.Name, p.Lo, p.Hi, p.Value)
		}
		if r := p.SD / res.Params[j].SE; r < 1/1.5 || r > 1.5 {
			t.Errorf("%s: bootstrap SD %g against SE %g", p.Name, p.SD, res.Params[j].SE)
		}
	}
	if len(a.Derived) == 0 || a.Derived[0].Name != "sigma" {
		t.Errorf("derived rows: %+v", a.Derived)
	}
}
