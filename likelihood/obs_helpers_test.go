package likelihood

import (
	"math"
	"testing"

	"edgewise/models"
)

// Shared helpers of the observables tests (prefix obs).

// obsRing builds an N-state ring 0->1->...->N-1->0 with forward rates u
// (u[i] out of state i) and backward rates w (w[i] out of state i going
// backwards). Edge 0 (state 0 -> 1) carries label "+" forwards and "-"
// backwards, both detected with probability p.
func obsRing(u, w []float64, p float64) *models.Network {
	n := len(u)
	net := &models.Network{States: make([]string, n)}
	for i := range net.States {
		net.States[i] = string(rune('A' + i))
	}
	for i := 0; i < n; i++ {
		j := (i + 1) % n
		net.Edges = append(net.Edges, models.Edge{From: i, To: j, Rate: [2]float64{u[i], w[j]}, Label: [2]int{models.Hidden, models.Hidden}})
	}
	net.Labels = []models.Label{{Name: "+", Detect: p}, {Name: "-", Detect: p}}
	net.Edges[0].Label = [2]int{0, 1}
	return net
}

// obsTwoCycle builds a 4-state network with two independent cycles: the
// ring A-B-C-D-A, whose edge A-B is the visible edge ("+" = A->B, "-" =
// B->A, detection p), and the chord B-D, which closes the cycle B-C-D-B
// that avoids the visible edge. Both cycles are driven (affinities ln 6 and
// ln 16 along A-B-C-D-A and B-C-D-B).
func obsTwoCycle(p float64) *models.Network {
	h := models.Hidden
	net := &models.Network{
		States: []string{"A", "B", "C", "D"},
		Edges: []models.Edge{
			{From: 0, To: 1, Rate: [2]float64{2, 1}, Label: [2]int{0, 1}},
			{From: 1, To: 2, Rate: [2]float64{4, 1}, Label: [2]int{h, h}},
			{From: 2, To: 3, Rate: [2]float64{2, 0.5}, Label: [2]int{h, h}},
			{From: 3, To: 0, Rate: [2]float64{1.5, 2}, Label: [2]int{h, h}},
			{From: 1, To: 3, Rate: [2]float64{0.5, 1}, Label: [2]int{h, h}},
		},
		Labels: []models.Label{{Name: "+", Detect: p}, {Name: "-", Detect: p}},
	}
	return net
}

// obsPredictor builds the predictor of net with dead time delta.
func obsPredictor(t testing.TB, net *models.Network, delta float64) *Predictor {
	t.Helper()
	k, err := NewKernels(net)
	if err != nil {
		t.Fatal(err)
	}
	p, err := NewPredictor(k, Instrument{DeadTime: delta})
	if err != nil {
		t.Fatal(err)
	}
	return p
}

// obsSimulate returns n detected events of a stationary trajectory of net
// with dead time delta (models.Simulator).
func obsSimulate(t testing.TB, net *models.Network, delta float64, n int, seed uint64) []models.Event {
	t.Helper()
	sim, err := models.NewSimulator(net, seed)
	if err != nil {
		t.Fatal(err)
	}
	if err := sim.SetDeadTime(delta); err != nil {
		t.Fatal(err)
	}
	sim.StartStationary()
	ev, _ := sim.Visible(n, nil)
	return ev
}

// obsMeanSE returns the mean of x and its standard error (sample standard
// deviation / sqrt(len)); used on batch means.
func obsMeanSE(x []float64) (mean, se float64) {
	for _, v := range x {
		mean += v
	}
	mean /= float64(len(x))
	ss := 0.0
	for _, v := range x {
		ss += (v - mean) * (v - mean)
	}
	return mean, math.Sqrt(ss / float64(len(x)-1) / float64(len(x)))
}

// obsCycleAffinity returns the affinity of the first fundamental cycle of a
// ring, oriented so that it crosses edge 0 forwards.
func obsCycleAffinity(t testing.TB, net *models.Network) float64 {
	t.Helper()
	cs := net.CycleBasis()
	if len(cs) != 1 {
		t.Fatalf("want a unicyclic network, got %d cycles", len(cs))
	}
	a := net.Affinity(cs[0])
	for _, s := range cs[0].Steps {
		if s.Edge == 0 && !s.Forward {
			a = -a
		}
	}
	return a
}

// obsClose reports whether a and b agree within rel relative to max(|a|,|b|,floor).
func obsClose(a, b, rel, floor float64) bool {
	return math.Abs(a-b) <= rel*math.Max(floor, math.Max(math.Abs(a), math.Abs(b)))
}
