//go:build long

package infer

// Long checks of the goodness-of-fit test, run with
//
//	go test -tags long -run 'Long$' -v ./infer

import (
	"testing"

	"edgewise/likelihood"
	"edgewise/models"
)

// TestGoodnessSizeLong: 400 replicates of 2000 gaps simulated from the
// model with its true parameters: the rejection rate at 5% lies within the
// binomial 3-sigma band 0.05 +- 3 sqrt(0.05 0.95/400) = [0.017, 0.083] for
// both tests, and the replicates' KS p-values are uniform (KS p > 0.001).
func TestGoodnessSizeLong(t *testing.T) {
	for i, c := range []struct {
		name string
		opt  likelihood.Options
		net  string
	}{
		{"ring4", likelihood.Options{}, "ring4"},
		{"shared labels, dead time", likelihood.Options{Instrument: likelihood.Instrument{DeadTime: 0.05}}, "shared"},
		{"ring4, frames", likelihood.Options{Instrument: likelihood.Instrument{Frame: 0.02}}, "ring4"},
	} {
		net := recRing([]float64{1.2, 0.9, 1.1, 1.0}, []float64{1.0, 1.0, 0.8, 1.1}, 1)
		if c.net == "shared" {
			net = goodnessShared()
		}
		ks, ad, pu := gofSize(t, net, nil, c.opt, 400, 2000, uint64(50000+1000*i))
		t.Logf("%s: rejection at 5%%: KS %.4f, AD %.4f; uniformity of the KS p-values p = %.3g", c.name, ks, ad, pu)
		for _, r := range []float64{ks, ad} {
			if r < 0.017 || r > 0.083 {
				t.Errorf("%s: rejection rate %.4f outside [0.017, 0.083]", c.name, r)
			}
		}
		if pu < 1e-3 {
			t.Errorf("%s: p-values not uniform (p = %.3g)", c.name, pu)
		}
	}
}

// TestGoodnessDurbinLong: with parameters fitted to the same records (a
// 3-state ring fitted to 2000 gaps of a 3-state ring, 200 replicates) the
// test is conservative: its rejection rate at 5% is below nominal. The
// rate is logged; the check is that it does not exceed the upper 3-sigma
// limit of a nominal test, 0.05 + 3 sqrt(0.05 0.95/200) = 0.096 (Durbin,
// Ann. Stat. 1, 279 (1973): estimating parameters makes the statistic
// stochastically smaller).
func TestGoodnessDurbinLong(t *testing.T) {
	ring3 := familyModel(t, FamilyOptions{Rings: StateRange{3, 3}}, "ring3")
	truth := recRing([]float64{2, 1.5, 1}, []float64{0.5, 1, 0.7}, 1)
	fit := func(d *likelihood.Data) *models.Network { return gofFit(t, ring3, d) }
	ks, ad, _ := gofSize(t, truth, fit, likelihood.Options{}, 200, 2000, 90000)
	t.Logf("fitted parameters: rejection at 5%%: KS %.3f, AD %.3f (nominal 0.05)", ks, ad)
	if ks > 0.096 || ad > 0.096 {
		t.Errorf("rejection rates %.3f, %.3f above a nominal test's", ks, ad)
	}
}

// TestGoodnessLowPowerLong (a measurement, logged): the data of the 4-state
// two-cycle network of the shape tests (recTwoCycle, 5 10^4 gaps) under a
// fitted 4-state ring. The transforms stay near uniform although the
// likelihood ratio against the ring is large: the two schemes differ in
// the label sequence and in a subtle shape difference between the ++ and
// -- gaps, which the pooled transforms hardly see.
func TestGoodnessLowPowerLong(t *testing.T) {
	two := recTwoCycle()
	d := goodnessData(t, two, likelihood.Options{}, 13, 50000)
	ring4 := familyModel(t, FamilyOptions{Rings: StateRange{4, 4}}, "ring4")
	fit := gofFit(t, ring4, d)
	g, err := GapGoodness(fit, d, likelihood.Options{}, 1)
	if err != nil {
		t.Fatal(err)
	}
	l0, _ := likelihood.LogLik(two, d, likelihood.Options{})
	l1, _ := likelihood.LogLik(fit, d, likelihood.Options{})
	t.Logf("recTwoCycle data (5 10^4 gaps) under a fitted ring4: KS p %.3g AD p %.3g; ln L(true) - ln L(ring) = %.1f", g.KSP, g.ADP, l0-l1)
}
