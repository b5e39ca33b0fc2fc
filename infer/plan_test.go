package infer

import (
	"math"
	"strings"
	"testing"

	"edgewise/likelihood"

	"gonum.org/v1/gonum/stat"
)

// ring4Truth is a driven 4-state ring with fixed rates (the true scheme A
// of the planning tests).
const ring4Truth = `
name = "ring4-truth"
states = ["A", "B", "C", "D"]
[[edge]]
between = ["A", "B"]
rates = ["kab", "kba"]
labels = ["+", "-"]
[[edge]]
between = ["B", "C"]
rates = ["kbc", "kcb"]
[[edge]]
between = ["C", "D"]
rates = ["kcd", "kdc"]
[[edge]]
between = ["D", "A"]
rates = ["kda", "kad"]
[param.kab]
value = 3.0
fixed = true
[param.kba]
value = 0.8
fixed = true
[param.kbc]
value = 0.5
fixed = true
[param.kcb]
value = 0.3
fixed = true
[param.kcd]
value = 2.0
fixed = true
[param.kdc]
value = 0.4
fixed = true
[param.kda]
value = 0.6
fixed = true
[param.kad]
value = 0.2
fixed = true
`

// A 4-state ring against the 3-state ring scheme: the KL rate is positive
// beyond its Monte Carlo error, the mean fitted log-likelihood ratio of the
// replicates agrees with KL (n - 1) within its error plus the fitting gain
// of B (about k_B/2 = 3 nats: B's maximum on finite data lies above its
// closest member; Wilks), and the power does not fall with n.
func TestPlanNestedRings(t *testing.T) {
	a := parseSpec(t, ring4Truth)
	b := parseSpec(t, fitRing3Spec)
	res, err := Plan(a, b, "+", "-", PlanOptions{KLEvents: 60000, Events: []int{300, 3000, 12000}, Replicates: 16, Seed: 3, Workers: 2, Starts: 2})
	if err != nil {
		t.Fatal(err)
	}
	if !(res.KLRate > 3*res.KLSE) {
		t.Fatalf("KL rate %.3g (SE %.2g) not positive", res.KLRate, res.KLSE)
	}
	for i, p := range res.Power {
		if p.Replicates < 14 {
			t.Errorf("n = %d: only %d replicates fitted", p.Events, p.Replicates)
		}
		if i > 0 && p.Power+0.25 < res.Power[i-1].Power {
			t.Errorf("power falls from %.2f at n = %d to %.2f at n = %d", res.Power[i-1].Power, res.Power[i-1].Events, p.Power, p.Events)
		}
	}
	last := res.Power[len(res.Power)-1]
	if tol := 4*res.KLSE*float64(last.Events) + 3*math.Sqrt(2*last.ExpLLR) + 6; math.Abs(last.MeanLLR-last.ExpLLR) > tol {
		t.Errorf("n = %d: mean LLR %.2f against KL (n-1) = %.2f (tolerance %.1f)", last.Events, last.MeanLLR, last.ExpLLR, tol)
	}
	if last.Power < 0.9 {
		t.Errorf("power at n = %d is %.2f with an expected LLR of %.1f", last.Events, last.Power, last.ExpLLR)
	}
}

// A scheme against its own free version: the KL rate is zero within its
// error (the fitted maximum lies above the truth by about k/2 nats in all,
// so the estimate is slightly negative).
func TestPlanSelf(t *testing.T) {
	a := parseSpec(t, ring4Truth)
	b := parseSpec(t, strings.ReplaceAll(ring4Truth, "fixed = true", ""))
	res, err := Plan(a, b, "+", "-", PlanOptions{KLEvents: 40000, Events: []int{}, Seed: 4, Workers: 2, Starts: 2})
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(res.KLRate) > 4*res.KLSE+8.0/float64(res.KLGaps) {
		t.Errorf("KL rate of a scheme against itself: %.3g (SE %.2g)", res.KLRate, res.KLSE)
	}
	if !math.IsInf(res.EventsLLR10, 1) && res.EventsLLR10 < 1e5 {
		t.Errorf("events for LLR 10 against itself: %g", res.EventsLLR10)
	}
}

// The asymptotic variance of F against simulation: the standard deviation
// of F over 300 records of 3000 events, times sqrt(3000), is within 12%
// of sqrt(n Var F) (the SD of an SD from 300 draws is about 4%).
func TestPlanFVariance(t *testing.T) {
	a := parseSpec(t, ring4Truth)
	res, err := Plan(a, a, "+", "-", PlanOptions{KLEvents: 2000, Events: []int{}, TargetSE: 0.05, Seed: 5, Workers: 2, Starts: 1})
	if err != nil {
		t.Fatal(err)
	}
	net, _ := a.Network(a.Start())
	var fs []float64
	for r := 0; r < 300; r++ {
		d, err := SimulateLike(net, []string{"+", "-"}, []int{3000}, likelihood.Instrument{}, 9, uint64(r))
		if err != nil {
			t.Fatal(err)
		}
		fs = append(fs, EffectiveAffinity(d, 0, 1).Value)
	}
	got := stat.StdDev(fs, nil) * math.Sqrt(3000)
	want := math.Sqrt(res.FVarPerEvent)
	if math.Abs(got/want-1) > 0.12 {
		t.Errorf("SD of F times sqrt(n): %.4g, asymptotic %.4g", got, want)
	}
	if math.Abs(res.EventsForSE-math.Ceil(res.FVarPerEvent/0.0025)) > 0 {
		t.Errorf("events for SE 0.05: %g", res.EventsForSE)
	}
}

func TestPlanBadInput(t *testing.T) {
	a := parseSpec(t, ring4Truth)
	other := parseSpec(t, strings.ReplaceAll(fitRing3Spec, `labels = ["+", "-"]`, `labels = ["up", "down"]`))
	if _, err := Plan(a, other, "+", "-", PlanOptions{KLEvents: 1000, Events: []int{}}); err == nil || !strings.Contains(err.Error(), "same visible transitions") {
		t.Errorf("different labels: %v", err)
	}
}

// Fixed-time departure: for a unicyclic ring the fixed-time slope
// approaches F as the window grows (the departure shrinks), while the
// shipped two-cycle scheme (a driven cycle off the visible edge) keeps a
// departure at every window length; the events follow 9 (w SlopeVar +
// n Var F)/Delta^2 (checked against the values it is made of).
func TestPlanDeparture(t *testing.T) {
	ring := parseSpec(t, ring4Truth)
	res, err := Plan(ring, ring, "+", "-", PlanOptions{KLEvents: 2000, Events: []int{}, Seed: 1, Workers: 2, Starts: 1})
	if err != nil {
		t.Fatal(err)
	}
	if len(res.Departure) != 3 {
		t.Fatalf("departures: %+v", res.Departure)
	}
	if d := res.Departure; math.Abs(d[2].Delta) >= math.Abs(d[0].Delta) {
		t.Errorf("ring: departure does not shrink with the window: %+v", d)
	}
	two := readSpec(t, "../testdata/compare/truth-twocycle.toml")
	res2, err := Plan(two, ring, "+", "-", PlanOptions{KLEvents: 2000, Events: []int{}, Seed: 1, Workers: 2, Starts: 1})
	if err != nil {
		t.Fatal(err)
	}
	for _, d := range res2.Departure {
		if !(math.Abs(d.Delta) > 0.05) {
			t.Errorf("two-cycle scheme, %d gaps: departure %.3g", d.WindowEvents, d.Delta)
		}
		if !(d.Events > 0) || math.IsInf(d.Events, 0) {
			t.Errorf("events %v", d.Events)
		}
	}
}
