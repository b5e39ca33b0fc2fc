//go:build long

package infer

// Long checks of the quantity profiles, run with
//
//	go test -tags long -run 'Long$' -v ./infer

import (
	"math"
	"strings"
	"testing"
)

// lsCoverage simulates reps data sets of events from spec at seeds
// seed0+i, fits the spec and profiles sigma; it returns the fraction of
// intervals that hold the true sigma and the fraction whose best
// equilibrium member is not rejected.
func lsCoverage(t *testing.T, spec string, reps, events int, seed0 uint64) (cover, zero float64) {
	m := parseSpec(t, spec)
	net, err := m.Network(m.Start())
	if err != nil {
		t.Fatal(err)
	}
	truth := net.EntropyProduction(mustStationary(t, net))
	hit := make([]int, reps)
	zeros := make([]int, reps)
	parallel(reps, 2, func(i int) {
		d := truthData(t, m, seed0+uint64(i), 1, events)
		res, err := Fit(m, d, FitOptions{Starts: 2, Seed: 1, Workers: 1})
		if err != nil {
			t.Error(err)
			return
		}
		p, err := ProfileQuantity(res, d, "sigma", QuantityProfileOptions{Workers: 1})
		if err != nil {
			t.Error(err)
			return
		}
		if p.Lower <= truth && truth <= p.Upper {
			hit[i] = 1
		}
		if p.ZeroNotRejected {
			zeros[i] = 1
		}
	})
	s, z := 0, 0
	for i := range hit {
		s += hit[i]
		z += zeros[i]
	}
	return float64(s) / float64(reps), float64(z) / float64(reps)
}

// TestLeastSigmaCoverageLong: 200 data sets of 2000 events from the driven
// ring (sigma = 2.19 per time unit): the 95% profile interval of sigma
// holds the true sigma in a fraction within the binomial 3-sigma band
// 0.95 +- 3 sqrt(0.95 0.05/200) = [0.904, 0.996] (profile-likelihood
// intervals are first-order accurate: Venzon and Moolgavkar, Appl. Stat.
// 37, 87 (1988)); and 200 data sets from the same ring at detailed balance
// (kac = 45): the best equilibrium member is not rejected, so the least
// sigma is 0 and the data do not prove driving, in a fraction within the
// same band (the likelihood-ratio test of one affinity constraint has
// size 5%, Wilks' theorem).
func TestLeastSigmaCoverageLong(t *testing.T) {
	cover, _ := lsCoverage(t, lsRing3Spec, 200, 2000, 70000)
	t.Logf("driven ring: coverage of sigma %.3f", cover)
	if cover < 0.904 || cover > 0.996 {
		t.Errorf("coverage %.3f outside [0.904, 0.996]", cover)
	}
	eq := strings.Replace(lsRing3Spec, "[param.kac]\nvalue = 0.6", "[param.kac]\nvalue = 45.0", 1)
	cover, zero := lsCoverage(t, eq, 200, 2000, 80000)
	t.Logf("ring at detailed balance: coverage of sigma = 0 %.3f, equilibrium member not rejected %.3f", cover, zero)
	if zero < 0.904 || zero > 0.996 || math.Abs(cover-zero) > 1e-12 {
		t.Errorf("equilibrium not rejected in %.3f (interval holds 0 in %.3f): want [0.904, 0.996], equal", zero, cover)
	}
}
