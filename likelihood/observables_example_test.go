package likelihood_test

import (
	"fmt"

	"edgewise/likelihood"
	"edgewise/models"
)

// A four-state ring watched on one edge: the effective affinity equals the
// cycle affinity ln 24 under perfect detection and drops with a dead time,
// while the post-selected count-stopped law keeps the slope F exactly.
func ExamplePredictor() {
	h := models.Hidden
	net := &models.Network{
		States: []string{"A", "B", "C", "D"},
		Edges: []models.Edge{
			{From: 0, To: 1, Rate: [2]float64{3, 0.5}, Label: [2]int{0, 1}},
			{From: 1, To: 2, Rate: [2]float64{2, 1}, Label: [2]int{h, h}},
			{From: 2, To: 3, Rate: [2]float64{4, 2}, Label: [2]int{h, h}},
			{From: 3, To: 0, Rate: [2]float64{1, 1}, Label: [2]int{h, h}},
		},
		Labels: []models.Label{{Name: "+", Detect: 1}, {Name: "-", Detect: 1}},
	}
	k, err := likelihood.NewKernels(net)
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("cycle affinity %.4f\n", net.Affinity(net.CycleBasis()[0]))
	for _, delta := range []float64{0, 0.02} {
		p, err := likelihood.NewPredictor(k, likelihood.Instrument{DeadTime: delta})
		if err != nil {
			fmt.Println(err)
			return
		}
		P := p.Transition()
		J, D, err := p.Current([]float64{1, -1})
		if err != nil {
			fmt.Println(err)
			return
		}
		F := p.EffectiveAffinity(0, 1)
		d, err := p.CountStopped(10, []int{1, -1}, true)
		if err != nil {
			fmt.Println(err)
			return
		}
		cs, rs := d.LogRatio(0)
		fmt.Printf("dead time %.2f: P(+|+) %.4f P(-|-) %.4f F %.4f J %.4f D %.4f\n", delta, P[0][0], P[1][1], F, J, D)
		fmt.Printf("  n=10 post-selected: ln[P(%d)/P(-%d)] / %d = %.4f\n", cs[0], cs[0], cs[0], rs[0]/float64(cs[0]))
	}
	// Output:
	// cycle affinity 3.1781
	// dead time 0.00: P(+|+) 0.6761 P(-|-) 0.0282 F 3.1781 J 0.2500 D 0.0921
	//   n=10 post-selected: ln[P(2)/P(-2)] / 2 = 3.1781
	// dead time 0.02: P(+|+) 0.6854 P(-|-) 0.0466 F 2.6891 J 0.2465 D 0.0977
	//   n=10 post-selected: ln[P(2)/P(-2)] / 2 = 2.6891
}

// Stopping at a fixed clock time instead of after a fixed number of
// events: on a network with a second driven cycle that avoids the visible
// edge, the fixed-time log-ratio near c = 0 has a slope that differs from
// F by about 1%, while the post-selected count-stopped slope is F.
func ExamplePredictor_FixedTime() {
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
		Labels: []models.Label{{Name: "+", Detect: 1}, {Name: "-", Detect: 1}},
	}
	k, err := likelihood.NewKernels(net)
	if err != nil {
		fmt.Println(err)
		return
	}
	p, err := likelihood.NewPredictor(k, likelihood.Instrument{})
	if err != nil {
		fmt.Println(err)
		return
	}
	q := []int{1, -1}
	fmt.Printf("F = %.4f\n", p.EffectiveAffinity(0, 1))
	cn, err := p.CountStopped(200, q, true)
	if err != nil {
		fmt.Println(err)
		return
	}
	ct, err := p.FixedTime(200, q)
	if err != nil {
		fmt.Println(err)
		return
	}
	for _, d := range []struct {
		name string
		dist likelihood.CountDist
	}{{"count-stopped n=200", cn}, {"fixed time t=200", ct}} {
		cs, rs := d.dist.LogRatio(1e-250)
		fmt.Printf("%s: ln[P(%d)/P(-%d)]/%d = %.4f\n", d.name, cs[0], cs[0], cs[0], rs[0]/float64(cs[0]))
	}
	// Output:
	// F = 1.4040
	// count-stopped n=200: ln[P(2)/P(-2)]/2 = 1.4040
	// fixed time t=200: ln[P(1)/P(-1)]/1 = 1.4181
}
