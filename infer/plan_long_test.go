//go:build long

package infer

import (
	"math"
	"testing"

	"edgewise/likelihood"
)

// Long checks of the planner (go test -tags long -run PlanLong ./infer;
// several minutes on 2 cores).

// planPowerAgrees runs a power study at half, one and twice the predicted
// event count for power 0.8 and checks that the simulated power agrees
// with the predicted one within 3 binomial SE at each, and the mean
// fitted ln LR with (n - 1) KL + df/2 within 3 SE (Wilks, Ann. Math.
// Stat. 9, 60 (1938)).
func planPowerAgrees(t *testing.T, pathA, pathB string, R int) {
	mA, mB := readSpec(t, pathA), readSpec(t, pathB)
	res, err := Plan(mA, mB, PlanOptions{Seed: 23, Replicates: R, AutoEvents: true})
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("%s vs %s: KL %.5g ± %.2g, decision %v, df %d (boundary %d), critical %.4g, events for 0.8: %v", mA.Name, mB.Name, res.KL, res.KLSE, res.Decision, res.DF, res.Boundary, res.Critical, res.EventsForPower)
	for _, r := range res.Rows {
		se := math.Sqrt(r.Predicted * (1 - r.Predicted) / float64(r.Replicates))
		t.Logf("n %d: power %.3f [%.3f, %.3f], predicted %.3f; mean ln LR %.3g ± %.2g, (n-1) KL %.3g; SD(F) %.3g, SE(F) %.3g; failed %d", r.Events, r.Power, r.PowerLo, r.PowerHi, r.Predicted, r.MeanLogLR, r.SELogLR, r.ExpectedLogLR, r.FSD, r.FSE, r.Failed)
		if math.Abs(r.Power-r.Predicted) > 3*math.Max(se, 0.5/float64(r.Replicates)) {
			t.Errorf("n %d: simulated power %.3f, predicted %.3f (binomial SE %.3f)", r.Events, r.Power, r.Predicted, se)
		}
		if want := r.ExpectedLogLR + float64(res.DF)/2; math.Abs(r.MeanLogLR-want) > 3*math.Hypot(r.SELogLR, float64(r.Events-1)*res.KLSE) {
			t.Errorf("n %d: mean ln LR %.4g ± %.2g, (n-1) KL + df/2 = %.4g", r.Events, r.MeanLogLR, r.SELogLR, want)
		}
	}
}

func TestPlanLongRingPower(t *testing.T) {
	planPowerAgrees(t, "../testdata/ring4.toml", "../testdata/plan/ring4-eq.toml", 400)
}

func TestPlanLongTwoCyclePower(t *testing.T) {
	planPowerAgrees(t, "../testdata/compare/truth-twocycle.toml", "../testdata/compare/ring4.toml", 200)
}

// TestPlanLongFixedTime: records of a two-cycle scheme, cut into windows
// of a fixed duration (5 events on average): the mean of the data's
// fixed-time slope minus F agrees with the planned departure within 3
// SE, the spread of the slope with sqrt(m SlopeVar/n) within 3 SE of a
// standard deviation (relative SE 1/sqrt(2(R-1))), and the spread of the
// slope minus F does not exceed the planned (conservative) standard
// error sqrt((m SlopeVar + V_F)/n) by more than that.
func TestPlanLongFixedTime(t *testing.T) {
	m := readSpec(t, "../testdata/compare/truth-twocycle.toml")
	net, _ := m.Network(m.Start())
	k, _ := likelihood.NewKernels(net)
	p, err := likelihood.NewPredictor(k, likelihood.Instrument{})
	if err != nil {
		t.Fatal(err)
	}
	F := p.EffectiveAffinity(0, 1)
	vf := affinityVariance(p, 0, 1)
	const mw, n, R = 5, 40000, 200
	rows, err := fixedTimeRows(p, 0, 1, F, vf, []float64{mw})
	if err != nil {
		t.Fatal(err)
	}
	row := rows[0]
	var slope, diff moments
	for i := range R {
		rec, err := simulateRecord(net, likelihood.Instrument{}, uint64(70000+i), n)
		if err != nil {
			t.Fatal(err)
		}
		d := &likelihood.Data{Labels: []string{"+", "-"}, Records: []likelihood.Record{rec}}
		fl, err := FluctuationTest(d, []int{mw}, FluctOptions{FixedTime: true, Boot: 1})
		if err != nil {
			t.Fatal(err)
		}
		s := fl[0].FixedTime.Slope.Value
		slope.add(s)
		diff.add(s - fl[0].F.Value)
	}
	ms, vs := slope.meanVar()
	md, vd := diff.meanVar()
	planSD := math.Sqrt(mw * row.SlopeVar / n)
	planDiff := math.Sqrt((mw*row.SlopeVar + vf) / n)
	rel := 3 / math.Sqrt(2*(R-1))
	t.Logf("slope %.4g (exact %.4g), SD %.4g (planned %.4g); slope - F %.4g ± %.2g (planned %.4g), SD %.4g (planned, conservative %.4g); events for 3 SE %.4g", ms, row.Slope, math.Sqrt(vs), planSD, md, math.Sqrt(vd/R), row.Departure, math.Sqrt(vd), planDiff, row.Events)
	if math.Abs(md-row.Departure) > 3*math.Sqrt(vd/R) {
		t.Errorf("mean slope - F %.4g, planned departure %.4g", md, row.Departure)
	}
	if math.Abs(math.Sqrt(vs)/planSD-1) > rel {
		t.Errorf("SD of the fixed-time slope %.4g, planned %.4g", math.Sqrt(vs), planSD)
	}
	if math.Sqrt(vd) > planDiff*(1+rel) {
		t.Errorf("SD of slope - F %.4g exceeds the planned %.4g", math.Sqrt(vd), planDiff)
	}
}
