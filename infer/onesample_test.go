package infer

import (
	"encoding/json"
	"math"
	"math/rand/v2"
	"os"
	"slices"
	"strconv"
	"testing"
)

// TestUniformityAgainstSciPy: the one-sample tests against SciPy 1.10.1 on
// the samples of testdata/infer/reference-onesample-scipy.json (made by
// reference_onesample_scipy.py; the command is in the file). Tolerances:
//   - KS distance: 1e-12 absolute (a maximum of exact differences);
//   - KS p-value where ours is exact (Durbin's matrix) and SciPy's too
//     (its kstwo takes Durbin's matrix or Pomeranz's recursion for these
//     cases, route stored in the file): 1e-8 relative (rounding);
//   - where ours is exact and SciPy uses Pelz and Good's asymptotic series
//     (n > 140): 1e-4 relative (the series' accuracy; observed 1e-5);
//   - where ours is Stephens' approximation: 3% relative;
//   - A^2: 1e-10 relative (the same sum in another order);
//   - AD p-value: within 4 Monte Carlo standard errors of SciPy's Monte
//     Carlo p-value (goodness_of_fit, 10^5 or 2 10^4 null samples) plus
//     1e-4 for the approximation of Marsaglia and Marsaglia.
func TestUniformityAgainstSciPy(t *testing.T) {
	raw, err := os.ReadFile("../testdata/infer/reference-onesample-scipy.json")
	if err != nil {
		t.Fatal(err)
	}
	var ref struct {
		Scipy string
		Cases []struct {
			Name     string
			X        []string
			KSD      float64 `json:"ks_d"`
			KSPExact float64 `json:"ks_p_exact"`
			KSRoute  string  `json:"ks_scipy_route"`
			ADA2     float64 `json:"ad_a2"`
			ADP      float64 `json:"ad_p_mc"`
			ADSE     float64 `json:"ad_p_mc_se"`
		}
	}
	if err := json.Unmarshal(raw, &ref); err != nil {
		t.Fatal(err)
	}
	if len(ref.Cases) < 6 {
		t.Fatalf("%d cases", len(ref.Cases))
	}
	exactSeen, asympSeen := false, false
	for _, c := range ref.Cases {
		x := make([]float64, len(c.X))
		for i, s := range c.X {
			if x[i], err = strconv.ParseFloat(s, 64); err != nil {
				t.Fatal(err)
			}
		}
		res, err := UniformityTest(x)
		if err != nil {
			t.Fatal(err)
		}
		if math.Abs(res.KS-c.KSD) > 1e-12 {
			t.Errorf("%s: D = %.15g, SciPy %.15g", c.Name, res.KS, c.KSD)
		}
		tol := 0.03
		switch {
		case !res.KSExact:
			asympSeen = true
		case c.KSRoute == "durbin" || c.KSRoute == "pomeranz":
			exactSeen = true
			tol = 1e-8
		case c.KSRoute == "pelz-good":
			tol = 1e-4
		}
		if coreRel(res.KSP, c.KSPExact) > tol {
			t.Errorf("%s: KS p = %.12g (exact %v), SciPy exact %.12g", c.Name, res.KSP, res.KSExact, c.KSPExact)
		}
		if coreRel(res.AD, c.ADA2) > 1e-10 {
			t.Errorf("%s: A2 = %.15g, SciPy %.15g", c.Name, res.AD, c.ADA2)
		}
		if d := math.Abs(res.ADP - c.ADP); d > 4*c.ADSE+1e-4 {
			t.Errorf("%s: AD p = %.6g, SciPy Monte Carlo %.6g +- %.2g", c.Name, res.ADP, c.ADP, c.ADSE)
		}
		t.Logf("%s: KS p %.4g (SciPy %.4g, exact %v), AD p %.4g (SciPy MC %.4g)", c.Name, res.KSP, c.KSPExact, res.KSExact, res.ADP, c.ADP)
	}
	if !exactSeen || !asympSeen {
		t.Error("the reference cases do not cover both KS routes")
	}
}

func coreRel(a, b float64) float64 { return math.Abs(a-b) / math.Abs(b) }

// TestKSUniformSmall: analytic and simulated checks of the exact KS
// p-value. For n = 1, D = max(u, 1 - u), so P(D >= d) = 2(1 - d) for
// d >= 1/2. For n = 5 and n = 30, the p-value at the simulated quantiles of
// D (2 10^5 samples) matches the simulated tail within 4 binomial standard
// errors.
func TestKSUniformSmall(t *testing.T) {
	for _, d := range []float64{0.5, 0.6, 0.75, 0.9, 0.99} {
		if p, exact := KSUniformPValue(d, 1); !exact || math.Abs(p-2*(1-d)) > 1e-12 {
			t.Errorf("n=1 d=%g: p %v (exact %v), want %v", d, p, exact, 2*(1-d))
		}
	}
	for _, n := range []int{5, 30} {
		simulatedTails(t, n, 3, ksUniformDistance, func(d float64) float64 {
			p, exact := KSUniformPValue(d, n)
			if !exact {
				t.Errorf("n=%d d=%g: not exact", n, d)
			}
			return p
		}, 0)
	}
	if p, _ := KSUniformPValue(0, 10); p != 1 {
		t.Errorf("d = 0: %v", p)
	}
	if p, _ := KSUniformPValue(1, 10); p != 0 {
		t.Errorf("d = 1: %v", p)
	}
}

// TestADUniformPoints: the limit law against the asymptotic upper
// percentage points of A^2 for a fully specified null, 1.933 (10%) and
// 2.492 (5%) (Anderson and Darling, J. Am. Stat. Assoc. 49, 765 (1954);
// values from memory), within 5e-5 in p (the points' three decimals move
// p by up to 4e-5); and finite n = 5 against simulation: at the simulated
// 50%, 90% and 99% quantiles of A^2_5, the p-value matches the tail within
// 4 binomial standard errors plus 5e-4 (the stated accuracy of the
// approximation is the fifth decimal, rarely the fourth). The far tail:
// continuous at both switches, within 6% of the short formula on [5, 7]
// where both hold, positive and decreasing far out.
func TestADUniformPoints(t *testing.T) {
	for _, c := range []struct{ z, p float64 }{{1.933, 0.10}, {2.492, 0.05}} {
		_, tail := adInf(c.z)
		if math.Abs(tail-c.p) > 5e-5 {
			t.Errorf("limit law at %g: %.6f, table %g", c.z, tail, c.p)
		}
	}
	for z := 5.0; z < adTailFrom; z += 0.25 {
		_, short := adInfShort(z)
		if a := adTailAsymptotic(z); math.Abs(short/a-1) > 0.06 {
			t.Errorf("z=%g: short formula %g, sqrt(3) erfc(sqrt z) %g", z, short, a)
		}
	}
	if _, a := adInf(adTailFrom - 1e-9); coreRel(a, func() float64 { _, b := adInf(adTailFrom); return b }()) > 1e-6 {
		t.Error("limit tail not continuous at z = 7")
	}
	prev := 1.0
	for _, z := range []float64{8, 10, 20, 40, 80} {
		p := ADUniformPValue(z, 1000)
		if !(p > 0 && p < prev) {
			t.Errorf("far tail at %g: p = %v after %v", z, p, prev)
		}
		prev = p
	}
	simulatedTails(t, 5, 5, adUniformStatistic, func(z float64) float64 { return ADUniformPValue(z, 5) }, 5e-4)
	// Continuity at the switch to the far tail (G = 0.99, z ~ 3.88).
	lo, hi := 3.0, 5.0
	for i := 0; i < 60; i++ {
		mid := (lo + hi) / 2
		if g, _ := adInf(mid); g > 0.99 {
			hi = mid
		} else {
			lo = mid
		}
	}
	for _, n := range []int{5, 100} {
		if pl, ph := ADUniformPValue(lo, n), ADUniformPValue(hi, n); math.Abs(pl-ph) > 1e-9 {
			t.Errorf("n=%d: p jumps from %v to %v at the far-tail switch", n, pl, ph)
		}
	}
}

// TestUniformityBadInput: too few values, values outside [0, 1] or NaN.
func TestUniformityBadInput(t *testing.T) {
	for _, u := range [][]float64{nil, {0.5}, {0.2, 1.5}, {0.2, math.NaN()}, {-0.1, 0.3}} {
		if _, err := UniformityTest(u); err == nil {
			t.Errorf("%v accepted", u)
		}
	}
	// Exact 0 and 1 are clamped, not infinite.
	res, err := UniformityTest([]float64{0, 0.3, 0.6, 1})
	if err != nil || math.IsInf(res.AD, 0) || math.IsNaN(res.ADP) {
		t.Errorf("clamped values: %+v %v", res, err)
	}
}

// simulatedTails draws 2 10^5 sorted uniform samples of size n, computes
// stat of each, and checks that pval at the simulated 50%, 90% and 99%
// quantiles of the statistic matches the simulated tail within 4 binomial
// standard errors plus slack (plus one sample's weight).
func simulatedTails(t *testing.T, n int, seed uint64, stat func([]float64) float64, pval func(float64) float64, slack float64) {
	t.Helper()
	rng := rand.New(rand.NewPCG(seed, seed+1))
	const reps = 200000
	a := make([]float64, reps)
	u := make([]float64, n)
	for r := range a {
		for i := range u {
			u[i] = rng.Float64()
		}
		slices.Sort(u)
		a[r] = stat(u)
	}
	slices.Sort(a)
	for _, q := range []float64{0.5, 0.9, 0.99} {
		z := a[int(q*reps)]
		tail := 1 - q
		p := pval(z)
		se := math.Sqrt(tail * (1 - tail) / reps)
		if math.Abs(p-tail) > 4*se+slack+1.0/reps {
			t.Errorf("n=%d: p(%g) = %.5f, simulated %.5f +- %.5f", n, z, p, tail, se)
		}
	}
}
