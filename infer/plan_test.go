package infer

import (
	"math"
	"strconv"
	"strings"
	"testing"

	"edgewise/likelihood"
	"edgewise/models"

	"gonum.org/v1/gonum/integrate/quad"
	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/stat/distuv"
)

// planSpec parses an inline spec.
func planSpec(tb testing.TB, src string) *models.Model {
	tb.Helper()
	m, err := models.Parse(strings.NewReader(src), "inline.toml")
	if err != nil {
		tb.Fatal(err)
	}
	return m
}

// twoStateSpec is a two-state network A <-> B, + on A->B and - on B->A:
// the labels alternate and each gap is exponential, with rate kab after a
// - event and kba after a + event. With tied, both rates are one
// parameter kab; with fixedBA, kba is fixed at its value.
func twoStateSpec(kab, kba float64, tied, fixedBA bool) string {
	r2, name := "kba", "twofree"
	switch {
	case tied:
		r2, name = "kab", "twotied"
	case fixedBA:
		name = "twofixed"
	}
	s := `name = "` + name + `"
states = ["A", "B"]
[[edge]]
between = ["A", "B"]
rates = ["kab", "` + r2 + `"]
labels = ["+", "-"]
[param.kab]
value = ` + ftoa(kab) + "\n"
	if !tied {
		s += "[param.kba]\nvalue = " + ftoa(kba) + "\n"
		if fixedBA {
			s += "fixed = true\n"
		}
	}
	return s
}

func ftoa(x float64) string { return strconv.FormatFloat(x, 'f', -1, 64) }

// ring4Renamed is testdata/ring4.toml with other state names, the edges
// in another order and the ring written the other way round: another
// parametrisation of the same visible process.
const ring4Renamed = `
name = "ring4renamed"
states = ["W", "X", "Y", "Z"]
[[edge]]
between = ["W", "Z"]
rates = ["a", "b"]
[[edge]]
between = ["Z", "Y"]
rates = ["c", "d"]
[[edge]]
between = ["Y", "X"]
rates = ["e", "f"]
[[edge]]
between = ["X", "W"]
rates = ["g", "h"]
labels = ["-", "+"]
[param.a]
value = 1.1
[param.b]
value = 1.2
[param.c]
value = 0.9
[param.d]
value = 1.0
[param.e]
value = 1.2
[param.f]
value = 1.5
[param.g]
value = 1.0
[param.h]
value = 2.0
`

// twoStateKL is the KL rate per gap of the two-state process with rates
// (a, b) against the class with kba fixed at c: the gaps alternate
// between Exp(a) and Exp(b), the best member has kab = a, and
// KL = [ln(b/c) + c/b - 1]/2, the mean of the exponential divergences
// KL(Exp(l)||Exp(k)) = ln(l/k) + k/l - 1 (common practice, no source).
func twoStateKL(b, c float64) float64 { return (math.Log(b/c) + c/b - 1) / 2 }

// TestPlanTwoStateKL: the plan's KL rate of two-state alternating records
// agrees with twoStateKL within 3 Monte Carlo SE, the fitted kab with a
// within 3 of its SEs, and the decision is the likelihood ratio on 1
// degree of freedom.
func TestPlanTwoStateKL(t *testing.T) {
	a, b, c := 3.0, 0.5, 1.5
	mA := planSpec(t, twoStateSpec(a, b, false, false))
	mB := planSpec(t, twoStateSpec(1, c, false, true))
	res, err := Plan(mA, mB, PlanOptions{Seed: 3, KLEvents: 40000, KLBlock: 2000, FitStarts: 2})
	if err != nil {
		t.Fatal(err)
	}
	want := twoStateKL(b, c)
	if math.Abs(res.KL-want) > 3*res.KLSE || !(res.KLSE > 0 && res.KLSE < 0.02*want) {
		t.Errorf("KL %.5g ± %.2g, want %.5g", res.KL, res.KLSE, want)
	}
	k := res.BFit.Params[0]
	if math.Abs(k.Value-a) > 3*k.SE {
		t.Errorf("fitted kab %.5g ± %.2g, want %v", k.Value, k.SE, a)
	}
	if !res.Resolved || math.Abs(res.EventsFor10-(10/res.KL+1)) > 1e-9*res.EventsFor10 {
		t.Errorf("events for ln LR 10: %v (resolved %v)", res.EventsFor10, res.Resolved)
	}
	// chi-square(1) 95% quantile 3.841458820694124 (common practice).
	if res.Decision != DecideLR || res.DF != 1 || math.Abs(res.Critical-3.841458820694124) > 1e-9 {
		t.Errorf("decision %v df %d critical %v, want LR on 1 df at 3.8415", res.Decision, res.DF, res.Critical)
	}
	if len(res.Notes) == 0 || !strings.Contains(res.Notes[0], "taken as they are") {
		t.Errorf("no note that A's free rates are taken as they are: %q", res.Notes)
	}
}

// TestPlanSameProcess: B another parametrisation of A's visible process
// (renamed states, edges in another order, the ring written backwards):
// the KL rate is 0 within 3 Monte Carlo SE and is reported unresolved.
func TestPlanSameProcess(t *testing.T) {
	mA := readSpec(t, "../testdata/ring4.toml")
	mB := planSpec(t, ring4Renamed)
	res, err := Plan(mA, mB, PlanOptions{Seed: 5, KLEvents: 40000, FitStarts: 2})
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(res.KL) > 3*res.KLSE || res.Resolved {
		t.Errorf("KL %.3g ± %.2g (resolved %v), want 0 within 3 SE", res.KL, res.KLSE, res.Resolved)
	}
	if !math.IsInf(res.EventsForPower, 1) {
		t.Errorf("events for power %v, want +Inf", res.EventsForPower)
	}
}

// planExactKL returns the exact KL rate per gap between the visible
// processes of two networks whose labels each sit on one directed edge
// with perfect detection (Markov renewal processes: the state after an
// event is the head of its edge),
//
//	KL = sum_l r_l sum_l' int psiA_{l->l'}(t) ln[psiA_{l->l'}(t) / psiB_{l->l'}(t)] dt,
//
// psi_{l->l'}(t) = [exp(D0 t)]_{to(l), from(l')} w_{l'}, built with
// gonum's mat.Exp and integrated by Gauss-Legendre quadrature on u = ln t
// (quad.Fixed), r the stationary law of the embedded chain P(l'|l)
// obtained from the same quadrature (common practice, no source: the KL
// rate of a Markov renewal process is the stationary mean of the
// per-step divergence). Labels are matched by name.
func planExactKL(tb testing.TB, netA, netB *models.Network) float64 {
	tb.Helper()
	kA, err := likelihood.NewKernels(netA)
	if err != nil {
		tb.Fatal(err)
	}
	kB, err := likelihood.NewKernels(netB)
	if err != nil {
		tb.Fatal(err)
	}
	nl := len(kA.Labels)
	bi := make([]int, nl)
	for l, name := range kA.Labels {
		bi[l] = netB.LabelIndex(name)
	}
	fastest := 0.0
	for _, k := range []*likelihood.Kernels{kA, kB} {
		for i := 0; i < k.N; i++ {
			fastest = math.Max(fastest, -k.D0.At(i, i))
		}
	}
	psi := func(k *likelihood.Kernels, l, l2 int, t float64) float64 {
		var m, e mat.Dense
		m.Scale(t, k.D0)
		e.Exp(&m)
		a, b := k.Edges[l][0], k.Edges[l2][0]
		return e.At(a.To, b.From) * b.Rate
	}
	lo, hi := math.Log(1e-9/fastest), math.Log(1e5/fastest)
	P := mat.NewDense(nl, nl, nil)
	kl := make([]float64, nl)
	for l := range nl {
		for l2 := range nl {
			P.Set(l, l2, quad.Fixed(func(u float64) float64 { return psi(kA, l, l2, math.Exp(u)) * math.Exp(u) }, lo, hi, 3000, nil, 0))
			kl[l] += quad.Fixed(func(u float64) float64 {
				t := math.Exp(u)
				pa := psi(kA, l, l2, t)
				if pa*t < 1e-200 {
					return 0 // the far tail: no mass left
				}
				pb := psi(kB, bi[l], bi[l2], t)
				if pb == 0 && pa*t < 1e-100 {
					return 0 // B's density underflowed first: negligible tail
				}
				return pa * t * math.Log(pa/pb)
			}, lo, hi, 3000, nil, 0)
		}
	}
	// Stationary law of P: power iteration from the uniform law.
	r := mat.NewVecDense(nl, nil)
	for l := range nl {
		r.SetVec(l, 1/float64(nl))
	}
	for range 10000 {
		r.MulVec(P.T(), r)
	}
	out := 0.0
	for l := range nl {
		out += r.AtVec(l) / mat.Sum(r) * kl[l]
	}
	return out
}

// TestPlanExactKLTwoState checks the quadrature oracle itself against a
// two-state closed form: against the tied class (one rate k for both
// directions) the divergence of twoStateKL summed over both gaps is
// minimised at the harmonic mean k = 2ab/(a+b), where it equals
// ln[(a+b)/(2 sqrt(ab))] (common practice, no source).
func TestPlanExactKLTwoState(t *testing.T) {
	a, b := 3.0, 0.5
	hm := 2 * a * b / (a + b)
	netA, _ := planSpec(t, twoStateSpec(a, b, false, false)).Network([]float64{a, b})
	netB, _ := planSpec(t, twoStateSpec(1, 1, true, false)).Network([]float64{hm})
	got, want := planExactKL(t, netA, netB), math.Log((a+b)/(2*math.Sqrt(a*b)))
	if math.Abs(got-want) > 1e-9 {
		t.Errorf("quadrature KL %.12g, closed form %.12g", got, want)
	}
}

// TestPlanRingKL: ring4 against the equilibrium ring (its affinity held
// at 0): the plan's KL rate is positive and agrees within 3 Monte Carlo
// SE with the exact KL rate (planExactKL) between A and the fitted member
// of B's class; and the mean of ln L_A - ln L_B (B at that member) over
// independent simulated records of n events agrees with (n - 1) KL
// within 3 standard errors of both.
func TestPlanRingKL(t *testing.T) {
	mA := readSpec(t, "../testdata/ring4.toml")
	mB := readSpec(t, "../testdata/plan/ring4-eq.toml") // ring4 with its affinity held at 0
	res, err := Plan(mA, mB, PlanOptions{Seed: 7, KLEvents: 60000, FitStarts: 2})
	if err != nil {
		t.Fatal(err)
	}
	if !(res.KL > 5*res.KLSE) {
		t.Fatalf("KL %.4g ± %.2g: want clearly positive", res.KL, res.KLSE)
	}
	netA, _ := mA.Network(mA.Start())
	netB, err := res.BFit.Model.Network(res.BFit.X)
	if err != nil {
		t.Fatal(err)
	}
	exact := planExactKL(t, netA, netB)
	if math.Abs(res.KL-exact) > 3*res.KLSE {
		t.Errorf("KL %.5g ± %.2g, exact at the fitted B %.5g", res.KL, res.KLSE, exact)
	}
	// Independent records of n events, B at its fitted member.
	const n, R = 400, 300
	evA, _ := likelihood.NewNetworkEvaluator(netA, likelihood.Options{Workers: 1})
	evB, _ := likelihood.NewNetworkEvaluator(netB, likelihood.Options{Workers: 1})
	var m moments
	for i := range R {
		rec, err := simulateRecord(netA, likelihood.Instrument{}, uint64(1000+i), n)
		if err != nil {
			t.Fatal(err)
		}
		d := &likelihood.Data{Labels: []string{"+", "-"}, Records: []likelihood.Record{rec}}
		la, err1 := evA.LogLik(d)
		lb, err2 := evB.LogLik(d)
		if err1 != nil || err2 != nil {
			t.Fatal(err1, err2)
		}
		m.add(la - lb)
	}
	mean, v := m.meanVar()
	se := math.Hypot(math.Sqrt(v/R), (n-1)*res.KLSE)
	if want := (n - 1) * res.KL; math.Abs(mean-want) > 3*se {
		t.Errorf("mean ln L_A - ln L_B over %d records of %d events: %.4g, (n-1) KL = %.4g, SE %.2g", R, n, mean, want, se)
	}
	// Its variance is (n - 1) sigma^2 up to Monte Carlo error (the
	// variance of a sample variance of R values is about 2 s^4/(R-1) for
	// nearly normal values).
	if want := (n - 1) * res.Sigma2; math.Abs(v-want) > 3*v*math.Sqrt(2.0/(R-1))+0.1*want {
		t.Errorf("variance of the ln LR over records %.4g, (n-1) sigma^2 = %.4g", v, want)
	}
}

// TestNoncentralChiSquare checks the Poisson mixture against two other
// routes: for df = 1 the closed form P((Z + sqrt(lambda))^2 > x) =
// Phi(-sqrt x - sqrt lambda) + Phi(-sqrt x + sqrt lambda) (common
// practice, no source), and for df = 4 the convolution of that law with
// a central chi-square on 3 degrees of freedom by quadrature.
func TestNoncentralChiSquare(t *testing.T) {
	phi := distuv.UnitNormal.CDF
	sf1 := func(x, lam float64) float64 {
		if x <= 0 {
			return 1
		}
		return phi(-math.Sqrt(x)-math.Sqrt(lam)) + phi(-math.Sqrt(x)+math.Sqrt(lam))
	}
	for _, lam := range []float64{0, 0.3, 4, 25, 400} {
		for _, x := range []float64{0.1, 1, 3.84, 10, 30, 500} {
			if got, want := NoncentralChiSquareSF(x, 1, lam), sf1(x, lam); math.Abs(got-want) > 1e-12 {
				t.Errorf("df 1, lambda %v, x %v: %.15g, closed form %.15g", lam, x, got, want)
			}
			// P(X1 + Y > x) = P(Y > x) + int_0^x f3(y) SF1(x - y) dy,
			// with y = x sin^2(theta) to smooth both end points.
			chi3 := distuv.ChiSquared{K: 3}
			want := chi3.Survival(x) + quad.Fixed(func(th float64) float64 {
				s, c := math.Sincos(th)
				y := x * s * s
				return chi3.Prob(y) * sf1(x*c*c, lam) * 2 * x * s * c
			}, 0, math.Pi/2, 2000, nil, 0)
			if got := NoncentralChiSquareSF(x, 4, lam); math.Abs(got-want) > 1e-9*want+1e-300 {
				t.Errorf("df 4, lambda %v, x %v: %.12g, convolution %.12g", lam, x, got, want)
			}
		}
	}
}

// TestPlanPower: two-state records against the class with kba fixed at
// c (nested, likelihood ratio on 1 df). The simulated power rises with
// the number of events, agrees within 3 binomial SE with the target at
// the predicted event count, and the mean fitted ln LR agrees with
// (n - 1) KL + df/2 (Wilks: the extra parameter adds chi-square(1)/2 on
// average; Wilks, Ann. Math. Stat. 9, 60 (1938)) within 3 SE.
func TestPlanPower(t *testing.T) {
	b, c := 1.0, 1.3
	mA := planSpec(t, twoStateSpec(1.5, b, false, false))
	mB := planSpec(t, twoStateSpec(1, c, false, true))
	o := PlanOptions{Seed: 11, KLEvents: 40000, KLBlock: 2000, FitStarts: 2, Starts: 2, Replicates: 300}
	pre, err := Plan(mA, mB, o)
	if err != nil {
		t.Fatal(err)
	}
	if want := twoStateKL(b, c); math.Abs(pre.KL-want) > 3*pre.KLSE {
		t.Fatalf("KL %.4g ± %.2g, want %.4g", pre.KL, pre.KLSE, want)
	}
	nPow := int(pre.EventsForPower)
	o.Events = []int{nPow / 4, nPow, 3 * nPow}
	res, err := Plan(mA, mB, o)
	if err != nil {
		t.Fatal(err)
	}
	if res.EventsForPower != pre.EventsForPower {
		t.Errorf("a power study changed the prediction: %v, %v", res.EventsForPower, pre.EventsForPower)
	}
	se := func(r PowerRow) float64 {
		return math.Sqrt(math.Max(r.Power*(1-r.Power), 0.01) / float64(r.Replicates))
	}
	for i, r := range res.Rows {
		t.Logf("n %d: power %.3f [%.3f, %.3f], predicted %.3f; ln LR %.3g ± %.2g, expected %.3g", r.Events, r.Power, r.PowerLo, r.PowerHi, r.Predicted, r.MeanLogLR, r.SELogLR, r.ExpectedLogLR)
		if r.Replicates+r.Failed != o.Replicates || r.Failed > 0 {
			t.Errorf("n %d: %d replicates, %d failed", r.Events, r.Replicates, r.Failed)
		}
		if i > 0 && r.Power < res.Rows[i-1].Power-2*math.Hypot(se(r), se(res.Rows[i-1])) {
			t.Errorf("power falls from %.3f to %.3f", res.Rows[i-1].Power, r.Power)
		}
		if want := r.ExpectedLogLR + float64(res.DF)/2; math.Abs(r.MeanLogLR-want) > 3*math.Hypot(r.SELogLR, float64(r.Events-1)*res.KLSE) {
			t.Errorf("n %d: mean ln LR %.4g ± %.2g, (n-1) KL + df/2 = %.4g", r.Events, r.MeanLogLR, r.SELogLR, want)
		}
		if !(r.PowerLo <= r.Power && r.Power <= r.PowerHi) {
			t.Errorf("interval [%v, %v] misses %v", r.PowerLo, r.PowerHi, r.Power)
		}
	}
	if r := res.Rows[1]; math.Abs(r.Power-0.8) > 3*se(r) {
		t.Errorf("at the predicted %d events the simulated power is %.3f, target 0.8", r.Events, r.Power)
	}
	if math.Abs(res.Rows[1].Predicted-0.8) > 0.01 {
		t.Errorf("predicted power %.4f at the predicted event count", res.Rows[1].Predicted)
	}
	if !(res.Rows[2].Power > res.Rows[0].Power+0.3) {
		t.Errorf("power does not rise: %.3f to %.3f", res.Rows[0].Power, res.Rows[2].Power)
	}
}

// TestPlanSize: when A lies in B's class (kba = c), the likelihood-ratio
// decision rejects B at the test's size alpha, within 3 binomial SE.
func TestPlanSize(t *testing.T) {
	c := 1.3
	mA := planSpec(t, twoStateSpec(1.5, c, false, false))
	mB := planSpec(t, twoStateSpec(1, c, false, true))
	const R = 600
	res, err := Plan(mA, mB, PlanOptions{Seed: 13, KLEvents: 20000, KLBlock: 2000, FitStarts: 2, Starts: 2, Replicates: R, Events: []int{300}, Alpha: 0.05})
	if err != nil {
		t.Fatal(err)
	}
	r := res.Rows[0]
	if res.Decision != DecideLR || math.Abs(r.Power-0.05) > 3*math.Sqrt(0.05*0.95/R) {
		t.Errorf("%v: rejection rate %.3f over %d replicates, want the size 0.05", res.Decision, r.Power, r.Replicates)
	}
	if res.Resolved || math.Abs(res.KL) > 3*res.KLSE {
		t.Errorf("KL %.3g ± %.2g (resolved %v), want 0", res.KL, res.KLSE, res.Resolved)
	}
}

// TestPlanWorkers: the result does not depend on the number of workers.
func TestPlanWorkers(t *testing.T) {
	mA := planSpec(t, twoStateSpec(1.5, 1, false, false))
	mB := planSpec(t, twoStateSpec(1, 1.3, false, true))
	var rows [][]PowerRow
	var kl []float64
	for _, w := range []int{1, 3} {
		res, err := Plan(mA, mB, PlanOptions{Seed: 17, KLEvents: 8000, KLBlock: 1000, FitStarts: 2, Starts: 2, Replicates: 20, Events: []int{50, 200}, Workers: w})
		if err != nil {
			t.Fatal(err)
		}
		rows = append(rows, res.Rows)
		kl = append(kl, res.KL, res.KLSE)
	}
	if kl[0] != kl[2] || kl[1] != kl[3] {
		t.Errorf("KL differs: %v", kl)
	}
	for i := range rows[0] {
		a, b := rows[0][i], rows[1][i]
		if a.Rejections != b.Rejections || a.MeanLogLR != b.MeanLogLR || a.SELogLR != b.SELogLR {
			t.Errorf("row %d differs: %+v, %+v", i, a, b)
		}
	}
}

// TestPlanFPrecision: the delta-method variance of F (design.md section
// 7), V_F/(n - 1) with A's exact r and P(l'|l), agrees with the variance
// of F over simulated records of the events the planner asks for a
// standard error of 0.1, within 3 SE of a sample variance (relative SE
// sqrt(2/(R-1)) for nearly normal values), and with the mean of the
// per-record delta formula 1/N++ - 1/N+. + 1/N-- - 1/N-. within 5%.
func TestPlanFPrecision(t *testing.T) {
	for _, path := range []string{"../testdata/ring4.toml", "../testdata/compare/truth-twocycle.toml"} {
		m := readSpec(t, path)
		net, _ := m.Network(m.Start())
		k, _ := likelihood.NewKernels(net)
		p, err := likelihood.NewPredictor(k, likelihood.Instrument{})
		if err != nil {
			t.Fatal(err)
		}
		vf := affinityVariance(p, 0, 1)
		const target, R = 0.1, 400
		n := int(math.Round(vf/(target*target) + 1))
		var fs, delta moments
		for i := range R {
			rec, err := simulateRecord(net, likelihood.Instrument{}, uint64(500+i), n)
			if err != nil {
				t.Fatal(err)
			}
			d := &likelihood.Data{Labels: []string{"+", "-"}, Records: []likelihood.Record{rec}}
			fs.add(pairAffinity(d, 0, 1))
			c := TransitionCounts(d)
			pp, mm := float64(c[0][0]), float64(c[1][1])
			delta.add(1/pp - 1/(pp+float64(c[0][1])) + 1/mm - 1/(mm+float64(c[1][0])))
		}
		_, v := fs.meanVar()
		md, _ := delta.meanVar()
		t.Logf("%s: n %d, variance of F %.4g, planned %.4g, mean delta formula %.4g", path, n, v, target*target, md)
		if math.Abs(v/(target*target)-1) > 3*math.Sqrt(2.0/(R-1)) {
			t.Errorf("%s: variance of F over %d records of %d events %.4g, planned %.4g", path, R, n, v, target*target)
		}
		if math.Abs(md/(target*target)-1) > 0.05 {
			t.Errorf("%s: mean delta-method variance %.4g, planned %.4g", path, md, target*target)
		}
	}
}

// chainSpec is a three-state chain whose visible edge S1-S2 is its only
// way between its ends: its labels strictly alternate.
const chainSpec = `
name = "chain3"
states = ["S1", "S2", "S3"]
[[edge]]
between = ["S1", "S2"]
rates = ["k12", "k21"]
labels = ["+", "-"]
[[edge]]
between = ["S2", "S3"]
rates = ["k23", "k32"]
[param.k12]
value = 1.0
[param.k21]
value = 1.0
[param.k23]
value = 1.0
[param.k32]
value = 1.0
`

// TestPlanImpossible: a chain cannot produce ++ or --, which ring4 does:
// KL is infinite and the predicted power at n events is the probability
// that a record of n events holds such a pair, checked against the share
// of simulated records that do (within 3 binomial SE).
func TestPlanImpossible(t *testing.T) {
	mA := readSpec(t, "../testdata/ring4.toml")
	mB := planSpec(t, chainSpec)
	res, err := Plan(mA, mB, PlanOptions{Seed: 19, KLEvents: 8000, KLBlock: 1000, FitStarts: 2, Starts: 2, Replicates: 10, Events: []int{5}})
	if err != nil {
		t.Fatal(err)
	}
	if res.Impossible == nil || !math.IsInf(res.KL, 1) || res.Rows[0].Impossible == 0 {
		t.Fatalf("impossible %v, KL %v, rows %+v", res.Impossible, res.KL, res.Rows)
	}
	net, _ := mA.Network(mA.Start())
	const n, R = 6, 4000
	hit := 0
	for i := range R {
		rec, _ := simulateRecord(net, likelihood.Instrument{}, uint64(9000+i), n)
		for k := 1; k < n; k++ {
			if rec.Label[k] == rec.Label[k-1] {
				hit++
				break
			}
		}
	}
	k, _ := likelihood.NewKernels(net)
	p, _ := likelihood.NewPredictor(k, likelihood.Instrument{})
	netB, _ := mB.Network(mB.Start())
	want := predictedPower(res, n, p, netB, []string{"+", "-"}, likelihood.Instrument{})
	got := float64(hit) / R
	if math.Abs(got-want) > 3*math.Sqrt(want*(1-want)/R) {
		t.Errorf("records of %d events with ++ or --: %.4f simulated, %.4f predicted", n, got, want)
	}
}

// TestPlanBadInput: different labels, a power target or size out of
// (0, 1), and a likelihood-ratio decision between non-nested schemes are
// refused with a message that names the problem.
func TestPlanBadInput(t *testing.T) {
	ring := readSpec(t, "../testdata/ring4.toml")
	other := planSpec(t, strings.ReplaceAll(chainSpec, `["+", "-"]`, `["f", "b"]`))
	cases := []struct {
		b    *models.Model
		o    PlanOptions
		want string
	}{
		{other, PlanOptions{}, "same labels"},
		{ring, PlanOptions{Power: 1.2}, "target power"},
		{ring, PlanOptions{Power: -0.5}, "target power"},
		{ring, PlanOptions{Alpha: 1}, "alpha"},
		{ring, PlanOptions{SE: -1}, "standard error"},
		{ring, PlanOptions{Events: []int{2}}, "at least 3 events"},
		{planSpec(t, chainSpec), PlanOptions{Decision: DecideLR, KLEvents: 4000, KLBlock: 1000, FitStarts: 1}, "not nested"},
	}
	for _, c := range cases {
		_, err := Plan(ring, c.b, c.o)
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%+v: error %v, want it to say %q", c.o, err, c.want)
		}
	}
}
