package infer

import (
	"flag"
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"strings"
	"testing"

	"edgewise/likelihood"
)

// lsSlope is the unweighted least-squares slope through the origin of the
// exact ln[P(c)/P(-c)] (the estimand predict used before): a different
// estimand from the data's binomial slope wherever the log-ratio is not
// linear in c.
func lsSlope(d likelihood.CountDist) float64 {
	c, lr := d.LogRatio(1e-12)
	var num, den float64
	for i := range c {
		num += float64(c[i]) * lr[i]
		den += float64(c[i] * c[i])
	}
	return num / den
}

// TestSlopeEstimandAgreement: on data simulated from three shipped models
// (ring4: F = 1.1; twocycle-stall: near stalling, with a driven cycle off
// the visible edge; balanced: detailed balance), for windows of n = 5,
// 20 and 100 events and every kind of window (all, post-selected, fixed
// time), the data's binomial slope and the model's value of the same
// estimand (CountDist.SlopeEstimand of the exact law) agree: both
// |slope - model| / SE (SE from the model's per-window sandwich variance;
// when the data have a slope) and the score test's z are below 4. The least-squares slope of the
// exact log-ratio, the old estimand, misses by more than 4 SE somewhere,
// so the test can tell the two apart.
func TestSlopeEstimandAgreement(t *testing.T) {
	models := []struct{ path, fw, bw string }{
		{"../testdata/ring4.toml", "+", "-"},
		{"../testdata/twocycle-stall.toml", "+", "-"},
		{"../testdata/balanced.toml", "out", "in"},
	}
	worstLS := 0.0
	var z2 float64
	var nz int
	for mi, m := range models {
		net := recModel(t, m.path)
		k, err := likelihood.NewKernels(net)
		if err != nil {
			t.Fatal(err)
		}
		pr, err := likelihood.NewPredictor(k, likelihood.Instrument{})
		if err != nil {
			t.Fatal(err)
		}
		plus, minus := net.LabelIndex(m.fw), net.LabelIndex(m.bw)
		q := make([]int, 2)
		q[plus], q[minus] = 1, -1
		d := recSimulate(t, net, uint64(40+mi), 4, 50000)
		res, err := FluctuationTest(d, []int{5, 20, 100}, FluctOptions{Labels: EdgeLabels{Forward: m.fw, Backward: m.bw}, FixedTime: true, Boot: 1})
		if err != nil {
			t.Fatal(err)
		}
		for _, f := range res {
			for _, s := range []Symmetry{f.Raw, f.PostSelected, *f.FixedTime} {
				var law likelihood.CountDist
				if s.Kind == "fixed-time" {
					law, err = pr.FixedTime(s.Duration, q)
				} else {
					law, err = pr.CountStopped(f.N, q, s.Kind == "post-selected")
				}
				if err != nil {
					t.Fatal(err)
				}
				est := law.SlopeEstimand()
				se := math.Sqrt(est.SlopeVar / float64(s.Windows))
				zw := (s.Slope.Value - est.Slope) / se
				zs := SlopeTest(s, law).Z
				zls := (s.Slope.Value - lsSlope(law)) / se
				if !math.IsNaN(zls) {
					worstLS = math.Max(worstLS, math.Abs(zls))
				}
				t.Logf("%s n = %3d %-14s windows %6d: data %.5f, model %.5f (SE %.5f): z %+.2f, score z %+.2f; least squares %.5f (z %+.1f)",
					m.path[12:], f.N, s.Kind, s.Windows, s.Slope.Value, est.Slope, se, zw, zs, lsSlope(law), zls)
				// The data's slope is undefined when every window has the
				// same sign of c; the score test still applies.
				if !(math.Abs(zs) < 4) || (!math.IsNaN(s.Slope.Value) && !(math.Abs(zw) < 4)) {
					t.Errorf("%s n = %d %s: data slope %.5f, model %.5f: z %.2f, score z %.2f", m.path, f.N, s.Kind, s.Slope.Value, est.Slope, zw, zs)
				}
				z2 += zs * zs
				nz++
			}
		}
	}
	t.Logf("mean z^2 of the score tests %.2f over %d (1 expected); largest least-squares |z| %.1f", z2/float64(nz), nz, worstLS)
	if !(worstLS > 4) {
		t.Errorf("the least-squares estimand agrees everywhere (largest |z| %.1f): the test cannot tell estimands apart", worstLS)
	}
}

// TestSlopeEstimandExact: the post-selected count-stopped law of a ring
// obeys ln[P_n(c)/P_n(-c)] = F c exactly (design section 2), so its
// binomial slope is F (to 1e-9: the root-finder's tolerance is 1e-14
// relative, the law's rounding about 1e-13); a law with exactly linear
// log-ratio built by hand gives its slope, and its score variance equals
// its information (no misspecification) to 1e-12.
func TestSlopeEstimandExact(t *testing.T) {
	u, w, A := flSmallRing()
	net := flRing(u, w)
	k, err := likelihood.NewKernels(net)
	if err != nil {
		t.Fatal(err)
	}
	pr, err := likelihood.NewPredictor(k, likelihood.Instrument{})
	if err != nil {
		t.Fatal(err)
	}
	for _, n := range []int{4, 11, 40} {
		law, err := pr.CountStopped(n, []int{1, -1}, true)
		if err != nil {
			t.Fatal(err)
		}
		if e := law.SlopeEstimand(); math.Abs(e.Slope-A) > 1e-9*math.Max(1, A) {
			t.Errorf("n = %d: post-selected slope %.12g, F %.12g", n, e.Slope, A)
		}
	}
	s := 0.7
	var law likelihood.CountDist
	for c := -6; c <= 6; c++ {
		law.C = append(law.C, c)
		law.P = append(law.P, math.Exp(-0.3*float64(c*c)+s*float64(c)/2))
	}
	e := law.SlopeEstimand()
	if math.Abs(e.Slope-s) > 1e-12 || math.Abs(e.ScoreVar-e.Info)/e.Info > 1e-12 {
		t.Errorf("linear law: %+v, want slope %g and ScoreVar = Info", e, s)
	}
}

// TestSlopeVarianceBySimulation: the model's per-window variance of the
// data's slope (SlopeEstimand.SlopeVar, sandwich form) against the spread
// of slopes over 300 simulated data sets of 10,000 events (ring4, windows
// of 5 events, all and post-selected; windows of 20, fixed time): the
// ratio of SDs is within 12% of 1 (the SD of an SD estimated from 300
// values is about 4%, so 3 of those), and the score tests' z have a
// variance within 20% of 1. For all windows of 5 events the variance
// treats windows as independent while adjacent ones are negatively
// correlated through their shared boundary, so it overstates the spread
// (measured SD ratio 0.86, Var z 0.75): there the test is conservative,
// which is checked as such.
func TestSlopeVarianceBySimulation(t *testing.T) {
	net := recModel(t, "../testdata/ring4.toml")
	k, err := likelihood.NewKernels(net)
	if err != nil {
		t.Fatal(err)
	}
	pr, err := likelihood.NewPredictor(k, likelihood.Instrument{})
	if err != nil {
		t.Fatal(err)
	}
	q := []int{1, -1}
	type acc struct {
		law        likelihood.CountDist
		est        likelihood.SlopeEstimand
		slopes, zs []float64
		windows    int
	}
	accs := map[string]*acc{}
	for r := 0; r < 300; r++ {
		d := recSimulate(t, net, uint64(7000+r), 1, 10000)
		res, err := FluctuationTest(d, []int{5, 20}, FluctOptions{FixedTime: true, Boot: 1})
		if err != nil {
			t.Fatal(err)
		}
		for _, s := range []Symmetry{res[0].Raw, res[0].PostSelected, *res[1].FixedTime} {
			a := accs[s.Kind]
			if a == nil {
				var law likelihood.CountDist
				if s.Kind == "fixed-time" {
					law, err = pr.FixedTime(20*pr.MeanGap(), q)
				} else {
					law, err = pr.CountStopped(5, q, s.Kind == "post-selected")
				}
				if err != nil {
					t.Fatal(err)
				}
				a = &acc{law: law, est: law.SlopeEstimand()}
				accs[s.Kind] = a
			}
			a.slopes = append(a.slopes, s.Slope.Value)
			a.zs = append(a.zs, SlopeTest(s, a.law).Z)
			a.windows += s.Windows
		}
	}
	for kind, a := range accs {
		_, v := meanVar(a.slopes)
		w := float64(a.windows) / float64(len(a.slopes))
		ratio := math.Sqrt(v) / math.Sqrt(a.est.SlopeVar/w)
		_, vz := meanVar(a.zs)
		t.Logf("%s: SD of slopes %.5f, model %.5f (ratio %.3f); Var z %.3f", kind, math.Sqrt(v), math.Sqrt(a.est.SlopeVar/w), ratio, vz)
		bad := math.Abs(ratio-1) > 0.12 || math.Abs(vz-1) > 0.2
		if kind == "count-stopped" {
			bad = ratio > 1.12 || vz > 1.2
		}
		if bad {
			t.Errorf("%s: SD ratio %.3f, Var z %.3f", kind, ratio, vz)
		}
	}
}

// modelPredictor loads a shipped spec and its predictor (no dead time).
func modelPredictor(t *testing.T, path string) (*likelihood.Predictor, []string) {
	t.Helper()
	net := recModel(t, path)
	k, err := likelihood.NewKernels(net)
	if err != nil {
		t.Fatal(err)
	}
	pr, err := likelihood.NewPredictor(k, likelihood.Instrument{})
	if err != nil {
		t.Fatal(err)
	}
	return pr, k.Labels
}

// TestAgainstModelSmallCounts: with few events (ring3, F = 4.3, where a
// -- pair is rare, so the plug-in F is often infinite and the data's SE of
// P(-|-) is 0) every test of AgainstModel gives a p-value in [0, 1] and a
// finite z, never +-Inf; the Holm-adjusted p is at least the raw one.
func TestAgainstModelSmallCounts(t *testing.T) {
	pr, _ := modelPredictor(t, "../testdata/ring3.toml")
	net := recModel(t, "../testdata/ring3.toml")
	infinite := 0
	for seed := uint64(1); seed <= 20; seed++ {
		d := recSimulate(t, net, seed, 1, 40)
		rows, _, err := AgainstModel(d, pr, AgainstOptions{Plus: 0, Minus: 1, Windows: []int{5}})
		if err != nil {
			t.Fatal(err)
		}
		for _, r := range rows {
			if math.IsInf(r.Data.Value, 0) {
				infinite++
			}
			if math.IsInf(r.Test.Z, 0) || (!math.IsNaN(r.Test.P) && (r.Test.P < 0 || r.Test.P > 1)) {
				t.Errorf("seed %d %s: %+v", seed, r.Quantity, r.Test)
			}
			if !math.IsNaN(r.Test.P) && !(r.Check.Adjusted >= r.Test.P) {
				t.Errorf("seed %d %s: adjusted %g < raw %g", seed, r.Quantity, r.Check.Adjusted, r.Test.P)
			}
		}
	}
	if infinite == 0 {
		t.Error("no data set with an infinite plug-in F: the case is not exercised")
	}
	// The case of the issue: 0 of 14 '-' events followed by '-' where the
	// model says P(-|-) = 0.05: no disagreement, a finite z.
	r := BinomialTest(0, 14, 0.05)
	if math.IsInf(r.Z, 0) || r.P < 0.5 {
		t.Errorf("0 of 14 at 0.05: %+v", r)
	}
}

// agreementReps sets the data sets per model of TestAgainstModelFalseAlarm
// (0: the small CI version). The README's figure comes from
//
//	go test ./infer -run TestAgainstModelFalseAlarm -v -timeout 60m -args -agreement-reps 300
var agreementReps = flag.Int("agreement-reps", 0, "data sets per model of TestAgainstModelFalseAlarm (0: the small CI version)")

// TestAgainstModelFalseAlarm: data simulated from the model itself
// (ring4, twocycle-stall, balanced; 4 records of 2,500 events) set against
// that model by AgainstModel (P(+|+), P(-|-), F, J, count-stopped slopes
// of all and post-selected windows for n = 5, 20, 100: 10 tests, Holm at
// 5%): the rate of data sets in which any check rejects must not exceed 5%
// by more than 3 binomial standard errors. Each test's own rate at 5% is
// reported.
func TestAgainstModelFalseAlarm(t *testing.T) {
	reps := *agreementReps
	if reps == 0 {
		reps = 15
	}
	total, alarms := 0, 0
	var lines []string
	for mi, path := range []string{"../testdata/ring4.toml", "../testdata/twocycle-stall.toml", "../testdata/balanced.toml"} {
		pr, _ := modelPredictor(t, path)
		net := recModel(t, path)
		var names []string
		var raw []int
		fam := 0
		for r := 0; r < reps; r++ {
			d := recSimulate(t, net, uint64(800000+1000*mi+r), 4, 2500)
			rows, _, err := AgainstModel(d, pr, AgainstOptions{Plus: 0, Minus: 1, Windows: []int{5, 20, 100}})
			if err != nil {
				t.Fatal(err)
			}
			if names == nil {
				for _, row := range rows {
					names = append(names, row.Quantity)
				}
				raw = make([]int, len(rows))
			}
			any := false
			for i, row := range rows {
				if row.Test.P <= 0.05 {
					raw[i]++
				}
				any = any || row.Check.Reject
			}
			if any {
				fam++
			}
		}
		total += reps
		alarms += fam
		line := fmt.Sprintf("%s: family-wise %.3f;", path[12:], float64(fam)/float64(reps))
		for i, n := range names {
			line += fmt.Sprintf(" [%s %.3f]", n, float64(raw[i])/float64(reps))
		}
		lines = append(lines, line)
	}
	rate := float64(alarms) / float64(total)
	ceil := 0.05 + 3*math.Sqrt(0.05*0.95/float64(total))
	t.Logf("data against their own model, Holm at 5%%, %d data sets: false-alarm rate %.4f (ceiling %.4f)\n%s", total, rate, ceil, strings.Join(lines, "\n"))
	if rate > ceil {
		t.Errorf("false-alarm rate %.4f above %.4f", rate, ceil)
	}
}

// TestSlopeTestSize: the size of SlopeTest at 5%, measured on windows
// drawn independently from the model's own exact law (so that only the
// approximation of U's law is tested): 1,500 data sets per configuration
// (ring4 and ring3, all and post-selected windows, n = 5 and 20, 20, 200
// and 2,000 windows). Where at least minRareExpected windows of the rarer sign
// are expected, the rate must not exceed 5% by 3 binomial standard errors
// (a normal approximation of U reached 12% in one of these); elsewhere it
// is reported with the Note that says the p-value is approximate.
func TestSlopeTestSize(t *testing.T) {
	const R = 1500
	ceil := 0.05 + 3*math.Sqrt(0.05*0.95/R)
	for _, path := range []string{"../testdata/ring4.toml", "../testdata/ring3.toml"} {
		pr, _ := modelPredictor(t, path)
		for _, n := range []int{5, 20} {
			for _, post := range []bool{false, true} {
				law, err := pr.CountStopped(n, []int{1, -1}, post)
				if err != nil {
					t.Fatal(err)
				}
				cdf := make([]float64, len(law.P))
				s := 0.0
				for i, p := range law.P {
					s += p
					cdf[i] = s
				}
				off := -law.C[0]
				rng := rand.New(rand.NewPCG(uint64(n), 77))
				for _, W := range []int{20, 200, 2000} {
					rej := 0
					approx := false
					for r := 0; r < R; r++ {
						sym := Symmetry{Offset: off, Count: make([]int64, 2*off+1), Windows: W}
						for range W {
							i, _ := slices.BinarySearch(cdf, rng.Float64()*s)
							sym.Count[law.C[min(i, len(cdf)-1)]+off]++
						}
						tst := SlopeTest(sym, law)
						approx = strings.Contains(tst.Note, "approximate")
						if tst.P <= 0.05 {
							rej++
						}
					}
					rate := float64(rej) / R
					t.Logf("%s n = %d post %v, %d windows: size %.4f at 5%% (approximate: %v)", path[12:], n, post, W, rate, approx)
					if !approx && rate > ceil {
						t.Errorf("%s n = %d post %v, %d windows: size %.4f above %.4f", path, n, post, W, rate, ceil)
					}
				}
			}
		}
	}
}
