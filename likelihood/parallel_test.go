package likelihood

import (
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"testing"

	"edgewise/models"
)

// Parallel edges: two edges joining the same pair of states.

// parTwoState builds the periodic two-state scheme as a ring of two states
// E (0) and L (1) closed by two parallel edges: edge 0 E-L with rates
// (u0, w1) and edge 1 L-E with rates (u1, w0), in the notation of Derrida
// (u_n the forward and w_n the backward rate out of state n). The labels
// "+" (forward) and "-" (backward) sit on edge vis (0 or 1); the other
// edge is hidden.
func parTwoState(u0, u1, w0, w1 float64, vis int) *models.Network {
	h := models.Hidden
	net := &models.Network{
		States: []string{"E", "L"},
		Edges: []models.Edge{
			{From: 0, To: 1, Rate: [2]float64{u0, w1}, Label: [2]int{h, h}},
			{From: 1, To: 0, Rate: [2]float64{u1, w0}, Label: [2]int{h, h}},
		},
		Labels: []models.Label{{Name: "+", Detect: 1}, {Name: "-", Detect: 1}},
	}
	net.Edges[vis].Label = [2]int{0, 1}
	return net
}

// parDerrida returns the velocity V (sites per unit time) and diffusion
// coefficient D (sites^2 per unit time) of the periodic two-state scheme.
//
// V is Derrida's formula (B. Derrida, J. Stat. Phys. 31, 433 (1983);
// design.md section 8) at N = 2: r_n = (1/u_n)(1 + w_{n+1}/u_{n+1}),
// V = N [1 - prod_n w_n/u_n] / sum_n r_n, which reduces to
// V = 2 (u0 u1 - w0 w1) / S, S = u0 + u1 + w0 + w1.
//
// D at N = 2, derived here: the position x (one site per jump, +1 forward,
// -1 backward) has the tilted generator
//
//	M(s) = [[-(u0 + w0), u0 e^s + w0 e^-s], [u1 e^s + w1 e^-s, -(u1 + w1)]],
//
// whose largest eigenvalue is Lambda(s) = (-S + R(s))/2 with
// R^2 = (a - b)^2 + 4 P(s), a = u0 + w0, b = u1 + w1,
// P(s) = u0 u1 e^{2s} + w0 w1 e^{-2s} + u0 w1 + w0 u1. R(0) = S, P'(0) =
// 2 (u0 u1 - w0 w1), P”(0) = 4 (u0 u1 + w0 w1), Lambda' = P'/R and
// Lambda” = P”/R - 2 P'^2/R^3, so V = Lambda'(0) (Derrida's V above) and
//
//	D = Lambda''(0)/2 = 2 (u0 u1 + w0 w1)/S - 4 (u0 u1 - w0 w1)^2/S^3.
//
// Per period (two sites, one crossing of either edge) this is the N = 2
// form quoted in the motor literature (value from memory, Fisher and
// Kolomeisky, PNAS 96, 6597 (1999)): J = V/2 = (u0 u1 - w0 w1)/S and
// D_c = D/4 = [(u0 u1 + w0 w1) - 2 J^2] / (2 S); for uniform rates
// D = (u + w)/2 (Derrida's uniform case). The count c(t) of one visible
// edge (+1 forward, -1 backward) differs from x(t)/2 by at most one, so it
// has J and D_c as its current and diffusion coefficient.
func parDerrida(u0, u1, w0, w1 float64) (V, D float64) {
	r0 := (1 + w1/u1) / u0
	r1 := (1 + w0/u0) / u1
	V = 2 * (1 - (w0*w1)/(u0*u1)) / (r0 + r1)
	S := u0 + u1 + w0 + w1
	q := u0*u1 - w0*w1
	D = 2*(u0*u1+w0*w1)/S - 4*q*q/(S*S*S)
	return V, D
}

// TestParallelDerrida: the visible edge's current J and diffusion
// coefficient D (Predictor.Current, the renewal route) on the two-state
// ring of two parallel edges equal the closed forms of parDerrida (J = V/2,
// D_c = D/4) for the shipped spec and 30 random rate sets over three
// decades, with either edge visible, and the network's stationary edge
// currents equal J. Tolerance 1e-11 relative: the renewal route solves
// 2 x 2 systems (a few ulps) and the closed forms lose at most the digits
// of u0 u1 - w0 w1 near stalling (rates kept away from it here).
func TestParallelDerrida(t *testing.T) {
	f, err := os.Open("../testdata/twostate-parallel.toml")
	if err != nil {
		t.Fatal(err)
	}
	m, err := models.Parse(f, "twostate-parallel.toml")
	f.Close()
	if err != nil {
		t.Fatal(err)
	}
	spec, err := m.Network(m.Start())
	if err != nil {
		t.Fatal(err)
	}
	type rates struct{ u0, u1, w0, w1 float64 }
	cases := []rates{{4, 3, 0.4, 0.5}, {1, 1, 1, 1}, {2, 2, 0.5, 0.5}}
	rng := rand.New(rand.NewPCG(41, 42))
	r := func() float64 { return math.Pow(10, 3*(rng.Float64()-0.5)) }
	for len(cases) < 33 {
		c := rates{r(), r(), r(), r()}
		if math.Abs(math.Log(c.u0*c.u1/(c.w0*c.w1))) > 0.1 {
			cases = append(cases, c)
		}
	}
	for i, c := range cases {
		V, D := parDerrida(c.u0, c.u1, c.w0, c.w1)
		wantJ, wantD := V/2, D/4
		S := c.u0 + c.u1 + c.w0 + c.w1
		if i == 1 && (wantJ != 0 || math.Abs(D-1) > 1e-15) {
			t.Fatalf("uniform rates u = w = 1: V %g D %g, Derrida's uniform case gives 0 and 1", V, D)
		}
		if i == 2 && math.Abs(D-1.25) > 1e-15 {
			t.Fatalf("uniform rates u = 2, w = 0.5: D %g, want (u + w)/2 = 1.25", D)
		}
		if q := (c.u0*c.u1 - c.w0*c.w1) / S; math.Abs(q-wantJ) > 1e-14*math.Abs(q)+1e-300 {
			t.Fatalf("case %d: Derrida V/2 = %g, (u0 u1 - w0 w1)/S = %g", i, wantJ, q)
		}
		for vis := 0; vis < 2; vis++ {
			net := parTwoState(c.u0, c.u1, c.w0, c.w1, vis)
			if i == 0 && vis == 1 {
				net = spec
			}
			J, Dc, err := obsPredictor(t, net, 0).Current([]float64{1, -1})
			if err != nil {
				t.Fatal(err)
			}
			if coreRelErr(J, wantJ, 1e-12) > 1e-11 || coreRelErr(Dc, wantD, 0) > 1e-11 {
				t.Errorf("case %d %+v, edge %d visible: J %.15g D %.15g, closed form %.15g %.15g", i, c, vis, J, Dc, wantJ, wantD)
			}
			pi, err := net.Stationary()
			if err != nil {
				t.Fatal(err)
			}
			cur := net.Currents(pi) // edge 0 E->L, edge 1 L->E: both forward
			for e, j := range cur {
				if coreRelErr(j, wantJ, 1e-12) > 1e-11 {
					t.Errorf("case %d: edge %d current %.15g, want %.15g", i, e, j, wantJ)
				}
			}
		}
	}
}

// TestParallelDerridaSimulation: records simulated from the shipped
// two-state spec (models.Simulator) give the closed-form J and D_c of the
// visible edge within 4 standard errors: 400 batches of equal duration,
// D from the variance of the batch counts, as in TestObsSimulation (batch
// means, common practice). A correct code fails one comparison with
// probability ~6e-5.
func TestParallelDerridaSimulation(t *testing.T) {
	const nEvents, B = 400000, 400
	net := parTwoState(4, 3, 0.4, 0.5, 1)
	V, D := parDerrida(4, 3, 0.4, 0.5)
	ev := obsSimulate(t, net, 0, nEvents, 7)
	T := ev[len(ev)-1].Time / B
	cnt := make([]float64, B)
	for _, e := range ev {
		cnt[min(int(e.Time/T), B-1)] += float64(1 - 2*e.Label)
	}
	rate := make([]float64, B)
	for b := range rate {
		rate[b] = cnt[b] / T
	}
	mJ, seJ := obsMeanSE(rate)
	if math.Abs(mJ-V/2) > 4*seJ {
		t.Errorf("J simulated %.5f +- %.5f, Derrida %.5f", mJ, seJ, V/2)
	}
	_, seC := obsMeanSE(cnt)
	dHat := seC * seC * B / (2 * T)
	seD := dHat * math.Sqrt(2/float64(B-1))
	if math.Abs(dHat-D/4) > 4*seD {
		t.Errorf("D simulated %.5f +- %.5f, Derrida %.5f", dHat, seD, D/4)
	}
	t.Logf("J %.5f +- %.5f (closed form %.5f), D %.5f +- %.5f (closed form %.5f)", mJ, seJ, V/2, dHat, seD, D/4)
}

// parSplit returns a copy of net in which a share of edge e's rates moves
// to a new edge parallel to it (appended last, oriented as e if same, else
// reversed): share[d] of direction d. The generator is unchanged, so the
// split is the same Markov chain.
func parSplit(net *models.Network, e int, share [2]float64, same bool) *models.Network {
	c := net.Clone()
	old := c.Edges[e]
	par := models.Edge{From: old.From, To: old.To, Label: [2]int{models.Hidden, models.Hidden}}
	for d := 0; d < 2; d++ {
		par.Rate[d] = share[d] * old.Rate[d]
		c.Edges[e].Rate[d] = old.Rate[d] - par.Rate[d]
	}
	if !same {
		par.From, par.To = par.To, par.From
		par.Rate[0], par.Rate[1] = par.Rate[1], par.Rate[0]
	}
	c.Edges = append(c.Edges, par)
	return c
}

// TestParallelLikelihoodEquivalence: ln L of a model with parallel edges
// equals ln L of the single-edge model it is equivalent to, on the fast
// and the general path, under four instruments (none; dead time; frames;
// stationary start with dead time, frames and a censored end), and the
// gradients agree by the chain rule. Three equivalences (exact
// identities of the generator split, common practice, no source):
//
//   - hidden: a hidden edge split into two parallel hidden channels with
//     rates a and b is one hidden edge of rate a + b; d ln L/d ln w of the
//     single edge is the sum over the channels (w = a + b scales both);
//   - missed: a visible edge whose labels are detected with probability p
//     is a visible edge of rates p w, detected always, with a hidden
//     parallel channel of rates (1 - p) w (design.md section 8); the
//     gradients satisfy d/d ln w = g_vis + g_hid and
//     d/dp = g_vis/p - g_hid/(1 - p), g the log-rate gradients of the
//     channels;
//   - labelled: the labels sit on both channels, in the same direction
//     (the state after an event is still known, so the fast path holds),
//     with the parallel channel written in the same or the other
//     orientation.
//
// Tolerances: 1e-11 relative on ln L and 1e-9 relative to max(|g|, 1) on
// gradients, those of the fast against general comparison
// (TestGradientFastGeneral): the matrices agree to rounding (sums of the
// split rates), so ln L differs by rounding only.
func TestParallelLikelihoodEquivalence(t *testing.T) {
	type variant struct {
		name string
		// build returns the single-edge and the parallel network.
		build func(net *models.Network) (*models.Network, *models.Network)
		fast  bool // the parallel network allows the fast path
	}
	variants := []variant{
		{"hidden", func(net *models.Network) (*models.Network, *models.Network) {
			return net, parSplit(net, 1, [2]float64{0.3, 0.8}, false)
		}, true},
		{"missed", func(net *models.Network) (*models.Network, *models.Network) {
			c := net.Clone()
			for l := range c.Labels {
				c.Labels[l].Detect = 1
			}
			p := [2]float64{net.Labels[0].Detect, net.Labels[1].Detect}
			return net, parSplit(c, 0, [2]float64{1 - p[0], 1 - p[1]}, true)
		}, true},
		{"labelled", func(net *models.Network) (*models.Network, *models.Network) {
			c := parSplit(net, 0, [2]float64{0.4, 0.7}, true)
			c.Edges[len(c.Edges)-1].Label = net.Edges[0].Label
			return net, c
		}, true},
		{"labelled-reversed", func(net *models.Network) (*models.Network, *models.Network) {
			c := parSplit(net, 0, [2]float64{0.4, 0.7}, false)
			l := net.Edges[0].Label
			c.Edges[len(c.Edges)-1].Label = [2]int{l[1], l[0]}
			return net, c
		}, true},
	}
	coreFastGeneralCases(t, 120, func(i, oi int, net *models.Network, opt Options, d *Data) {
		for _, v := range variants {
			if v.name == "missed" && net.Labels[0].Detect == 1 {
				continue
			}
			single, par := v.build(net)
			paths := []PathMode{PathGeneral}
			if v.fast {
				paths = append(paths, PathFast)
			}
			o := opt
			o.Path = PathFast
			es, err := NewNetworkEvaluator(single, o)
			if err != nil {
				t.Fatal(err)
			}
			ls, gs, err := es.Gradient(d)
			if err != nil {
				t.Fatal(err)
			}
			for _, path := range paths {
				o.Path = path
				ep, err := NewNetworkEvaluator(par, o)
				if err != nil {
					t.Fatalf("%s net %d opt %d path %d: %v", v.name, i, oi, path, err)
				}
				lp, gp, err := ep.Gradient(d)
				if err != nil {
					t.Fatal(err)
				}
				if coreRelErr(lp, ls, 1) > 1e-11 {
					t.Errorf("%s net %d opt %d path %d: ln L parallel %.15g, single %.15g", v.name, i, oi, path, lp, ls)
				}
				parCheckGrad(t, v.name, single, par, gs, gp, func(msg string) {
					t.Errorf("%s net %d opt %d path %d: %s", v.name, i, oi, path, msg)
				})
			}
			// The plain LogLik agrees with the gradient's ln L.
			if lp, err := LogLik(par, d, opt); err != nil || coreRelErr(lp, ls, 1) > 1e-11 {
				t.Errorf("%s net %d opt %d: LogLik %.15g (%v), single %.15g", v.name, i, oi, lp, err, ls)
			}
		}
	})
}

// parCheckGrad compares the gradient gs of the single-edge network with
// gp of its parallel version (the last edge of par is the channel split
// off edge e, e the edge whose rates differ) by the chain rule.
func parCheckGrad(t *testing.T, name string, single, par *models.Network, gs, gp *Gradient, bad func(string)) {
	t.Helper()
	last := len(par.Edges) - 1
	e := -1
	for k := range single.Edges {
		if single.Edges[k].Rate != par.Edges[k].Rate {
			e = k
		}
	}
	if e < 0 && name != "missed" {
		t.Fatalf("%s: no split edge", name)
	}
	if name == "missed" {
		e = 0
	}
	same := par.Edges[last].From == par.Edges[e].From
	scale := 1.0
	for _, g := range gs.LogRate {
		scale = math.Max(scale, math.Abs(g))
	}
	for k := range single.Edges {
		for d := 0; d < 2; d++ {
			want := gs.LogRate[2*k+d]
			got := gp.LogRate[2*k+d]
			if k == e {
				dd := d
				if !same {
					dd = 1 - d
				}
				got += gp.LogRate[2*last+dd]
			}
			if math.Abs(got-want) > 1e-9*scale {
				bad(fmt.Sprintf("d ln L/d ln w[%d,%d]: parallel sum %.12g, single %.12g", k, d, got, want))
			}
		}
	}
	if name != "missed" {
		for l := range gs.Detect {
			if math.Abs(gp.Detect[l]-gs.Detect[l]) > 1e-9*math.Max(1, math.Abs(gs.Detect[l])) {
				bad(fmt.Sprintf("d ln L/dp[%s]: parallel %.12g, single %.12g", single.Labels[l].Name, gp.Detect[l], gs.Detect[l]))
			}
		}
		return
	}
	for l := range gs.Detect {
		p := single.Labels[l].Detect
		d := 0
		if single.Edges[0].Label[1] == l {
			d = 1
		}
		want := gp.LogRate[d]/p - gp.LogRate[2*last+d]/(1-p)
		if math.Abs(gs.Detect[l]-want) > 1e-9*math.Max(scale, math.Abs(want)) {
			bad(fmt.Sprintf("d ln L/dp[%s]: %.12g, from the channels %.12g", single.Labels[l].Name, gs.Detect[l], want))
		}
	}
}

// TestParallelReverse: the reverse of a label is the label of the same
// channels run backwards. With "+" on A->B of one channel and "-" on B->A
// of its parallel neighbour, the time reverse of a "+" jump is a hidden
// jump, so "+" has no reverse; with both labels on both channels it does.
func TestParallelReverse(t *testing.T) {
	net := parTwoState(4, 3, 0.4, 0.5, 1)
	if r := obsPredictor(t, net, 0).Reverse(0); r != 1 {
		t.Errorf("labels on one edge: Reverse(+) = %d, want 1", r)
	}
	cross := net.Clone()
	cross.Edges[1].Label = [2]int{0, models.Hidden} // + on L->E of edge 1
	cross.Edges[0].Label = [2]int{1, models.Hidden} // - on E->L of edge 0
	if r := obsPredictor(t, cross, 0).Reverse(0); r != -1 {
		t.Errorf("labels on different channels: Reverse(+) = %d, want -1", r)
	}
	both := parSplit(coreRandomNet(rand.New(rand.NewPCG(5, 6)), 3, 0, 1, 1), 0, [2]float64{0.5, 0.5}, false)
	both.Edges[len(both.Edges)-1].Label = [2]int{1, 0}
	p := obsPredictor(t, both, 0)
	if p.Reverse(0) != 1 || p.Reverse(1) != 0 {
		t.Errorf("labels on both channels: Reverse = %d, %d, want 1, 0", p.Reverse(0), p.Reverse(1))
	}
}
