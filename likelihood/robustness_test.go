package likelihood

import (
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"edgewise/models"

	"gonum.org/v1/gonum/mat"
)

// coreFrameRecord is one record of "+" events with gaps gaps (the first
// event at time 0).
func coreFrameRecord(gaps []float64) *Data {
	r := Record{ID: "frames", Time: []float64{0}, Label: []uint8{0}, End: math.NaN()}
	t := 0.0
	for _, g := range gaps {
		t += g
		r.Time = append(r.Time, t)
		r.Label = append(r.Label, 0)
	}
	return &Data{Labels: []string{"+"}, Records: []Record{r}}
}

// TestDenseFrameGradientLongGaps: on the dense route (Pade, and
// uniformisation) with frame-limited timestamps, a frame interval far
// out (gaps of 15-50 slow time constants 1/|lmax|) is evaluated as
// e^{s lo} times a bounded matrix, and its gradient from two bounded Van
// Loan blocks (d e^{D0 lo} over [0, lo] on the shifted D0 - s I, and
// d int_0^w e^{D0 u} du over the frame width), so the gradient matches
// central finite differences. Before the fix the interval sums were
// accumulated with the unshifted c ~ e^{lmax lo} and h(hi) - h(lo) of two
// huge block exponentials cancelled: g = 20 gave +3.3e8 against -9.466.
// Tolerance 1e-6 relative to max(|g|, 1), the budget of
// TestGradientFiniteDifferences (Richardson-extrapolated differences:
// truncation ~h^4 = 1e-12, rounding ~eps |ln L| / h ~ 1e-11 here).
func TestDenseFrameGradientLongGaps(t *testing.T) {
	uneq := coreIrreversibleRing(3, 1)
	for i, k := range []float64{1.7, 1.2, 2.3} {
		uneq.Edges[i].Rate[0] = k
	}
	cases := []struct {
		name string
		net  *models.Network
		m    ExpMethod
		g    float64
	}{
		{"auto(pade)/equal/g=10", coreIrreversibleRing(3, 1.7), ExpAuto, 10},
		{"auto(pade)/equal/g=20", coreIrreversibleRing(3, 1.7), ExpAuto, 20},
		{"pade/unequal/g=20", uneq, ExpPade, 20},
		{"pade/unequal/g=40", uneq, ExpPade, 40},
		{"uniform/unequal/g=20", uneq, ExpUniform, 20},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			opt := Options{Method: c.m, Instrument: Instrument{Frame: 0.1}}
			ev, err := NewNetworkEvaluator(c.net, opt)
			if err != nil {
				t.Fatal(err)
			}
			if ev.Method() == ExpSpectral {
				t.Fatalf("route %v, want a dense one", ev.Method())
			}
			d := coreFrameRecord([]float64{1, c.g, 1})
			ll, g, err := ev.Gradient(d)
			if err != nil {
				t.Fatal(err)
			}
			ll2, err := ev.LogLik(d)
			if err != nil {
				t.Fatal(err)
			}
			if coreRelErr(ll, ll2, 1) > 1e-12 {
				t.Errorf("ln L from Gradient %v, from LogLik %v", ll, ll2)
			}
			fd := coreFDGrad(t, c.net, d, opt)
			for i := range g.LogRate {
				if math.Abs(g.LogRate[i]-fd.LogRate[i]) > 1e-6*math.Max(math.Abs(fd.LogRate[i]), 1) {
					t.Errorf("d lnL/d ln w[%d] = %.12g, finite differences %.12g", i, g.LogRate[i], fd.LogRate[i])
				}
			}
		})
	}
}

// TestDenseFrameVeryLongGap: a frame interval 1000 slow time constants
// out (|lmax| lo ~ 1000, beyond the underflow of e^{lmax lo}) must return
// (before the fix the unshifted value was subnormal, 1/c = +Inf, and
// gonum's Dense.Exp looped forever on the infinite block) with a finite
// value and gradient; ln L must follow the asymptote: the difference
// between two such gaps is lmax times their difference (to 1e-9
// relative; subdominant terms are e^{-hundreds} smaller here, and the
// defective triple eigenvalue -1.7 of the equal-rate ring gives a
// polynomial factor, so the unequal ring is used).
func TestDenseFrameVeryLongGap(t *testing.T) {
	net := coreIrreversibleRing(3, 1)
	for i, k := range []float64{1.7, 1.2, 2.3} {
		net.Edges[i].Rate[0] = k
	}
	lmax := -1.2
	for _, m := range []ExpMethod{ExpPade, ExpUniform} {
		opt := Options{Method: m, Instrument: Instrument{Frame: 0.1}}
		ev, err := NewNetworkEvaluator(net, opt)
		if err != nil {
			t.Fatal(err)
		}
		var lls [2]float64
		for i, gap := range []float64{600, 900} {
			d := coreFrameRecord([]float64{1, gap, 1})
			ll, g, err := ev.Gradient(d)
			if err != nil {
				t.Fatalf("%v gap %g: %v", m, gap, err)
			}
			for _, v := range g.LogRate {
				if math.IsNaN(v) || math.IsInf(v, 0) {
					t.Fatalf("%v gap %g: gradient %v", m, gap, g.LogRate)
				}
			}
			lls[i] = ll
		}
		if got, want := lls[1]-lls[0], lmax*300; coreRelErr(got, want, 1) > 1e-9 {
			t.Errorf("%v: ln L(900) - ln L(600) = %.15g, want lmax * 300 = %.15g", m, got, want)
		}
	}
	// The reviewer's case: the equal-rate (defective) ring, automatic route
	// (Pade), gap 600 (|lmax| lo = 1020). It must return, with the
	// gradient of finite differences. Near the defective point ln L has
	// derivatives growing like (k g)^m, so the usual h = 1e-3 is
	// truncation-limited here (it gives -338.1368 against -338.13282); a
	// Richardson difference with h = 1e-5 has truncation ~(k g h)^4 ~ 1e-8
	// relative and rounding ~eps |ln L| / h ~ 2e-8, hence 1e-7.
	eq := coreIrreversibleRing(3, 1.7)
	d := coreFrameRecord([]float64{1, 600, 1})
	opt := Options{Instrument: Instrument{Frame: 0.1}}
	_, g, err := LogLikGrad(eq, d, opt)
	if err != nil {
		t.Fatal(err)
	}
	f := func(x float64) float64 {
		v, err := LogLik(coreScaleRate(eq, 0, math.Exp(x)), d, opt)
		if err != nil {
			t.Fatal(err)
		}
		return v
	}
	cd := func(h float64) float64 { return (f(h) - f(-h)) / (2 * h) }
	const h = 1e-5
	if fd := (4*cd(h/2) - cd(h)) / 3; coreRelErr(g.LogRate[0], fd, 1) > 1e-7 {
		t.Errorf("equal ring, gap 600: d lnL/d ln w[0] = %.12g, finite differences %.12g", g.LogRate[0], fd)
	}
}

// TestExpNoHang: the routes into gonum's Dense.Exp must return on huge
// times (before the fix, Predictor.Psi(0, 0, {1e308}) on ring4 scaled D0
// by 1e308, got infinite entries, and Dense.Exp looped forever). psi at a
// huge time is 0 (exp(D0 t) -> 0); Propagator.Exp of a sub-generator at
// a huge time returns zeros or an error, never a hang or NaN.
func TestExpNoHang(t *testing.T) {
	m := coreLoadModel(t, "../testdata/ring4.toml")
	net, err := m.Network(m.Start())
	if err != nil {
		t.Fatal(err)
	}
	k, err := NewKernels(net)
	if err != nil {
		t.Fatal(err)
	}
	pr, err := NewPredictor(k, Instrument{})
	if err != nil {
		t.Fatal(err)
	}
	got := pr.Psi(0, 0, []float64{1e308, math.MaxFloat64, 1e5})
	for i, v := range got {
		if v != 0 {
			t.Errorf("psi at huge time %d = %v, want 0", i, v)
		}
	}
	for _, meth := range []ExpMethod{ExpPade, ExpUniform, ExpSpectral} {
		p, err := NewPropagator(k.D0, meth)
		if err != nil {
			t.Fatal(err)
		}
		var e mat.Dense
		if err := p.Exp(&e, 1e308); err == nil {
			for _, v := range e.RawMatrix().Data {
				if v != 0 {
					t.Errorf("%v: exp(D0 1e308) has entry %v, want 0", meth, v)
				}
			}
		}
	}
	// A matrix with a non-finite entry is an error, not a hang.
	bad := mat.NewDense(2, 2, []float64{math.Inf(-1), 1, 0, -1})
	if err := expScaled(&mat.Dense{}, bad, 1); err == nil {
		t.Error("exp of a matrix with an infinite entry: no error")
	}
}

// TestSpectralRelativeAccuracy: on ring4 (start values) a "+" followed by
// "+" needs three hidden steps, so psi_{+->+}(tau) ~ tau^3 is tiny at
// short gaps while its eigen-terms are O(1): the spectral sum is only
// absolutely accurate. With the fallback (an event whose sum is below
// 1e-8 of the sum of |terms| is recomputed by uniformisation, whose terms
// are all non-negative), ln psi agrees with uniformisation's entry-wise
// accurate value to 1e-9 relative at every tau in 1e-6..1e-2, on the fast
// and the general path, for ln L and in Gradient; so does the gradient
// (flagged events take their sensitivities from Van Loan blocks of the
// uniformisation factors, not from the cancelling eigen sums; before,
// 6-12% off at tau = 1e-5; observed agreement now ~1e-15). Before the fix: tau =
// 1e-6 "density impossible", 1e-4 off by 8e-4, 1e-3 by 4.7e-7. 1e-9:
// above the threshold, the spectral error is at most about eps cond(V)
// 1e8 ~ 1e-7 relative in psi, at ln psi ~ -15 and below that is < 1e-8
// relative in ln psi; observed agreement is ~1e-12.
func TestSpectralRelativeAccuracy(t *testing.T) {
	m := coreLoadModel(t, "../testdata/ring4.toml")
	net, err := m.Network(m.Start())
	if err != nil {
		t.Fatal(err)
	}
	eu, err := NewNetworkEvaluator(net, Options{Method: ExpUniform})
	if err != nil {
		t.Fatal(err)
	}
	for _, path := range []PathMode{PathFast, PathGeneral} {
		for _, frame := range []float64{0, 1e-4} {
			opt := Options{Path: path, Instrument: Instrument{Frame: frame}}
			es, err := NewNetworkEvaluator(net, opt)
			if err != nil {
				t.Fatal(err)
			}
			if es.Method() != ExpSpectral {
				t.Fatalf("route %v", es.Method())
			}
			ou := opt
			ou.Method = ExpUniform
			ou.Path = PathAuto
			eu, err = NewNetworkEvaluator(net, ou)
			if err != nil {
				t.Fatal(err)
			}
			for _, tau := range []float64{1e-6, 1e-5, 1e-4, 3e-4, 1e-3, 3e-3, 1e-2} {
				if frame > 0 && tau < 10*frame {
					continue
				}
				d := &Data{Labels: []string{"+", "-"}, Records: []Record{{ID: "pp", Time: []float64{1, 1 + tau}, Label: []uint8{0, 0}, End: math.NaN()}}}
				want, err := eu.LogLik(d)
				if err != nil {
					t.Fatal(err)
				}
				got, err := es.LogLik(d)
				if err != nil {
					t.Errorf("path %d frame %g tau %g: %v (uniformisation %.12g)", path, frame, tau, err, want)
					continue
				}
				if coreRelErr(got, want, 1) > 1e-9 {
					t.Errorf("path %d frame %g tau %g: spectral ln psi %.15g, uniformisation %.15g", path, frame, tau, got, want)
				}
				gl, gs, err := es.Gradient(d)
				if err != nil {
					t.Fatal(err)
				}
				if coreRelErr(gl, got, 1) > 1e-12 {
					t.Errorf("path %d tau %g: ln L from Gradient %.15g, LogLik %.15g", path, tau, gl, got)
				}
				_, gu, err := eu.Gradient(d)
				if err != nil {
					t.Fatal(err)
				}
				for i := range gs.LogRate {
					if math.Abs(gs.LogRate[i]-gu.LogRate[i]) > 1e-9*math.Max(math.Abs(gu.LogRate[i]), 1) {
						t.Errorf("path %d frame %g tau %g: d lnL/d ln w[%d] spectral %.15g, uniformisation %.15g", path, frame, tau, i, gs.LogRate[i], gu.LogRate[i])
					}
				}
			}
		}
	}
}

// TestStartLawStiff: the Evaluator's start law (nu, the stationary
// post-event law) and the Predictor's agree to 1e-12 entry-wise relative
// (floor 1e-300) on stiff networks (rates over 12 decades, missed events,
// dead time): both now use the subtraction-free elimination for
// (-D0)^{-1} and the GTH reduction for the stationary law, each accurate
// entry-wise to a few ulps times the number of states; before, the
// Evaluator used LU for both (accepting cond up to 1e15) and clipped
// negative entries of nu.
func TestStartLawStiff(t *testing.T) {
	rng := newTestRand(91, 92)
	worst := 0.0
	for i := 0; i < 6; i++ {
		net := coreRandomNet(rng, 5, 2, 12, 0.9)
		k, err := NewKernels(net)
		if err != nil {
			t.Fatal(err)
		}
		in := Instrument{DeadTime: 1e-3 * float64(i%2)}
		pr, err := NewPredictor(k, in)
		if err != nil {
			t.Fatal(err)
		}
		ev, err := NewEvaluator(k, Options{Instrument: in})
		if err != nil {
			t.Fatal(err)
		}
		phi := pr.StationaryPostEvent()
		for s := range phi {
			r := coreRelErr(ev.nu[s], phi[s], 1e-300)
			worst = math.Max(worst, r)
			if r > 1e-12 {
				t.Errorf("net %d: post-event law[%d] evaluator %.17g, predictor %.17g", i, s, ev.nu[s], phi[s])
			}
		}
	}
	t.Logf("worst relative difference %.3g", worst)
}

func newTestRand(a, b uint64) *rand.Rand { return rand.New(rand.NewPCG(a, b)) }

// TestProgrammeMemoryCap: the count-stopped and fixed-time programmes are
// capped on values of c times states (obsMaxCells per working array,
// 256 MiB for a programme's two arrays), not on values of c alone. A
// window of n = 5e6 events with weights +-1 on a ring with 2 post-event
// states has 1e7 values of c (accepted before, which then ran a
// programme of 5e6 steps over 2e7 cells) and 2e7 cells (> 2^24): an
// error now, returned at once.
func TestProgrammeMemoryCap(t *testing.T) {
	net := coreRing4()
	k, err := NewKernels(net)
	if err != nil {
		t.Fatal(err)
	}
	pr, err := NewPredictor(k, Instrument{})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := pr.CountStopped(5_000_000, []int{1, -1}, false); err == nil || !strings.Contains(err.Error(), "MiB") {
		t.Errorf("count-stopped n = 5e6: error %v, want the memory cap", err)
	}
	if _, err := pr.CountStopped(20, []int{1, -1}, false); err != nil {
		t.Errorf("count-stopped n = 20: %v", err)
	}
}

// TestBackwardErrorCause: an impossible record on the general path's
// gradient names the record and keeps the cause from the backward
// recursion (before, the cause was dropped).
func TestBackwardErrorCause(t *testing.T) {
	ring := coreIrreversibleRing(3, 1)
	ring.Labels = append(ring.Labels, models.Label{Name: "-", Detect: 1})
	d := &Data{Labels: []string{"+", "-"}, Records: []Record{{ID: "r9", Time: []float64{1, 2, 3}, Label: []uint8{0, 0, 1}, End: math.NaN()}}}
	_, _, err := LogLikGrad(ring, d, Options{Path: PathGeneral})
	if err == nil || !strings.Contains(err.Error(), `record "r9"`) || !strings.Contains(err.Error(), "backward") {
		t.Errorf("error %v, want one naming record r9 and the backward recursion's cause", err)
	}
}

// TestFrameBoundaries: with frames (timestamps are frame starts, the
// record starts at 0, a frame start) a stationary start gives the first
// event the box [t_1, t_1 + F] (before: [t_1 - F/2, t_1 + F/2], off by
// half a frame), and a censored end is taken at End - t_n - F/2. Checked
// against the same quantities from the Propagator's integral and
// exponential (Pade, an independent route): a one-event record gives
// ln(pi int_{t1}^{t1+F} e^{D0 s} ds D_l 1) + ln(e_to(l) e^{D0 T} 1),
// T = End - t1 - F/2, to 1e-12 relative (both sides exact to ~1e-15 per
// entry; two logs of O(1) values).
func TestFrameBoundaries(t *testing.T) {
	net := coreRing4()
	k, err := NewKernels(net)
	if err != nil {
		t.Fatal(err)
	}
	const F, t1, end = 0.1, 0.3, 1.25
	pp, err := NewPropagator(k.D0, ExpPade)
	if err != nil {
		t.Fatal(err)
	}
	var in, ex mat.Dense
	if err := pp.Integral(&in, t1, t1+F); err != nil {
		t.Fatal(err)
	}
	if err := pp.Exp(&ex, end-t1-F/2); err != nil {
		t.Fatal(err)
	}
	pi, err := net.Stationary()
	if err != nil {
		t.Fatal(err)
	}
	for l := 0; l < 2; l++ {
		tr := k.Edges[l][0]
		first := 0.0
		for i := range pi {
			first += pi[i] * in.At(i, tr.From) * tr.Rate
		}
		surv := 0.0
		for j := 0; j < k.N; j++ {
			surv += ex.At(tr.To, j)
		}
		want := math.Log(first) + math.Log(surv)
		d := &Data{Labels: []string{"+", "-"}, Records: []Record{{ID: "b", Time: []float64{t1}, Label: []uint8{uint8(l)}, End: end}}}
		for _, path := range []PathMode{PathFast, PathGeneral} {
			for _, m := range []ExpMethod{ExpAuto, ExpPade} {
				if path == PathFast && m == ExpPade {
					continue
				}
				got, err := LogLik(net, d, Options{Start: StartStationary, Path: path, Method: m, Instrument: Instrument{Frame: F}})
				if err != nil {
					t.Fatal(err)
				}
				if coreRelErr(got, want, 1) > 1e-12 {
					t.Errorf("label %d path %d %v: ln L %.15g, want %.15g", l, path, m, got, want)
				}
			}
		}
	}
}
