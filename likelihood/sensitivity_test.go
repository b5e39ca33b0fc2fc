package likelihood

import (
	"fmt"
	"math"
	"math/cmplx"
	"math/rand/v2"
	"strings"
	"testing"

	"edgewise/models"

	"gonum.org/v1/gonum/mat"
)

// Tests of Predictor.Sensitivity and Sensitivity. Every instrument row is
// checked against central finite differences, and against independent
// exact routes:
//
//   - without dead time, F equals the stalling affinity
//     ln[p+ w+ s_a / (p- w- s_b)], s the stationary law of the network whose
//     visible edge keeps only its missed share (1-p) w (Polettini and
//     Esposito, PRL 119, 240601 (2017); design.md section 8: the missed part
//     acts as a hidden parallel edge), differentiated through
//     models.StationarySensitivity of that other generator;
//   - without dead time the label rates are nu_l = p_l sum_(t in l) pi_a w_t
//     and the mean gap is 1/sum_l nu_l, differentiated through the
//     stationary law of L instead of the post-event chain;
//   - with perfect detection and no dead time the visible current is the
//     visible edge's current (a network row) and a ring's F is its cycle
//     affinity, with constant derivatives +-1 (design.md section 8);
//   - two-state networks in closed form: with detection probabilities by
//     hand, with a dead time by the complex step on the closed form;
//   - the derivative of exp(L delta) (Van Loan's block) against the
//     Daleckii-Krein eigen formula, and the whole chain run with either.

// sensInstrumentRows lists the rows of s that Predictor.Sensitivity adds.
func sensInstrumentRows(s *models.Sensitivity) []int {
	var out []int
	for q, r := range s.Rows {
		switch r.Kind {
		case models.KindStationary, models.KindCurrent, models.KindTraffic, models.KindEntropy, models.KindAffinity:
		default:
			out = append(out, q)
		}
	}
	return out
}

// sensScale is max(|value|, max |derivative|, terms) of row q, terms being
// the visible activity for a visible current (a difference of rates).
func sensScale(s *models.Sensitivity, q int) float64 {
	sc := math.Abs(s.Value[q])
	if s.Rows[q].Kind == KindVisibleCurrent {
		sc = math.Max(sc, s.Value[q+1]) // the activity row follows
	}
	for _, x := range s.LogRate[q] {
		sc = math.Max(sc, math.Abs(x))
	}
	for _, x := range s.Detect[q] {
		sc = math.Max(sc, math.Abs(x))
	}
	return math.Max(sc, 1e-300)
}

func sensOf(t testing.TB, net *models.Network, delta float64) *models.Sensitivity {
	t.Helper()
	s, err := Sensitivity(net, Instrument{DeadTime: delta})
	if err != nil {
		t.Fatal(err)
	}
	return s
}

// sensCases are the networks of the finite-difference test: a ring with
// unequal detection, the two-cycle network, a random 5-state network, and a
// network whose labels sit on two edges each.
func sensCases() []*models.Network {
	rng := rand.New(rand.NewPCG(21, 22))
	r := obsRing([]float64{3, 2, 1.5}, []float64{0.5, 0.4, 0.6}, 0.9)
	r.Labels[1].Detect = 0.7
	return []*models.Network{r, obsTwoCycle(0.8), coreRandomNet(rng, 5, 2, 2, 0.95), coreMultiNet(rng, 5, 2, 1, 0.85)}
}

// TestSensitivityInstrumentFiniteDifferences: every instrument row and
// column against central differences, step h = 1e-5 in ln w and
// h p (1-p) in p (a step h in logit p: F varies like ln(p/(1-p)) near
// p = 1, so a fixed step in p would meet third derivatives ~ 1/(1-p)^3); at
// p = 1 the one-sided second-order difference (3f(p) - 4f(p-h) + f(p-2h))/(2h).
// Truncation errors are of order h^2 |f^(3)| (1e-10 of the scale), rounding
// errors about 1e-14 |f| / h (the predictor's values carry ~1e-14 relative
// error from the subtraction-free solves and, with a dead time, from the
// matrix exponential): 1e-9 of the scale (5e-10 observed). Tolerance
// 1e-8. Dead times of 0 and of a few per cent of the mean gap.
func TestSensitivityInstrumentFiniteDifferences(t *testing.T) {
	worst := 0.0
	for ni, net := range append(sensCases(), obsTwoCycle(1)) {
		for _, delta := range []float64{0, 0.03} {
			worst = math.Max(worst, sensCheckFD(t, fmt.Sprintf("net %d, dead time %g", ni, delta), net, delta))
		}
	}
	t.Logf("largest difference: %.3g of the row scale", worst)
}

// sensCheckFD checks every instrument row of net under the dead time delta
// against central differences (see TestSensitivityInstrumentFiniteDifferences
// for the steps and the tolerance 1e-8) and returns the largest difference
// relative to the row scale.
func sensCheckFD(t *testing.T, name string, net *models.Network, delta float64) float64 {
	t.Helper()
	const h, tol = 1e-5, 1e-8
	worst := 0.0
	s := sensOf(t, net, delta)
	rows := sensInstrumentRows(s)
	nc := 2 * len(net.Edges)
	for c := 0; c < nc+len(net.Labels); c++ {
		fd := make([]float64, s.Len())
		if c < nc {
			if net.Edges[c/2].Rate[c%2] == 0 {
				continue
			}
			up, dn := sensOf(t, coreScaleRate(net, c, math.Exp(h)), delta), sensOf(t, coreScaleRate(net, c, math.Exp(-h)), delta)
			for q := range fd {
				fd[q] = (up.Value[q] - dn.Value[q]) / (2 * h)
			}
		} else {
			l := c - nc
			at := func(dp float64) []float64 {
				m := net.Clone()
				m.Labels[l].Detect += dp
				return sensOf(t, m, delta).Value
			}
			if p := net.Labels[l].Detect; p < 1 {
				hp := h * p * (1 - p)
				up, dn := at(hp), at(-hp)
				for q := range fd {
					fd[q] = (up[q] - dn[q]) / (2 * hp)
				}
			} else {
				f1, f2 := at(-h), at(-2*h)
				for q := range fd {
					fd[q] = (3*s.Value[q] - 4*f1[q] + f2[q]) / (2 * h)
				}
			}
		}
		for _, q := range rows {
			got, col := s.LogRate[q], c
			if c >= nc {
				got, col = s.Detect[q], c-nc
			}
			r := math.Abs(got[col]-fd[q]) / sensScale(s, q)
			worst = math.Max(worst, r)
			if r > tol {
				t.Errorf("%s: d %s / d col %d = %.12g, differences give %.12g", name, s.Rows[q].Name, c, got[col], fd[q])
			}
		}
	}
	return worst
}

// TestSensitivityStalling: F and its derivatives (log-rates and both
// detection probabilities) against the stalling affinity route, on
// single-edge networks without dead time. Tolerance 1e-11 of the row scale
// for rates over 2 decades: both routes are exact, the stationary solves
// keep ~1e-14. On stiff networks (rates over 6 and 10 decades) the
// post-event chain's solve (I - M + 1 phi) loses digits with its condition
// (2e-10 observed at 10 decades): tolerance 1e-8 there.
func TestSensitivityStalling(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 3))
	nets := sensCases()[:3]
	tols := []float64{1e-11, 1e-11, 1e-11}
	for _, dec := range []float64{6, 10} {
		for r := 0; r < 4; r++ {
			nets = append(nets, coreRandomNet(rng, 6, 3, dec, 0.9))
			tols = append(tols, 1e-8)
		}
	}
	for ni, net := range nets {
		sensCheckStalling(t, fmt.Sprintf("net %d", ni), net, tols[ni])
	}
}

// sensCheckStalling checks F[+/-] of net (no dead time; "+" and "-" on
// edge 0, each on that edge only) and its derivatives against the stalling
// route, with tolerance tol of the row scale. The detection columns are
// checked when p < 1.
func sensCheckStalling(t *testing.T, name string, net *models.Network, tol float64) {
	t.Helper()
	s := sensOf(t, net, 0)
	q := s.Find("F[+/-]")
	if q < 0 {
		t.Fatal("no F row")
	}
	vis := net.Edges[0] // + = a->b
	a, b := vis.From, vis.To
	pp, pm := net.Labels[0].Detect, net.Labels[1].Detect
	red := net.Clone()
	red.Edges[0].Rate[0] *= 1 - pp
	red.Edges[0].Rate[1] *= 1 - pm
	sr, ds, err := red.StationarySensitivity()
	if err != nil {
		t.Fatal(err)
	}
	F := math.Log(pp*vis.Rate[0]*sr[a]) - math.Log(pm*vis.Rate[1]*sr[b])
	sc := sensScale(s, q)
	if math.Abs(F-s.Value[q]) > tol*sc {
		t.Errorf("%s: F = %.15g, stalling route %.15g", name, s.Value[q], F)
	}
	dlog := func(c int) float64 { return ds[a][c]/sr[a] - ds[b][c]/sr[b] }
	for c := range s.LogRate[q] {
		want := dlog(c)
		switch c {
		case 0:
			want++
		case 1:
			want--
		}
		if math.Abs(want-s.LogRate[q][c]) > tol*sc {
			t.Errorf("%s: dF/d ln w[%d] = %.15g, stalling route %.15g", name, c, s.LogRate[q][c], want)
		}
	}
	// d/dp+: 1/p+ from the factor p+, and -1/(1-p+) times d/d ln w' of the
	// reduced rate (1-p+) w+; likewise for p- with signs flipped.
	if pp < 1 && pm < 1 {
		wantP := 1/pp - dlog(0)/(1-pp)
		wantM := -1/pm - dlog(1)/(1-pm)
		if math.Abs(wantP-s.Detect[q][0]) > tol*sc || math.Abs(wantM-s.Detect[q][1]) > tol*sc {
			t.Errorf("%s: dF/dp = %.15g, %.15g; stalling route %.15g, %.15g", name, s.Detect[q][0], s.Detect[q][1], wantP, wantM)
		}
	}
}

// TestSensitivityParallelChannel: a visible edge A-B with a hidden parallel
// channel A-B in a 3-state ring, and the two-state periodic scheme (two
// parallel edges between A and B, one visible): every instrument row
// against differences, and F against the stalling route, whose reduced
// network keeps the hidden channel (with p = 1 as well). Runs once
// models.Network.Validate accepts parallel edges.
func TestSensitivityParallelChannel(t *testing.T) {
	h := models.Hidden
	ring := &models.Network{
		States: []string{"A", "B", "C"},
		Edges: []models.Edge{
			{From: 0, To: 1, Rate: [2]float64{2, 0.5}, Label: [2]int{0, 1}},
			{From: 0, To: 1, Rate: [2]float64{0.3, 1.2}, Label: [2]int{h, h}},
			{From: 1, To: 2, Rate: [2]float64{1, 0.8}, Label: [2]int{h, h}},
			{From: 2, To: 0, Rate: [2]float64{1.5, 0.4}, Label: [2]int{h, h}},
		},
		Labels: []models.Label{{Name: "+", Detect: 1}, {Name: "-", Detect: 1}},
	}
	two := &models.Network{
		States: []string{"A", "B"},
		Edges: []models.Edge{
			{From: 0, To: 1, Rate: [2]float64{3, 0.4}, Label: [2]int{0, 1}},
			{From: 1, To: 0, Rate: [2]float64{1.1, 0.6}, Label: [2]int{h, h}},
		},
		Labels: []models.Label{{Name: "+", Detect: 0.9}, {Name: "-", Detect: 0.8}},
	}
	for ni, net := range []*models.Network{ring, two} {
		if err := net.Validate(); err != nil {
			if strings.Contains(err.Error(), "duplicate") {
				t.Skip("models.Network.Validate does not accept parallel edges yet")
			}
			t.Fatal(err)
		}
		for _, delta := range []float64{0, 0.03} {
			sensCheckFD(t, fmt.Sprintf("net %d, dead time %g", ni, delta), net, delta)
		}
		sensCheckStalling(t, fmt.Sprintf("net %d", ni), net, 1e-11)
	}
}

// TestSensitivityRatesFromPi: without dead time, label rates, the visible
// current and activity and the mean gap against the route through the
// stationary law of L (nu_l = p_l sum_(t in l) pi_a w_t, gap = 1/sum nu),
// labels on one edge or on two. Tolerance 1e-11 of the row scale.
func TestSensitivityRatesFromPi(t *testing.T) {
	for ni, net := range sensCases() {
		s := sensOf(t, net, 0)
		pi, err := net.Stationary()
		if err != nil {
			t.Fatal(err)
		}
		_, dpi, err := net.StationarySensitivity()
		if err != nil {
			t.Fatal(err)
		}
		nc, nl := 2*len(net.Edges), len(net.Labels)
		nu := make([]float64, nl)
		dnu := make([][]float64, nl) // columns: log-rates then detection
		for l := range dnu {
			dnu[l] = make([]float64, nc+nl)
		}
		for _, tr := range net.Transitions() {
			l := tr.Label
			if l == models.Hidden {
				continue
			}
			p := net.Labels[l].Detect
			nu[l] += p * pi[tr.From] * tr.Rate
			for c := 0; c < nc; c++ {
				dnu[l][c] += p * dpi[tr.From][c] * tr.Rate
			}
			dnu[l][2*tr.Edge+tr.Dir] += p * pi[tr.From] * tr.Rate
			dnu[l][nc+l] += pi[tr.From] * tr.Rate
		}
		tot := nu[0] + nu[1]
		check := func(name string, v float64, d func(c int) float64) {
			t.Helper()
			q := s.Find(name)
			sc := sensScale(s, q)
			if math.Abs(v-s.Value[q]) > 1e-11*sc {
				t.Errorf("net %d: %s = %.15g, pi route %.15g", ni, name, s.Value[q], v)
			}
			for c := 0; c < nc+nl; c++ {
				got := 0.0
				if c < nc {
					got = s.LogRate[q][c]
				} else {
					got = s.Detect[q][c-nc]
				}
				if math.Abs(got-d(c)) > 1e-11*sc {
					t.Errorf("net %d: d %s / d col %d = %.15g, pi route %.15g", ni, name, c, got, d(c))
				}
			}
		}
		check("rate[+]", nu[0], func(c int) float64 { return dnu[0][c] })
		check("rate[-]", nu[1], func(c int) float64 { return dnu[1][c] })
		check("Jvis[+/-]", nu[0]-nu[1], func(c int) float64 { return dnu[0][c] - dnu[1][c] })
		check("activity[+/-]", tot, func(c int) float64 { return dnu[0][c] + dnu[1][c] })
		check("gap", 1/tot, func(c int) float64 { return -(dnu[0][c] + dnu[1][c]) / (tot * tot) })
	}
}

// TestSensitivityPerfectDetection: with p = 1 and no dead time the visible
// current is the current of the visible edge (network row, through the
// stationary law of L) and, on a ring, F is the cycle affinity with
// derivatives +-1 on every edge (Polettini and Esposito, PRL 119, 240601
// (2017)). Tolerance 1e-11 of the row scale.
func TestSensitivityPerfectDetection(t *testing.T) {
	ring := obsRing([]float64{3, 2, 1.5, 0.7}, []float64{0.5, 0.4, 0.6, 0.9}, 1)
	for ni, net := range []*models.Network{ring, obsTwoCycle(1)} {
		s := sensOf(t, net, 0)
		qv, qe := s.Find("Jvis[+/-]"), s.Find("J["+net.EdgeName(0)+"]")
		sc := sensScale(s, qv)
		for c := range s.LogRate[qv] {
			if math.Abs(s.LogRate[qv][c]-s.LogRate[qe][c]) > 1e-11*sc {
				t.Errorf("net %d: d Jvis / d ln w[%d] = %.15g, edge current route %.15g", ni, c, s.LogRate[qv][c], s.LogRate[qe][c])
			}
		}
		if ni != 0 {
			continue
		}
		q := s.Find("F[+/-]")
		if A := obsCycleAffinity(t, net); math.Abs(A-s.Value[q]) > 1e-12*math.Abs(A) {
			t.Errorf("ring: F = %.15g, cycle affinity %.15g", s.Value[q], A)
		}
		for c, x := range s.LogRate[q] {
			want := 1.0
			if c%2 == 1 {
				want = -1
			}
			if math.Abs(x-want) > 1e-11 {
				t.Errorf("ring: dF/d ln w[%d] = %.15g, want %g", c, x, want)
			}
		}
	}
}

// TestSensitivityTwoStateDetection: A -> B at rate k carries "+" (detected
// with p), B -> A at rate m carries "-" (detected with q). After a +
// event the chain is in B; with S = p + q - pq, by first-step analysis
// P(+|+) = (1-q) p / S, P(-|-) = (1-p) q / S, so F = ln[(1-q) p / ((1-p) q)]
// whatever the rates: dF/d ln k = dF/d ln m = 0, dF/dp = 1/(p(1-p)),
// dF/dq = -1/(q(1-q)). The mean gap after + is
// T_B = [1/m + (1-q)/k] / S, with dT_B/d ln k = -(1-q)/(k S),
// dT_B/d ln m = -1/(m S), dT_B/dp = -(1-q) T_B / S,
// dT_B/dq = -1/(k S) - (1-p) T_B / S. Derived by hand; tolerance 1e-13.
func TestSensitivityTwoStateDetection(t *testing.T) {
	k, m, p, q := 2.0, 0.7, 0.8, 0.6
	net := &models.Network{
		States: []string{"A", "B"},
		Edges:  []models.Edge{{From: 0, To: 1, Rate: [2]float64{k, m}, Label: [2]int{0, 1}}},
		Labels: []models.Label{{Name: "+", Detect: p}, {Name: "-", Detect: q}},
	}
	s := sensOf(t, net, 0)
	S := p + q - p*q
	tb := (1/m + (1-q)/k) / S
	want := map[string][5]float64{ // value, d ln k, d ln m, d p, d q
		"F[+/-]": {math.Log((1 - q) * p / ((1 - p) * q)), 0, 0, 1 / (p * (1 - p)), -1 / (q * (1 - q))},
		"gap[+]": {tb, -(1 - q) / (k * S), -1 / (m * S), -(1 - q) * tb / S, -1/(k*S) - (1-p)*tb/S},
	}
	for name, w := range want {
		r := s.Find(name)
		got := [5]float64{s.Value[r], s.LogRate[r][0], s.LogRate[r][1], s.Detect[r][0], s.Detect[r][1]}
		for i := range got {
			if math.Abs(got[i]-w[i]) > 1e-13*math.Max(1, math.Abs(w[i])) {
				t.Errorf("%s [%d] = %.16g, by hand %.16g", name, i, got[i], w[i])
			}
		}
	}
}

// twoStateDead is the closed form of the two-state network (A -> B at k
// "+", B -> A at m "-", perfect detection) with dead time d: with s = k+m,
// after a + event the chain is in B, and after the dead time in A with
// probability x = (m/s)(1 - e^{-s d}), then the next event is + from A or
// - from B: P(+|+) = x, P(-|-) = y = (k/s)(1 - e^{-s d}),
// gap after + = d + x/k + (1-x)/m, after - = d + y/m + (1-y)/k, the label
// law r+ = (1-y)/(2-x-y), mean gap r+ g+ + r- g-, rates r_l/mean gap.
func twoStateDead(k, m, d complex128) map[string]complex128 {
	s := k + m
	e := 1 - cmplx.Exp(-s*d)
	x, y := m/s*e, k/s*e
	gp, gm := d+x/k+(1-x)/m, d+y/m+(1-y)/k
	rp := (1 - y) / (2 - x - y)
	rm := 1 - rp
	g := rp*gp + rm*gm
	return map[string]complex128{
		"P[+|+]": x, "P[-|-]": y, "P[-|+]": 1 - x, "P[+|-]": 1 - y,
		"F[+/-]": cmplx.Log(x) - cmplx.Log(y), "gap[+]": gp, "gap[-]": gm, "gap": g,
		"rate[+]": rp / g, "rate[-]": rm / g, "Jvis[+/-]": (rp - rm) / g, "activity[+/-]": 1 / g,
	}
}

// TestSensitivityTwoStateDeadTime: every instrument row of the two-state
// network with a dead time against twoStateDead under the complex step
// (Squire and Trapp, SIAM Rev. 40, 110 (1998): Im f(x + ih)/h, exact to
// rounding for h = 1e-30). F = ln(m/k) for every dead time, so its
// derivatives are -1 and +1. Tolerance 1e-12 of the row scale (the
// predictor's matrix exponential and solves keep ~1e-14).
func TestSensitivityTwoStateDeadTime(t *testing.T) {
	k, m, d := 2.0, 0.7, 0.4
	net := &models.Network{
		States: []string{"A", "B"},
		Edges:  []models.Edge{{From: 0, To: 1, Rate: [2]float64{k, m}, Label: [2]int{0, 1}}},
		Labels: []models.Label{{Name: "+", Detect: 1}, {Name: "-", Detect: 1}},
	}
	s := sensOf(t, net, d)
	const hc = 1e-30
	base := twoStateDead(complex(k, 0), complex(m, 0), complex(d, 0))
	dk := twoStateDead(complex(k, 0)*cmplx.Exp(complex(0, hc)), complex(m, 0), complex(d, 0))
	dm := twoStateDead(complex(k, 0), complex(m, 0)*cmplx.Exp(complex(0, hc)), complex(d, 0))
	rows := sensInstrumentRows(s)
	if len(rows) != len(base) {
		t.Fatalf("%d instrument rows, closed form has %d", len(rows), len(base))
	}
	for _, q := range rows {
		name := s.Rows[q].Name
		sc := sensScale(s, q)
		if math.Abs(real(base[name])-s.Value[q]) > 1e-12*sc {
			t.Errorf("%s = %.15g, closed form %.15g", name, s.Value[q], real(base[name]))
		}
		if w := imag(dk[name]) / hc; math.Abs(w-s.LogRate[q][0]) > 1e-12*sc {
			t.Errorf("d %s / d ln k = %.15g, closed form %.15g", name, s.LogRate[q][0], w)
		}
		if w := imag(dm[name]) / hc; math.Abs(w-s.LogRate[q][1]) > 1e-12*sc {
			t.Errorf("d %s / d ln m = %.15g, closed form %.15g", name, s.LogRate[q][1], w)
		}
	}
	if q := s.Find("F[+/-]"); math.Abs(s.LogRate[q][0]+1) > 1e-12 || math.Abs(s.LogRate[q][1]-1) > 1e-12 {
		t.Errorf("dF = %v, want [-1 1]", s.LogRate[q])
	}
}

// frechetEigen is the Daleckii-Krein formula for the derivative of
// exp(L d) in the direction X (Higham, Functions of Matrices (SIAM 2008),
// Theorem 3.11): with L = V diag(lambda) V^{-1},
// dE = V [(V^{-1} X V) o Phi] V^{-1}, Phi_ij the divided difference of
// exp(. d) at lambda_i, lambda_j. V^{-1} comes from the left eigenvectors.
func frechetEigen(t testing.TB, l *mat.Dense, d float64) func(x []float64) ([]float64, error) {
	n, _ := l.Dims()
	var eig mat.Eigen
	if !eig.Factorize(l, mat.EigenBoth) {
		t.Fatal("eigen decomposition failed")
	}
	lam := eig.Values(nil)
	var v, u mat.CDense
	eig.VectorsTo(&v)
	eig.LeftVectorsTo(&u)
	// W = V^{-1}: row i = u_i^H / (u_i^H v_i).
	w := make([][]complex128, n)
	for i := 0; i < n; i++ {
		var norm complex128
		for r := 0; r < n; r++ {
			norm += cmplx.Conj(u.At(r, i)) * v.At(r, i)
		}
		w[i] = make([]complex128, n)
		for r := 0; r < n; r++ {
			w[i][r] = cmplx.Conj(u.At(r, i)) / norm
		}
	}
	phi := func(i, j int) complex128 {
		a, b := lam[i]*complex(d, 0), lam[j]*complex(d, 0)
		if cmplx.Abs(a-b) < 1e-8 {
			return complex(d, 0) * cmplx.Exp((a+b)/2)
		}
		return complex(d, 0) * (cmplx.Exp(a) - cmplx.Exp(b)) / (a - b)
	}
	return func(x []float64) ([]float64, error) {
		b := make([][]complex128, n) // W X V o Phi
		for i := 0; i < n; i++ {
			b[i] = make([]complex128, n)
			for j := 0; j < n; j++ {
				var s complex128
				for r := 0; r < n; r++ {
					for c := 0; c < n; c++ {
						if xv := x[r*n+c]; xv != 0 {
							s += w[i][r] * complex(xv, 0) * v.At(c, j)
						}
					}
				}
				b[i][j] = s * phi(i, j)
			}
		}
		out := make([]float64, n*n)
		for r := 0; r < n; r++ {
			for c := 0; c < n; c++ {
				var s complex128
				for i := 0; i < n; i++ {
					for j := 0; j < n; j++ {
						s += v.At(r, i) * b[i][j] * w[j][c]
					}
				}
				out[r*n+c] = real(s)
			}
		}
		return out, nil
	}
}

// TestSensitivityFrechet: the Van Loan block derivative of exp(L delta)
// against the Daleckii-Krein eigen formula in the direction of each
// log-rate, and the whole instrument Jacobian with a dead time computed
// with either. Tolerance 1e-10 of the largest entry: the eigenvector
// matrices of these small generators have condition numbers below 1e3.
func TestSensitivityFrechet(t *testing.T) {
	for ni, net := range sensCases() {
		const delta = 0.3
		p := obsPredictor(t, net, delta)
		lt := mat.DenseCopyOf(p.k.L.T())
		eig := frechetEigen(t, p.k.L, delta)
		n := p.n
		for _, tr := range net.Transitions() {
			x := make([]float64, n*n)
			x[tr.From*n+tr.To] += tr.Rate
			x[tr.From*n+tr.From] -= tr.Rate
			a, err := vanLoan(lt, x, delta, delta)
			if err != nil {
				t.Fatal(err)
			}
			b, _ := eig(x)
			sc := 0.0
			for i := range a {
				sc = math.Max(sc, math.Abs(a[i]))
			}
			for i := range a {
				if math.Abs(a[i]-b[i]) > 1e-10*sc {
					t.Fatalf("net %d, transition %d->%d: dE[%d] = %.15g (Van Loan), %.15g (eigen)", ni, tr.From, tr.To, i, a[i], b[i])
				}
			}
		}
		s1, err := p.Sensitivity()
		if err != nil {
			t.Fatal(err)
		}
		s2, err := p.sensitivity(eig)
		if err != nil {
			t.Fatal(err)
		}
		for q := range s1.Rows {
			sc := sensScale(s1, q)
			for c := range s1.LogRate[q] {
				if math.Abs(s1.LogRate[q][c]-s2.LogRate[q][c]) > 1e-10*sc {
					t.Errorf("net %d: d %s / d ln w[%d] = %.15g (Van Loan), %.15g (eigen)", ni, s1.Rows[q].Name, c, s1.LogRate[q][c], s2.LogRate[q][c])
				}
			}
		}
	}
}

// TestSensitivityUndefined: when "-" never occurs (the visible edge is
// one-way), P(.|-) and gap[-] are undefined: NaN values and rows; "-" has
// no edges, so it is no label's reverse and there is no F, Jvis or
// activity row. The rates keep finite derivatives, rate[-] is 0 with 0
// derivatives. On the two-state network with p = 1 and no dead time
// P(+|+) = P(-|-) = 0, so F is NaN with a NaN row.
func TestSensitivityUndefined(t *testing.T) {
	net := obsRing([]float64{3, 2, 1.5}, []float64{0.5, 0.4, 0.6}, 1)
	net.Edges[0].Rate[1] = 0
	s := sensOf(t, net, 0)
	for _, name := range []string{"P[+|-]", "P[-|-]", "gap[-]"} {
		q := s.Find(name)
		if !math.IsNaN(s.Value[q]) || !math.IsNaN(s.LogRate[q][0]) || !math.IsNaN(s.Detect[q][0]) {
			t.Errorf("%s = %g: row %v %v, want NaN", name, s.Value[q], s.LogRate[q], s.Detect[q])
		}
	}
	for _, name := range []string{"F[+/-]", "Jvis[+/-]", "activity[+/-]"} {
		if s.Find(name) >= 0 {
			t.Errorf("row %s present without a reverse label", name)
		}
	}
	two := &models.Network{
		States: []string{"A", "B"},
		Edges:  []models.Edge{{From: 0, To: 1, Rate: [2]float64{2, 0.7}, Label: [2]int{0, 1}}},
		Labels: []models.Label{{Name: "+", Detect: 1}, {Name: "-", Detect: 1}},
	}
	s2 := sensOf(t, two, 0)
	if q := s2.Find("F[+/-]"); !math.IsNaN(s2.Value[q]) || !math.IsNaN(s2.LogRate[q][0]) || !math.IsNaN(s2.Detect[q][1]) {
		t.Errorf("two-state F = %g, row %v %v, want NaN", s2.Value[q], s2.LogRate[q], s2.Detect[q])
	}
	q := s.Find("rate[-]")
	for c, x := range append(append([]float64{s.Value[q]}, s.LogRate[q]...), s.Detect[q]...) {
		if x != 0 {
			t.Errorf("rate[-] entry %d = %g, want 0", c, x)
		}
	}
	q = s.Find("rate[+]")
	for c, x := range s.LogRate[q] {
		if math.IsNaN(x) || (c == 1 && x != 0) {
			t.Errorf("d rate[+] / d ln w[%d] = %g", c, x)
		}
	}
}

// TestModelSensitivity: derivatives with respect to a model's free
// parameters, a fitted detection probability among them, with a dead time,
// against central differences in x (x e^{+-h} for a rate, x +- h for a
// detection probability, h = 1e-5); tolerance 1e-8 of the row scale as in
// TestSensitivityInstrumentFiniteDifferences.
func TestModelSensitivity(t *testing.T) {
	for _, path := range []string{"../testdata/shared-label.toml", "../testdata/ring3.toml", "../testdata/offedge.toml"} {
		m := coreLoadModel(t, path)
		x := m.Start()
		in := Instrument{DeadTime: 0.02}
		s, dx, err := ModelSensitivity(m, x, in)
		if err != nil {
			t.Fatal(err)
		}
		isDetect := map[string]bool{}
		for _, p := range m.Params {
			isDetect[p.Name] = p.Kind == models.DetectParam
		}
		const h = 1e-5
		for j, name := range m.Free() {
			up, dn := append([]float64(nil), x...), append([]float64(nil), x...)
			step := 2 * h * x[j]
			if isDetect[name] {
				up[j], dn[j], step = x[j]+h, x[j]-h, 2*h
			} else {
				up[j], dn[j] = x[j]*math.Exp(h), x[j]*math.Exp(-h)
			}
			su, _, err1 := ModelSensitivity(m, up, in)
			sd, _, err2 := ModelSensitivity(m, dn, in)
			if err1 != nil || err2 != nil {
				t.Fatal(err1, err2)
			}
			for _, q := range sensInstrumentRows(s) {
				sc := sensScale(s, q)
				for _, v := range dx[q] {
					sc = math.Max(sc, math.Abs(v))
				}
				fd := (su.Value[q] - sd.Value[q]) / step
				if math.Abs(fd-dx[q][j]) > 1e-8*sc {
					t.Errorf("%s: d %s / d %s = %.12g, differences give %.12g", path, s.Rows[q].Name, name, dx[q][j], fd)
				}
			}
		}
	}
}

// BenchmarkSensitivity10: every quantity (network and instrument rows) of
// a 10-state network with 15 edges and its derivatives in all log-rates and
// detection probabilities, without and with a dead time.
func BenchmarkSensitivity10(b *testing.B) {
	net := coreRandomNet(rand.New(rand.NewPCG(1, 1)), 10, 5, 2, 0.9)
	for _, delta := range []float64{0, 0.05} {
		name := "nodead"
		if delta > 0 {
			name = "dead"
		}
		b.Run(name, func(b *testing.B) {
			for i := 0; i < b.N; i++ {
				if _, err := Sensitivity(net, Instrument{DeadTime: delta}); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}
