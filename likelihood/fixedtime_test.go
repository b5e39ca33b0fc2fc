package likelihood

import (
	"math"
	"math/cmplx"
	"testing"

	"edgewise/models"

	"gonum.org/v1/gonum/mat"
)

// obsFourierFixedTime is the second route to the fixed-time law: the
// characteristic function phi(theta) = pi exp(t L(i theta)) 1, with
// L(i theta) = D0 + sum_l e^{i theta q_l} D_l, evaluated on m equispaced
// theta by gonum's real matrix exponential of the real 2n x 2n embedding
// [[Re, -Im], [Im, Re]] of the complex generator, then inverted by a
// discrete Fourier sum: P(c) = (1/m) sum_j phi(theta_j) e^{-i theta_j c}
// (exact up to aliasing, the mass at |c| >= m/2).
func obsFourierFixedTime(p *Predictor, t float64, q []int, m int) map[int]float64 {
	n := p.n
	pi := p.Stationary()
	out := map[int]float64{}
	phis := make([]complex128, m)
	for j := 0; j < m; j++ {
		th := 2 * math.Pi * float64(j) / float64(m)
		big := mat.NewDense(2*n, 2*n, nil)
		for a := 0; a < n; a++ {
			for b := 0; b < n; b++ {
				re, im := p.k.D0.At(a, b), 0.0
				for l := range q {
					re += math.Cos(th*float64(q[l])) * p.k.D[l].At(a, b)
					im += math.Sin(th*float64(q[l])) * p.k.D[l].At(a, b)
				}
				big.Set(a, b, re*t)
				big.Set(a+n, b+n, re*t)
				big.Set(a, b+n, -im*t)
				big.Set(a+n, b, im*t)
			}
		}
		var e mat.Dense
		e.Exp(big)
		var phi complex128
		for a := 0; a < n; a++ {
			for b := 0; b < n; b++ {
				phi += complex(pi[a], 0) * complex(e.At(a, b), e.At(a+n, b))
			}
		}
		phis[j] = phi
	}
	for c := -m/2 + 1; c < m/2; c++ {
		var s complex128
		for j := 0; j < m; j++ {
			th := 2 * math.Pi * float64(j) / float64(m)
			s += phis[j] * cmplx.Exp(complex(0, -th*float64(c)))
		}
		out[c] = real(s) / float64(m)
	}
	return out
}

// TestObsFixedTimeFourier: uniformisation against Fourier inversion of the
// tilted generator's exponential (two exact routes: a DP over Poisson
// jump counts with non-negative terms, and Pade scaling-and-squaring of a
// complex matrix followed by a discrete Fourier sum), with missed events
// and a label on two edges, t = 0.5 and 5; 256 frequencies leave aliasing
// far below 1e-16 (the mass at |c| >= 128 at t = 5 is negligible; mean
// counts are ~5). Tolerance 1e-12 absolute: the Fourier sum adds 256 terms
// of size 1 with rounding ~1e-16 each.
func TestObsFixedTimeFourier(t *testing.T) {
	q := []int{1, -1}
	for _, net := range []*models.Network{obsTwoCycle(0.7), obsMultiEdge(0.9)} {
		p := obsPredictor(t, net, 0)
		for _, tt := range []float64{0.5, 5} {
			d, err := p.FixedTime(tt, q)
			if err != nil {
				t.Fatal(err)
			}
			ref := obsFourierFixedTime(p, tt, q, 256)
			for c, want := range ref {
				if got := d.Prob(c); math.Abs(got-want) > 1e-12 {
					t.Errorf("t=%g: P(%d) uniformisation %.15g, Fourier %.15g", tt, c, got, want)
				}
			}
		}
	}
}

// TestObsFixedTimeTwoState: a single two-state edge A <-> B (rates a, b,
// "+" = A->B, "-" = B->A, perfect detection) alternates + and -, so from
// A the current is 1 exactly when the chain is in B at t:
// P_t(1) = pi_A P_AB(t) = [b/(a+b)] [a/(a+b)] (1 - e^{-(a+b)t}) = P_t(-1),
// P_t(0) = 1 - 2 P_t(1) (two-state master equation, textbook). Tolerance
// 1e-14 absolute.
func TestObsFixedTimeTwoState(t *testing.T) {
	const a, b = 2.0, 0.7
	net := &models.Network{
		States: []string{"A", "B"},
		Edges:  []models.Edge{{From: 0, To: 1, Rate: [2]float64{a, b}, Label: [2]int{0, 1}}},
		Labels: []models.Label{{Name: "+", Detect: 1}, {Name: "-", Detect: 1}},
	}
	p := obsPredictor(t, net, 0)
	for _, tt := range []float64{0, 0.1, 1, 7} {
		d, err := p.FixedTime(tt, []int{1, -1})
		if err != nil {
			t.Fatal(err)
		}
		p1 := b / (a + b) * a / (a + b) * (1 - math.Exp(-(a+b)*tt))
		for c, want := range map[int]float64{-1: p1, 0: 1 - 2*p1, 1: p1, 2: 0, -2: 0} {
			if got := d.Prob(c); math.Abs(got-want) > 1e-14 {
				t.Errorf("t=%g: P(%d) = %.16g, want %.16g", tt, c, got, want)
			}
		}
	}
}

// TestObsFixedTimeMoments: from a stationary start E c(t) = J t exactly
// (stationarity: the event rates are constant), to 1e-11 relative; and
// Var c(t) = 2 D t + B + O(e^{-g t}) (g the spectral gap), so the slope
// [Var c(t2) - Var c(t1)] / (t2 - t1) at t1 = 30, t2 = 60 equals 2D from
// Current (an independent route: uniformisation against the perturbation
// of the Perron root of the post-event chain) to 1e-6 relative
// (e^{-g t1} < 1e-8 for these rates).
func TestObsFixedTimeMoments(t *testing.T) {
	q := []int{1, -1}
	for _, tc := range obsCases() {
		if tc.delta > 0 {
			continue
		}
		p := obsPredictor(t, tc.net, 0)
		J, D, err := p.Current([]float64{1, -1})
		if err != nil {
			t.Fatal(err)
		}
		d1, err := p.FixedTime(30, q)
		if err != nil {
			t.Fatal(err)
		}
		d2, err := p.FixedTime(60, q)
		if err != nil {
			t.Fatal(err)
		}
		if !obsClose(d1.Mean(), 30*J, 1e-11, 0) || !obsClose(d2.Mean(), 60*J, 1e-11, 0) {
			t.Errorf("%s: means %.12g %.12g, J t = %.12g %.12g", tc.name, d1.Mean(), d2.Mean(), 30*J, 60*J)
		}
		slope := (d2.Var() - d1.Var()) / 30
		if !obsClose(slope, 2*D, 1e-6, 0) {
			t.Errorf("%s: dVar/dt = %.10g, 2D = %.10g", tc.name, slope, 2*D)
		}
	}
}

// TestObsFixedTimeSimulation: P_t(c), t = 3, against consecutive windows
// of duration t of a long simulated stationary record (models.Simulator),
// within 4 standard errors per bin with probability above 1e-3; standard
// errors from 200 batch means. Missed events and a label on two edges.
func TestObsFixedTimeSimulation(t *testing.T) {
	const tt, windows, B = 3.0, 60000, 200
	q := []int{1, -1}
	for ci, net := range []*models.Network{obsTwoCycle(0.7), obsMultiEdge(0.9)} {
		p := obsPredictor(t, net, 0)
		d, err := p.FixedTime(tt, q)
		if err != nil {
			t.Fatal(err)
		}
		sim, err := models.NewSimulator(net, uint64(500+ci))
		if err != nil {
			t.Fatal(err)
		}
		sim.StartStationary()
		var ev []models.Event
		for len(ev) == 0 || ev[len(ev)-1].Time < tt*windows {
			ev, _ = sim.Visible(10000, ev)
		}
		counts := make([]int, windows)
		for _, e := range ev {
			if w := int(e.Time / tt); w < windows {
				counts[w] += q[e.Label]
			}
		}
		per := windows / B
		for i, c := range d.C {
			if d.P[i] < 1e-3 {
				continue
			}
			x := make([]float64, B)
			for b := range x {
				for w := b * per; w < (b+1)*per; w++ {
					if counts[w] == c {
						x[b]++
					}
				}
				x[b] /= float64(per)
			}
			m, se := obsMeanSE(x)
			if math.Abs(m-d.P[i]) > 4*se {
				t.Errorf("net %d: P_t(%d) simulated %.5f +- %.5f, exact %.5f", ci, c, m, se, d.P[i])
			}
		}
	}
}

// obsFixedTimeSim returns the batch-mean estimate (mean and standard
// error over B batches) of Pr(c(t) = c) for each c in cs, from consecutive
// windows of duration t of one long simulated record with dead time delta;
// the first 10 windows are dropped (the simulator starts with no dead
// period running).
func obsFixedTimeSim(t *testing.T, net *models.Network, delta, tt float64, windows, B int, seed uint64, q []int, cs []int) (m, se []float64) {
	sim, err := models.NewSimulator(net, seed)
	if err != nil {
		t.Fatal(err)
	}
	if err := sim.SetDeadTime(delta); err != nil {
		t.Fatal(err)
	}
	sim.StartStationary()
	const burn = 10
	var ev []models.Event
	for len(ev) == 0 || ev[len(ev)-1].Time < tt*float64(windows+burn) {
		ev, _ = sim.Visible(10000, ev)
	}
	counts := make([]int, windows+burn)
	for _, e := range ev {
		if w := int(e.Time / tt); w < windows+burn {
			counts[w] += q[e.Label]
		}
	}
	counts = counts[burn:]
	per := windows / B
	for _, c := range cs {
		x := make([]float64, B)
		for b := range x {
			for w := b * per; w < (b+1)*per; w++ {
				if counts[w] == c {
					x[b]++
				}
			}
			x[b] /= float64(per)
		}
		mm, s := obsMeanSE(x)
		m, se = append(m, mm), append(se, s)
	}
	return m, se
}

// TestObsFixedTimeDeadTime: the fixed-time law under a dead time, checked
// four ways. (1) As delta -> 0 it tends to the law without dead time: at
// delta = 1e-9 within 1e-8 absolute (the difference is O(delta x rates),
// observed 2e-10). (2) From a stationary start E c(t) = J t exactly, with
// J from the Markov-renewal rates, to 1e-10 relative. (3) The variance
// grows as 2 D t with D from Current (renewal route):
// [Var c(60) - Var c(30)] / 30 = 2 D to 1e-6 relative, for dead times
// shorter and longer than the mean gap. (4) Against simulation
// (models.Simulator with its dead-time rule, consecutive windows of one
// record, 200 batch means) within 4 standard errors per bin above 1e-3, at
// t = 3 and at t = 0.2 < delta (the window can lie inside one dead period).
func TestObsFixedTimeDeadTime(t *testing.T) {
	q := []int{1, -1}
	net := obsTwoCycle(0.7)
	p0 := obsPredictor(t, net, 0)
	tiny := obsPredictor(t, net, 1e-9)
	for _, tt := range []float64{0.5, 5} {
		a, err := p0.FixedTime(tt, q)
		if err != nil {
			t.Fatal(err)
		}
		b, err := tiny.FixedTime(tt, q)
		if err != nil {
			t.Fatal(err)
		}
		for i, c := range a.C {
			if math.Abs(a.P[i]-b.Prob(c)) > 1e-8 {
				t.Errorf("t=%g: P(%d) = %.12g without dead time, %.12g with delta = 1e-9", tt, c, a.P[i], b.Prob(c))
			}
		}
	}
	for _, delta := range []float64{0.1, 0.5, 3} {
		p := obsPredictor(t, net, delta)
		J, D, err := p.Current([]float64{1, -1})
		if err != nil {
			t.Fatal(err)
		}
		d1, err := p.FixedTime(30, q)
		if err != nil {
			t.Fatal(err)
		}
		d2, err := p.FixedTime(60, q)
		if err != nil {
			t.Fatal(err)
		}
		if !obsClose(d1.Mean(), 30*J, 1e-10, 0) || !obsClose(d2.Mean(), 60*J, 1e-10, 0) {
			t.Errorf("delta %g: means %.12g %.12g, J t %.12g %.12g", delta, d1.Mean(), d2.Mean(), 30*J, 60*J)
		}
		if s := (d2.Var() - d1.Var()) / 30; !obsClose(s, 2*D, 1e-6, 0) {
			t.Errorf("delta %g: dVar/dt = %.10g, 2D = %.10g", delta, s, 2*D)
		}
	}
	for ci, tc := range []struct {
		net       *models.Network
		delta, tt float64
	}{{net, 0.5, 3}, {net, 0.5, 0.2}, {obsMultiEdge(0.9), 0.05, 3}} {
		p := obsPredictor(t, tc.net, tc.delta)
		d, err := p.FixedTime(tc.tt, q)
		if err != nil {
			t.Fatal(err)
		}
		var cs []int
		var want []float64
		for i, c := range d.C {
			if d.P[i] > 1e-3 {
				cs, want = append(cs, c), append(want, d.P[i])
			}
		}
		windows := 60000
		if tc.tt < 1 {
			windows = 200000
		}
		m, se := obsFixedTimeSim(t, tc.net, tc.delta, tc.tt, windows, 200, uint64(700+ci), q, cs)
		for i, c := range cs {
			if math.Abs(m[i]-want[i]) > 4*se[i] {
				t.Errorf("case %d: P_t(%d) simulated %.5f +- %.5f, exact %.5f", ci, c, m[i], se[i], want[i])
			}
		}
	}
}

// obsSlope is the least-squares slope through the origin of the fixed-time
// log-ratio against c, over 0 < c <= cmax.
func obsSlope(d CountDist, cmax int) float64 {
	cs, rs := d.LogRatio(1e-250)
	sxy, sxx := 0.0, 0.0
	for i, c := range cs {
		if c > cmax {
			break
		}
		sxy += float64(c) * rs[i]
		sxx += float64(c * c)
	}
	return sxy / sxx
}

// TestObsFixedTimeRing: on a ring, ln[P_t(c)/P_t(-c)]/c approaches the
// cycle affinity A at long t (Andrieux and Gaspard, J. Stat. Phys. 127, 107
// (2007)). Exact finite-t bound (path reversal, derived here): the ratio
// of a path's probability to its reversal's is
// pi(x0)/pi(xt) exp(sum_e n_e a_e), n_e the net traversals of edge e and
// a_e its affinity, and on a ring n_e - c is in {-1, 0, 1}; hence
// |ln[P_t(c)/P_t(-c)] - A c| <= ln(pi_max/pi_min) + sum_e |a_e| for every c
// and t. The slope near c = 0 must approach A monotonically over
// t = 5, 20, 80, 200 and be within 0.5% at t = 200.
func TestObsFixedTimeRing(t *testing.T) {
	net := obsRing([]float64{3, 2, 4, 1}, []float64{1, 0.5, 1, 2}, 1)
	A := obsCycleAffinity(t, net)
	p := obsPredictor(t, net, 0)
	pi := p.Stationary()
	G := 0.0
	pmin, pmax := math.Inf(1), 0.0
	for _, x := range pi {
		pmin, pmax = math.Min(pmin, x), math.Max(pmax, x)
	}
	G += math.Log(pmax / pmin)
	for e := range net.Edges {
		G += math.Abs(net.EdgeAffinity(e))
	}
	prev := math.Inf(1)
	for _, tt := range []float64{5, 20, 80, 200} {
		d, err := p.FixedTime(tt, []int{1, -1})
		if err != nil {
			t.Fatal(err)
		}
		cs, rs := d.LogRatio(1e-250)
		for i, c := range cs {
			if dev := math.Abs(rs[i] - A*float64(c)); dev > G {
				t.Errorf("t=%g c=%d: |ln ratio - A c| = %g > bound %g", tt, c, dev, G)
			}
		}
		dep := math.Abs(obsSlope(d, 5)/A - 1)
		if !(dep < prev) {
			t.Errorf("t=%g: slope departure %g did not decrease (was %g)", tt, dep, prev)
		}
		prev = dep
	}
	if prev > 0.005 {
		t.Errorf("t=200: slope departs from A by %.3g", prev)
	}
}

// TestObsFixedTimeTwoCycle: with a driven cycle that avoids the visible
// edge, the fixed-time log-ratio is not F c. By the Gartner-Ellis theorem
// (standard large deviations, from memory) ln[P_t(c)/P_t(-c)] ~
// t [I(-c/t) - I(c/t)] with I the Legendre transform of lambda(s), whose
// slope at c = 0 is -2 s0, s0 = argmin lambda; it equals F only when
// lambda is symmetric about -F/2, as on a ring. Here -2 s0 exceeds F by
// about 1% (the departure must be above 0.5%), the exact slope near
// c = 0 at t = 200 matches -2 s0 to 1e-3 relative (O(1/t) corrections),
// and over the whole range the log-ratio departs from F c by more than
// 10 (strong non-linearity), while the count-stopped post-selected law at
// n = 200 stays on F c (TestObsCountStoppedPostSelected).
func TestObsFixedTimeTwoCycle(t *testing.T) {
	p := obsPredictor(t, obsTwoCycle(1), 0)
	F := p.EffectiveAffinity(0, 1)
	qf := []float64{1, -1}
	// Golden-section search for the minimum of the convex lambda(s).
	a, b := -F-1, 1.0
	g := (math.Sqrt(5) - 1) / 2
	for it := 0; it < 120; it++ {
		m1, m2 := b-g*(b-a), a+g*(b-a)
		l1, _ := p.SCGF(m1, qf)
		l2, _ := p.SCGF(m2, qf)
		if l1 < l2 {
			b = m2
		} else {
			a = m1
		}
	}
	ld := -(a + b) // -2 s0
	if dep := ld/F - 1; !(dep > 0.005) {
		t.Errorf("-2 s0 = %.6g, F = %.6g: departure %.3g, want > 0.5%%", ld, F, dep)
	}
	d, err := p.FixedTime(200, []int{1, -1})
	if err != nil {
		t.Fatal(err)
	}
	if s := obsSlope(d, 5); !obsClose(s, ld, 1e-3, 0) {
		t.Errorf("t=200: slope near c=0 %.6g, large-deviation value %.6g (F = %.6g)", s, ld, F)
	}
	d80, err := p.FixedTime(80, []int{1, -1})
	if err != nil {
		t.Fatal(err)
	}
	cs, rs := d80.LogRatio(1e-250)
	worst := 0.0
	for i, c := range cs {
		worst = math.Max(worst, math.Abs(rs[i]-F*float64(c)))
	}
	if worst < 10 {
		t.Errorf("t=80: max |ln ratio - F c| = %g, expected a strong departure", worst)
	}
}
