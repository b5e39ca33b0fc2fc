package likelihood

import (
	"math"
	"strings"
	"testing"

	"edgewise/models"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/stat/distuv"
)

// obsMultiEdge is a 4-state ring whose label "+" sits on two directed edges
// (A->B and C->D) and "-" on their reverses: the post-event state is not
// known from the label.
func obsMultiEdge(p float64) *models.Network {
	net := obsRing([]float64{3, 2, 4, 1}, []float64{1, 0.5, 1, 2}, p)
	net.Edges[2].Label = [2]int{0, 1}
	return net
}

type obsCase struct {
	name  string
	net   *models.Network
	delta float64
}

func obsCases() []obsCase {
	ring := obsRing([]float64{3, 2, 4, 1}, []float64{1, 0.5, 1, 2}, 1)
	return []obsCase{
		{"ring", ring, 0},
		{"ring dead time", ring, 0.1},
		{"ring missed", obsRing([]float64{3, 2, 4, 1}, []float64{1, 0.5, 1, 2}, 0.8), 0},
		{"two-cycle", obsTwoCycle(1), 0},
		{"two-cycle missed dead", obsTwoCycle(0.7), 0.2},
		{"multi-edge", obsMultiEdge(1), 0},
		{"multi-edge missed dead", obsMultiEdge(0.9), 0.05},
	}
}

// TestObsEmbeddedChain: rows of P(l'|l) sum to 1 and the label law sums to
// 1 (to 1e-13: the kernels come from one LU solve and one matrix
// exponential of 4 x 4 matrices, rounding ~1e-15). Without dead time the
// label rates equal pi D_l 1 and the post-event law equals
// pi D / (pi D 1), with pi from models.Stationary (an independent GTH
// route on the full generator; standard identity pi D (-D0)^{-1} = pi,
// from pi L = 0): relative 1e-12.
func TestObsEmbeddedChain(t *testing.T) {
	for _, tc := range obsCases() {
		p := obsPredictor(t, tc.net, tc.delta)
		P := p.Transition()
		for l, row := range P {
			if s := obsSum(row); math.Abs(s-1) > 1e-13 {
				t.Errorf("%s: row %d of P(l'|l) sums to %.16g", tc.name, l, s)
			}
		}
		if s := obsSum(p.LabelLaw()); math.Abs(s-1) > 1e-13 {
			t.Errorf("%s: label law sums to %.16g", tc.name, s)
		}
		// r P = r: the label law is stationary for P only when the label
		// sequence is Markov; check the weaker identity r_l' = sum_l r_l P(l'|l),
		// which holds always (it is phi M M_l' 1 = phi M_l' 1).
		r := p.LabelLaw()
		for l2 := range r {
			s := 0.0
			for l := range r {
				s += r[l] * P[l][l2]
			}
			if math.Abs(s-r[l2]) > 1e-13 {
				t.Errorf("%s: (r P)_%d = %.16g, r = %.16g", tc.name, l2, s, r[l2])
			}
		}
		if tc.delta > 0 {
			continue
		}
		pi, err := tc.net.Stationary()
		if err != nil {
			t.Fatal(err)
		}
		k, _ := NewKernels(tc.net)
		rates := p.Rates()
		piD := make([]float64, k.N)
		tot := 0.0
		for l := range k.D {
			v := obsRowTimes(pi, k.D[l])
			want := obsSum(v)
			tot += want
			for i := range v {
				piD[i] += v[i]
			}
			if !obsClose(rates[l], want, 1e-12, 0) {
				t.Errorf("%s: rate of %s %.16g, pi D 1 = %.16g", tc.name, k.Labels[l], rates[l], want)
			}
		}
		phi := p.StationaryPostEvent()
		for i := range phi {
			if math.Abs(phi[i]-piD[i]/tot) > 1e-12 {
				t.Errorf("%s: phi_%d = %.16g, pi D / pi D 1 = %.16g", tc.name, i, phi[i], piD[i]/tot)
			}
		}
		piP := p.Stationary()
		for i := range pi {
			if math.Abs(piP[i]-pi[i]) > 1e-13 {
				t.Errorf("%s: pi_%d = %.16g, models %.16g", tc.name, i, piP[i], pi[i])
			}
		}
	}
}

// TestObsRingEffectiveAffinity: on a unicyclic ring with perfect detection
// F = ln[P(+|+)/P(-|-)] equals the cycle affinity (Polettini and Esposito,
// PRL 119, 240601 (2017); design.md section 8), to 1e-11 absolute (F ~ 3,
// probabilities from one LU solve). Missed events (p = 0.9) and a dead time
// of 1% and 5% of the mean gap make F smaller (design.md section 7), and F = 0
// at detailed balance (Kolmogorov's criterion), with or without missed
// events (time-reversal symmetry of the label sequence at equilibrium).
func TestObsRingEffectiveAffinity(t *testing.T) {
	u, w := []float64{3, 2, 4, 1}, []float64{1, 0.5, 1, 2}
	net := obsRing(u, w, 1)
	A := obsCycleAffinity(t, net)
	if math.Abs(A-math.Log(24)) > 1e-12 {
		t.Fatalf("cycle affinity %g, want ln 24", A)
	}
	p := obsPredictor(t, net, 0)
	F := p.EffectiveAffinity(0, 1)
	if math.Abs(F-A) > 1e-11 {
		t.Errorf("perfect detection: F = %.15g, cycle affinity %.15g", F, A)
	}
	missed := obsPredictor(t, obsRing(u, w, 0.9), 0).EffectiveAffinity(0, 1)
	if !(missed > 0 && missed < A-0.05) {
		t.Errorf("missed events: F = %g, want in (0, %g)", missed, A-0.05)
	}
	for _, frac := range []float64{0.01, 0.05} {
		d := obsPredictor(t, net, frac*p.MeanGap()).EffectiveAffinity(0, 1)
		if !(d > 0 && d < A-0.01) {
			t.Errorf("dead time %g of the mean gap: F = %g, want in (0, %g)", frac, d, A-0.01)
		}
	}
	// Detailed balance: prod u = prod w = 24.
	eq := obsRing([]float64{3, 2, 4, 1}, []float64{2, 3, 1, 4}, 1)
	if ok, worst := eq.DetailedBalance(1e-12); !ok {
		t.Fatalf("test network not at detailed balance (%g)", worst)
	}
	for _, det := range []float64{1, 0.6} {
		eq.Labels[0].Detect, eq.Labels[1].Detect = det, det
		if f := obsPredictor(t, eq, 0).EffectiveAffinity(0, 1); math.Abs(f) > 1e-12 {
			t.Errorf("detailed balance, p = %g: F = %g, want 0", det, f)
		}
	}
}

// TestObsIrreversibleRing: a totally irreversible ring of N = 5 states, all
// rates k = 2: psi_{+->+} is the Erlang(N) density k^N t^{N-1} e^{-kt}/(N-1)!
// (design.md section 8; gonum distuv.Gamma with shape N and rate k;
// compared with the Erlang moments N/k and
// N(N+1)/k^2), P(+|+) = 1 and F = +Inf because "-" never occurs. Relative
// tolerance 1e-9 on the density: gonum's Pade exponential of a 5 x 5
// matrix with norm 4 t is accurate to ~1e-13 relative to its norm, and the
// density is compared only where it is above 1e-6 of its peak; unequal
// rates give the hypoexponential density (same tolerance; the closed form
// has cancellation below 1e-6, where it is not compared). The mirror
// ring gives F = -Inf, and a two-state edge (P(+|+) = P(-|-) = 0) NaN.
func TestObsIrreversibleRing(t *testing.T) {
	const N, k = 5, 2.0
	u, w := make([]float64, N), make([]float64, N)
	for i := range u {
		u[i] = k
	}
	net := obsRing(u, w, 1)
	p := obsPredictor(t, net, 0)
	if F := p.EffectiveAffinity(0, 1); !math.IsInf(F, 1) {
		t.Errorf("F = %g, want +Inf", F)
	}
	if P := p.Transition(); P[0][0] != 1 || P[1][0] != 0 || P[1][1] != 0 {
		t.Errorf("P = %v, want [[1 0] [0 0]]", P)
	}
	ts := make([]float64, 200)
	for i := range ts {
		ts[i] = 0.05 * float64(i)
	}
	got := p.Psi(0, 0, ts)
	erlang := distuv.Gamma{Alpha: N, Beta: k} // shape N, rate k
	peak := erlang.Prob((N - 1) / k)          // the mode
	for i, x := range ts {
		want := erlang.Prob(x)
		if want < 1e-6*peak {
			continue
		}
		if !obsClose(got[i], want, 1e-9, 0) {
			t.Errorf("psi(%g) = %.15g, Erlang %.15g", x, got[i], want)
		}
	}
	m1, m2 := p.PsiMoments(0, 0)
	if !obsClose(m1, N/k, 1e-12, 0) || !obsClose(m2, N*(N+1)/(k*k), 1e-12, 0) {
		t.Errorf("moments %g %g, Erlang %g %g", m1, m2, N/k, N*(N+1)/(k*k))
	}
	// Unequal rates k_i: the hypoexponential density
	// sum_i k_i e^{-k_i t} prod_{j != i} k_j / (k_j - k_i) (design.md section 8).
	ks := []float64{1, 2.5, 4, 0.7}
	hypo := obsRing(ks, make([]float64, len(ks)), 1)
	hp := obsPredictor(t, hypo, 0).Psi(0, 0, ts)
	for i, x := range ts {
		want := 0.0
		for a := range ks {
			term := ks[a] * math.Exp(-ks[a]*x)
			for b := range ks {
				if b != a {
					term *= ks[b] / (ks[b] - ks[a])
				}
			}
			want += term
		}
		if want > 1e-6 && !obsClose(hp[i], want, 1e-9, 0) {
			t.Errorf("hypoexponential psi(%g) = %.15g, want %.15g", x, hp[i], want)
		}
	}
	// Mirror image: the ring runs backwards only, "+" never occurs, F = -Inf.
	back := obsRing(w, u, 1)
	if F := obsPredictor(t, back, 0).EffectiveAffinity(0, 1); !math.IsInf(F, -1) {
		t.Errorf("backward ring: F = %g, want -Inf", F)
	}
	// A two-state edge alternates + and -: P(+|+) = P(-|-) = 0, F undefined.
	two := &models.Network{
		States: []string{"A", "B"},
		Edges:  []models.Edge{{From: 0, To: 1, Rate: [2]float64{2, 1}, Label: [2]int{0, 1}}},
		Labels: []models.Label{{Name: "+", Detect: 1}, {Name: "-", Detect: 1}},
	}
	if F := obsPredictor(t, two, 0).EffectiveAffinity(0, 1); !math.IsNaN(F) {
		t.Errorf("two-state edge: F = %g, want NaN", F)
	}
}

// TestObsSCGF: lambda(0) = 0 (to 1e-12), and the effective affinity is the
// non-zero root, lambda(-F) = 0 (Raghu and Neri, arXiv:2406.08926), for
// single-edge labels under missed events and dead time too: the root
// follows from the Markov label sequence, whose tilted 2 x 2 matrix has the
// same trace and determinant at s = 0 and s = -F. Tolerance 1e-10 in
// 1/time (rates are O(1), eigenvalues accurate to ~1e-14). Without dead
// time the Markov-renewal root rho(K(s, lambda)) = 1 must equal the largest
// eigenvalue of the tilted generator (two routes, 1e-10).
func TestObsSCGF(t *testing.T) {
	q := []float64{1, -1}
	for _, tc := range obsCases() {
		if strings.HasPrefix(tc.name, "multi") {
			continue
		}
		p := obsPredictor(t, tc.net, tc.delta)
		l0, err := p.SCGF(0, q)
		if err != nil {
			t.Fatal(err)
		}
		if math.Abs(l0) > 1e-12 {
			t.Errorf("%s: lambda(0) = %g", tc.name, l0)
		}
		F := p.EffectiveAffinity(0, 1)
		lf, err := p.SCGF(-F, q)
		if err != nil {
			t.Fatal(err)
		}
		if math.Abs(lf) > 1e-10 {
			t.Errorf("%s: lambda(-F) = %g with F = %g", tc.name, lf, F)
		}
		// Not a trivial zero: lambda is negative in between.
		if lm, _ := p.SCGF(-F/2, q); !(lm < -1e-3) {
			t.Errorf("%s: lambda(-F/2) = %g, want < 0", tc.name, lm)
		}
		if tc.delta > 0 {
			continue
		}
		for _, s := range []float64{-2, -0.5, 0.7} {
			eig, _ := p.SCGF(s, q)
			ren, err := p.scgfRenewal(p.tiltedD(s, q))
			if err != nil {
				t.Fatal(err)
			}
			if math.Abs(eig-ren) > 1e-10 {
				t.Errorf("%s: lambda(%g): eigen %.15g, renewal %.15g", tc.name, s, eig, ren)
			}
		}
	}
}

// TestObsCurrentFiniteDifference: J and D from the exact implicit
// derivatives of the Markov-renewal SCGF agree with central finite
// differences of lambda(s) (test oracle only): h = 1e-3 gives truncation
// h^2 lambda”'/6 ~ 1e-7 and rounding ~1e-15/h^2 ~ 1e-9; tolerance 1e-5
// relative. Covers dead time and labels on several edges.
func TestObsCurrentFiniteDifference(t *testing.T) {
	q := []float64{1, -1}
	const h = 1e-3
	for _, tc := range obsCases() {
		p := obsPredictor(t, tc.net, tc.delta)
		J, D, err := p.Current(q)
		if err != nil {
			t.Fatal(err)
		}
		lp, _ := p.SCGF(h, q)
		lm, _ := p.SCGF(-h, q)
		l0, _ := p.SCGF(0, q)
		fdJ := (lp - lm) / (2 * h)
		fdD := (lp - 2*l0 + lm) / (h * h) / 2
		if !obsClose(J, fdJ, 1e-5, 1e-3) || !obsClose(D, fdD, 1e-5, 1e-3) {
			t.Errorf("%s: J %.10g D %.10g, finite differences %.10g %.10g", tc.name, J, D, fdJ, fdD)
		}
		// The renewal-reward rate: J = sum_l q_l nu_l.
		rates := p.Rates()
		if !obsClose(J, rates[0]-rates[1], 1e-12, 1e-3) {
			t.Errorf("%s: J %.15g, nu+ - nu- %.15g", tc.name, J, rates[0]-rates[1])
		}
	}
}

// TestObsCurrentDerrida: the current through one edge of a ring and its
// diffusion coefficient. Derrida (J. Stat. Phys. 31, 433 (1983)) gives the
// velocity V and diffusion D_X of the unwrapped position X(t) of a walker on
// a periodic lattice of period N; uniform rates give V = u - w and
// D_X = (u + w)/2. The edge current c(t) differs from X(t)/N by at most one
// (each full turn crosses the edge once, and X - N c is bounded), so
// J = V/N and D_c = D_X/N^2 (verified here against the tilted generator,
// not assumed). Non-uniform rates: J = V/N with Derrida's
// r_n = (1/u_n)[1 + sum_{i=1}^{N-1} prod_{k=1}^{i} w_{n+k}/u_{n+k}],
// V = N[1 - prod_n w_n/u_n] / sum_n r_n; D against the generator route
// D = (1/2) pi D2 1 + pi D1 x, L x = (J - D1 1), pi x = 0 (perturbation of
// the largest eigenvalue of the tilted generator, a different matrix from
// the renewal route). Tolerance 1e-12 relative (direct solves of 4 x 4
// systems).
func TestObsCurrentDerrida(t *testing.T) {
	const N, u0, w0 = 4, 3.0, 1.0
	uni := obsRing([]float64{u0, u0, u0, u0}, []float64{w0, w0, w0, w0}, 1)
	J, D, err := obsPredictor(t, uni, 0).Current([]float64{1, -1})
	if err != nil {
		t.Fatal(err)
	}
	if !obsClose(J, (u0-w0)/N, 1e-12, 0) || !obsClose(D, (u0+w0)/2/(N*N), 1e-12, 0) {
		t.Errorf("uniform ring: J %.15g D %.15g, Derrida %.15g %.15g", J, D, (u0-w0)/N, (u0+w0)/2/(N*N))
	}

	u, w := []float64{3, 2, 4, 1}, []float64{1, 0.5, 1, 2}
	net := obsRing(u, w, 1)
	J, D, err = obsPredictor(t, net, 0).Current([]float64{1, -1})
	if err != nil {
		t.Fatal(err)
	}
	V := obsDerridaV(u, w)
	if !obsClose(J, V/N, 1e-12, 0) {
		t.Errorf("ring: J %.15g, Derrida V/N %.15g", J, V/N)
	}
	// Generator route for D.
	k, _ := NewKernels(net)
	pi, _ := net.Stationary()
	d1 := mat.NewDense(N, N, nil)
	d1.Sub(k.D[0], k.D[1])
	d2 := mat.NewDense(N, N, nil)
	d2.Add(k.D[0], k.D[1])
	b := obsTimesOnes(d1)
	for i := range b {
		b[i] = J - b[i]
	}
	a := mat.NewDense(N, N, nil)
	for i := 0; i < N; i++ {
		for j := 0; j < N; j++ {
			a.Set(i, j, k.L.At(i, j)-pi[j]) // L - 1 pi: forces pi x = 0
		}
	}
	var x mat.VecDense
	if err := x.SolveVec(a, mat.NewVecDense(N, b)); err != nil {
		t.Fatal(err)
	}
	Dgen := 0.5*obsDot(obsRowTimes(pi, d2), obsOnes(N)) + obsDot(obsRowTimes(pi, d1), x.RawVector().Data)
	if !obsClose(D, Dgen, 1e-12, 0) {
		t.Errorf("ring: D renewal %.15g, generator %.15g", D, Dgen)
	}
}

// TestObsSimulation: empirical P(l'|l), mean gaps per (l, l') pair, J and
// D of simulated records
// (models.Simulator, with its own dead-time rule) agree with the
// predictions within 4 standard errors, for perfect detection, missed
// events, and a dead time, on a ring, the two-cycle network and a label
// on two edges. Standard errors from 400 batches of equal duration (batch
// means, common practice); D from the variance of the batch counts,
// Var c(T) = 2 D T + O(1), with SE D sqrt(2/(B-1)) (Gaussian batch counts)
// and an O(1/T) bias below 1% at ~1000 events per batch. A correct code
// fails a single comparison with probability ~6e-5.
func TestObsSimulation(t *testing.T) {
	const nEvents, B = 400000, 400
	for ci, tc := range obsCases() {
		p := obsPredictor(t, tc.net, tc.delta)
		ev := obsSimulate(t, tc.net, tc.delta, nEvents, uint64(100+ci))
		T := ev[len(ev)-1].Time / B
		cnt := make([]float64, B)
		pair := make([][2][2]float64, B)
		gap := make([][2][2]float64, B)
		for i, e := range ev {
			b := min(int(e.Time/T), B-1)
			cnt[b] += float64(1 - 2*e.Label)
			if i > 0 {
				pair[b][ev[i-1].Label][e.Label]++
				gap[b][ev[i-1].Label][e.Label] += e.Time - ev[i-1].Time
			}
		}
		P := p.Transition()
		for l := 0; l < 2; l++ {
			for l2 := 0; l2 < 2; l2++ {
				x := make([]float64, B)
				g := make([]float64, 0, B)
				for b := range x {
					x[b] = pair[b][l][l2] / (pair[b][l][0] + pair[b][l][1])
					if pair[b][l][l2] > 0 {
						g = append(g, gap[b][l][l2]/pair[b][l][l2])
					}
				}
				m, se := obsMeanSE(x)
				if math.Abs(m-P[l][l2]) > 4*se {
					t.Errorf("%s: P(%d|%d) simulated %.5f +- %.5f, predicted %.5f", tc.name, l2, l, m, se, P[l][l2])
				}
				// Mean gap of l -> l2 pairs: PsiMoments m1 / P(l2|l). Ratio
				// estimates per batch are biased by O(1/pairs per batch);
				// only pairs seen in almost every batch are compared.
				if len(g) < B*9/10 {
					continue
				}
				m1, _ := p.PsiMoments(l, l2)
				mg, seg := obsMeanSE(g)
				if want := m1 / P[l][l2]; math.Abs(mg-want) > 4*seg {
					t.Errorf("%s: mean gap %d->%d simulated %.5f +- %.5f, predicted %.5f", tc.name, l, l2, mg, seg, want)
				}
			}
		}
		J, D, err := p.Current([]float64{1, -1})
		if err != nil {
			t.Fatal(err)
		}
		rate := make([]float64, B)
		for b := range rate {
			rate[b] = cnt[b] / T
		}
		mJ, seJ := obsMeanSE(rate)
		if math.Abs(mJ-J) > 4*seJ {
			t.Errorf("%s: J simulated %.5f +- %.5f, predicted %.5f", tc.name, mJ, seJ, J)
		}
		_, seC := obsMeanSE(cnt)
		varC := seC * seC * B
		dHat := varC / (2 * T)
		seD := dHat * math.Sqrt(2/float64(B-1))
		if math.Abs(dHat-D) > 4*seD {
			t.Errorf("%s: D simulated %.5f +- %.5f, predicted %.5f", tc.name, dHat, seD, D)
		}
	}
}

// TestObsErrors: bad inputs give errors, not numbers.
func TestObsErrors(t *testing.T) {
	net := obsRing([]float64{3, 2, 4, 1}, []float64{1, 0.5, 1, 2}, 1)
	k, _ := NewKernels(net)
	if _, err := NewPredictor(k, Instrument{DeadTime: -1}); err == nil {
		t.Error("negative dead time accepted")
	}
	if _, err := NewPredictor(nil, Instrument{}); err == nil {
		t.Error("nil kernels accepted")
	}
	p := obsPredictor(t, net, 0.1)
	if _, _, err := p.Current([]float64{1}); err == nil {
		t.Error("short weight vector accepted")
	}
	if _, err := p.SCGF(math.NaN(), []float64{1, -1}); err == nil {
		t.Error("NaN s accepted")
	}
	if _, err := p.CountStopped(0, []int{1, -1}, false); err == nil {
		t.Error("n = 0 accepted")
	}
	if _, err := p.CountStopped(1, []int{1, -1}, true); err == nil {
		t.Error("post-selection with n = 1 accepted")
	}
	if _, err := p.FixedTime(math.NaN(), []int{1, -1}); err == nil {
		t.Error("NaN time accepted")
	}
	if _, err := p.FixedTime(1, []int{1}); err == nil {
		t.Error("fixed-time law: short weight vector accepted")
	}
	p0 := obsPredictor(t, net, 0)
	if _, err := p0.FixedTime(-1, []int{1, -1}); err == nil {
		t.Error("negative time accepted")
	}
	one := obsRing([]float64{3, 2, 4, 1}, []float64{1, 0.5, 1, 2}, 1)
	one.Labels = one.Labels[:1]
	one.Edges[0].Label = [2]int{0, models.Hidden}
	if _, err := obsPredictor(t, one, 0).CountStopped(5, []int{1}, true); err == nil {
		t.Error("post-selection without a reverse label accepted")
	}
}

// obsEquilibrium sets the backward rates of net so that every cycle has
// zero affinity: w(j->i) = w(i->j) exp(v_i - v_j) for potentials v.
func obsEquilibrium(net *models.Network, v []float64) {
	for i := range net.Edges {
		e := &net.Edges[i]
		e.Rate[1] = e.Rate[0] * math.Exp(v[e.From]-v[e.To])
	}
}

// TestObsDeadTimeEquilibrium: at detailed balance the label sequence is
// time-reversal symmetric when each label sits on one edge and missed
// events are the only artefact, so F = 0 and J = 0 (design.md section 8;
// checked to 1e-12 on the two-cycle network with p = 1 and 0.6). A dead
// time is not time-reversal symmetric (it blinds the instrument after an
// event, not before), and on the two-cycle network at detailed balance it
// produces a spurious F and J, both negative here (F ~ -0.36, J ~ -0.06 at
// delta = 0.5; they share their sign because r_+ P(-|+) = r_- P(+|-)),
// confirmed by simulation within 4 standard errors (200 batch means of
// 2000 events). On a ring at detailed balance the same dead time leaves
// F = 0 (numerical observation to 1e-12, no proof here).
func TestObsDeadTimeEquilibrium(t *testing.T) {
	net := obsTwoCycle(1)
	obsEquilibrium(net, []float64{0, 1.3, -0.4, 0.7})
	if ok, worst := net.DetailedBalance(1e-12); !ok {
		t.Fatalf("not at detailed balance: %g", worst)
	}
	for _, det := range []float64{1, 0.6} {
		net.Labels[0].Detect, net.Labels[1].Detect = det, det
		p := obsPredictor(t, net, 0)
		J, _, _ := p.Current([]float64{1, -1})
		if F := p.EffectiveAffinity(0, 1); math.Abs(F) > 1e-12 || math.Abs(J) > 1e-12 {
			t.Errorf("p = %g, no dead time: F = %g, J = %g, want 0", det, F, J)
		}
	}
	net.Labels[0].Detect, net.Labels[1].Detect = 1, 1
	const delta = 0.5
	p := obsPredictor(t, net, delta)
	F := p.EffectiveAffinity(0, 1)
	J, _, err := p.Current([]float64{1, -1})
	if err != nil {
		t.Fatal(err)
	}
	if !(F < -0.1 && J < -0.01) {
		t.Errorf("dead time at detailed balance: F = %g, J = %g; want both clearly negative", F, J)
	}
	const B, per = 200, 2000
	ev := obsSimulate(t, net, delta, B*per, 77)
	fb, jb := make([]float64, B), make([]float64, B)
	for b := 0; b < B; b++ {
		win := ev[b*per : (b+1)*per]
		var n [2][2]float64
		c := 0.0
		for i, e := range win {
			c += float64(1 - 2*e.Label)
			if i > 0 {
				n[win[i-1].Label][e.Label]++
			}
		}
		fb[b] = math.Log(n[0][0]/(n[0][0]+n[0][1])) - math.Log(n[1][1]/(n[1][0]+n[1][1]))
		jb[b] = c / (win[per-1].Time - ev[max(0, b*per-1)].Time)
	}
	mF, seF := obsMeanSE(fb)
	mJ, seJ := obsMeanSE(jb)
	// The batch estimate of F is biased by O(1/per) ~ 1e-3, far below 4 SE ~ 0.03.
	if math.Abs(mF-F) > 4*seF || math.Abs(mJ-J) > 4*seJ {
		t.Errorf("simulated F %.4f +- %.4f (predicted %.4f), J %.4f +- %.4f (predicted %.4f)", mF, seF, F, mJ, seJ, J)
	}
	ring := obsRing([]float64{3, 2, 4, 1}, []float64{2, 3, 1, 4}, 1)
	if f := obsPredictor(t, ring, delta).EffectiveAffinity(0, 1); math.Abs(f) > 1e-12 {
		t.Errorf("ring at detailed balance with dead time: F = %g", f)
	}
}

// TestObsGamblersRuin: starting in the tail state of the "+" edge with
// F > 0, the probability that the visible current ever reaches -1 is e^{-F}
// (Polettini and Neri, arXiv:2208.02888). Checked against simulation
// (models.Simulator, 20000 runs from state A, each stopped at c = -1 or at
// c = +40, where the remaining chance of a return, e^{-40 F} < 1e-20, is
// negligible) within 4 binomial standard errors, on the ring and on the
// two-cycle network, with perfect detection and with 30% of events missed
// (no dead time: then state A is exactly the state after a "-" event).
func TestObsGamblersRuin(t *testing.T) {
	const runs = 20000
	nets := []*models.Network{
		obsRing([]float64{3, 2, 4, 1}, []float64{1, 0.5, 1, 2}, 1),
		obsTwoCycle(1),
		obsTwoCycle(0.7),
	}
	for ni, net := range nets {
		F := obsPredictor(t, net, 0).EffectiveAffinity(0, 1)
		sim, err := models.NewSimulator(net, uint64(900+ni))
		if err != nil {
			t.Fatal(err)
		}
		hits := 0
		var buf []models.Event
		for r := 0; r < runs; r++ {
			sim.Reset(0, 0)
			c := 0
			for c > -1 && c < 40 {
				buf, _ = sim.Visible(1, buf[:0])
				c += 1 - 2*buf[0].Label
			}
			if c < 0 {
				hits++
			}
		}
		frac := float64(hits) / runs
		want := math.Exp(-F)
		se := math.Sqrt(want * (1 - want) / runs)
		if math.Abs(frac-want) > 4*se {
			t.Errorf("net %d: ruin probability %.4f, e^{-F} = %.4f +- %.4f", ni, frac, want, se)
		}
	}
}

// obsDerridaV is Derrida's ring velocity (J. Stat. Phys. 31, 433 (1983)),
// with u[n] and w[n] the forward and backward rates out of state n:
// r_n = (1/u_n)[1 + sum_{i=1}^{N-1} prod_{k=1}^{i} w_{n+k}/u_{n+k}],
// V = N[1 - prod_n w_n/u_n] / sum_n r_n.
func obsDerridaV(u, w []float64) float64 {
	N := len(u)
	sumR, prod := 0.0, 1.0
	for n := 0; n < N; n++ {
		prod *= w[n] / u[n]
		s, pr := 1.0, 1.0
		for i := 1; i < N; i++ {
			k := (n + i) % N
			pr *= w[k] / u[k]
			s += pr
		}
		sumR += s / u[n]
	}
	return float64(N) * (1 - prod) / sumR
}

// TestObsStiffRing: a 6-state ring whose rates span 2 to 12 decades. The
// kernels come from a subtraction-free (GTH-type) elimination with -D0, so
// F must equal the cycle affinity to 1e-14 relative and rows of P(l'|l)
// sum to 1 within 1e-14 even for P(-|-) ~ 1e-13; J = nu+ - nu- equals
// Derrida's V/N (a sum of positive terms) to 1e-12 relative, or to the
// cancellation bound 1e-14 (nu+ + nu-)/|J| when the current is a small
// difference of large rates (1e-10 at 12 decades); and the
// post-selected count-stopped relation at n = 100 holds to 1e-10 (the DP
// uses non-negative arithmetic only). For comparison, an LU solve lost
// about one digit per decade of spread (observed: 3e-11 on F at 8 decades).
func TestObsStiffRing(t *testing.T) {
	for _, sp := range []float64{2, 4, 8, 12} {
		u := []float64{math.Pow(10, sp/2), 1, math.Pow(10, -sp/2), 3, math.Pow(10, sp/4), 0.5}
		w := []float64{0.2, math.Pow(10, -sp/2), 2, math.Pow(10, sp/2), 1, math.Pow(10, -sp/4)}
		net := obsRing(u, w, 1)
		A := obsCycleAffinity(t, net)
		p := obsPredictor(t, net, 0)
		F := p.EffectiveAffinity(0, 1)
		if !obsClose(F, A, 1e-14, 0) {
			t.Errorf("spread %g: F = %.15g, cycle affinity %.15g", sp, F, A)
		}
		for l, row := range p.Transition() {
			if math.Abs(obsSum(row)-1) > 1e-14 {
				t.Errorf("spread %g: row %d sums to %.16g", sp, l, obsSum(row))
			}
		}
		// Backward rate out of state n is w[n] in obsRing's convention.
		J, _, err := p.Current([]float64{1, -1})
		if err != nil {
			t.Fatal(err)
		}
		rates := p.Rates()
		tolJ := math.Max(1e-12, 1e-14*(rates[0]+rates[1])/math.Abs(J))
		if V := obsDerridaV(u, w); !obsClose(J, V/6, tolJ, 0) {
			t.Errorf("spread %g: J = %.15g, Derrida V/N = %.15g", sp, J, V/6)
		}
		d, err := p.CountStopped(100, []int{1, -1}, true)
		if err != nil {
			t.Fatal(err)
		}
		cs, rs := d.LogRatio(1e-280)
		for i, c := range cs {
			if math.Abs(rs[i]-F*float64(c)) > 1e-10 {
				t.Errorf("spread %g: c = %d: ln ratio - F c = %g", sp, c, rs[i]-F*float64(c))
			}
		}
	}
}
