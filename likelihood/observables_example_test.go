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
