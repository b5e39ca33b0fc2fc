package infer

import (
	"math"
	"testing"

	"edgewise/likelihood"
	"edgewise/models"
)

// TestStiffSimulationStatistics: records simulated from stiff 6-state
// rings (rates 1e-6 .. 1e6, so that float64 times collide: gaps of 1e-6
// at clock values near 1e11, where the float64 spacing is 1.5e-5) give
// statistics within 4 standard errors of the model's exact values: P(+|+)
// and P(-|-) (binomial SE; the labels of single-edge transitions are a
// Markov chain, so the counts are binomial given the previous label), the
// rate of + and the current J (the summary's jackknife SEs). Exact values
// come from the likelihood package's Predictor (embedded chain
// (-D0)^{-1} D_l and the scaled cumulant generating function), an
// independent route from the simulator's Gillespie steps. Before the
// simulator kept events with equal float64 times, the equilibrium ring read
// P(+|+) = 0.38 against an exact 0.023 (z > 100). A correct simulator fails
// each comparison with probability ~6e-5.
func TestStiffSimulationStatistics(t *testing.T) {
	// Edge i joins state i and i+1; u[i] is the rate i -> i+1, w[i] the
	// rate i+1 -> i. Equilibrium: prod u = prod w = 1e9.
	u := []float64{1e6, 1e5, 1e-6, 1e6, 1e5, 1e-6}
	w := []float64{1e6, 1e-6, 1e5, 1e6, 1e-6, 1e5}
	driven := append([]float64(nil), u...)
	driven[2] *= 20 // cycle affinity ln 20 = 3.0
	for _, c := range []struct {
		name string
		u    []float64
	}{{"equilibrium", u}, {"driven", driven}} {
		t.Run(c.name, func(t *testing.T) {
			net := recRing(c.u, w, 1)
			k, err := likelihood.NewKernels(net)
			if err != nil {
				t.Fatal(err)
			}
			pred, err := likelihood.NewPredictor(k, likelihood.Instrument{})
			if err != nil {
				t.Fatal(err)
			}
			P := pred.Transition()
			J, _, err := pred.Current([]float64{1, -1})
			if err != nil {
				t.Fatal(err)
			}
			d := recSimulate(t, net, 17, 1, 100000)
			zeros := 0
			for _, r := range d.Records {
				for i := 1; i < len(r.Time); i++ {
					if r.Time[i] == r.Time[i-1] {
						zeros++
					}
				}
			}
			if zeros < 1000 {
				t.Fatalf("%d zero gaps: the network is not stiff enough to test collisions", zeros)
			}
			s, err := Summarize(d, SummaryOptions{DiffusionBoot: -1})
			if err != nil {
				t.Fatal(err)
			}
			p := &s.Pooled
			check := func(name string, e Estimate, want float64) {
				t.Helper()
				if !(math.Abs(e.Value-want) <= 4*e.SE) {
					t.Errorf("%s: simulated %.5g +- %.2g, exact %.5g (z = %.1f)", name, e.Value, e.SE, want, (e.Value-want)/e.SE)
				}
			}
			check("P(+|+)", p.Next[0][0], P[0][0])
			check("P(-|-)", p.Next[1][1], P[1][1])
			check("rate of +", p.Rates[0], pred.Rates()[0])
			check("J", p.Current, J)
			t.Logf("%d zero gaps of %d; P(-|-) %.4g exact %.4g; J %.3g +- %.2g exact %.3g", zeros, d.Events()-1, p.Next[1][1].Value, P[1][1], p.Current.Value, p.Current.SE, J)
		})
	}
}

// TestSimulatorKeepsTies: on a stiff ring the simulator's Ties count equals
// the number of zero gaps in what it recorded (exact times, no dead time),
// and with frames it counts none.
func TestSimulatorKeepsTies(t *testing.T) {
	net := recRing([]float64{1e6, 1e5, 1e-6, 1e6, 1e5, 1e-6}, []float64{1e6, 1e-6, 1e5, 1e6, 1e-6, 1e5}, 1)
	sim, err := models.NewSimulator(net, 3)
	if err != nil {
		t.Fatal(err)
	}
	sim.StartStationary()
	ev, _ := sim.Visible(20000, nil)
	zeros := 0
	for i := 1; i < len(ev); i++ {
		if ev[i].Time == ev[i-1].Time {
			zeros++
		}
	}
	if zeros == 0 || sim.Ties() != zeros {
		t.Fatalf("Ties() = %d, zero gaps %d (want equal and > 0)", sim.Ties(), zeros)
	}
}
