package likelihood

import (
	"math"
	"math/rand/v2"
	"testing"

	"edgewise/models"
)

// coreFDGrad returns the central finite-difference gradient of ln L with
// respect to the log-rates and detection probabilities, with Richardson
// extrapolation: (4 D(h/2) - D(h)) / 3, truncation error O(h^4).
func coreFDGrad(t *testing.T, net *models.Network, d *Data, opt Options) *Gradient {
	t.Helper()
	f := func(n *models.Network) float64 {
		v, err := LogLik(n, d, opt)
		if err != nil {
			t.Fatal(err)
		}
		return v
	}
	const h = 1e-3
	cd := func(g func(float64) *models.Network, h float64) float64 {
		return (f(g(h)) - f(g(-h))) / (2 * h)
	}
	rich := func(g func(float64) *models.Network) float64 {
		return (4*cd(g, h/2) - cd(g, h)) / 3
	}
	out := &Gradient{LogRate: make([]float64, 2*len(net.Edges)), Detect: make([]float64, len(net.Labels))}
	for idx := range out.LogRate {
		if net.Edges[idx/2].Rate[idx%2] == 0 {
			continue
		}
		out.LogRate[idx] = rich(func(x float64) *models.Network { return coreScaleRate(net, idx, math.Exp(x)) })
	}
	for l := range out.Detect {
		p := net.Labels[l].Detect
		sc := math.Min(p, 1-p) / 4
		step := func(x float64) *models.Network {
			c := net.Clone()
			c.Labels[l].Detect = p + x*sc
			return c
		}
		if p == 1 {
			// Validate forbids p > 1: a fourth-order one-sided difference,
			// f'(0) = (-25 f0 + 48 f1 - 36 f2 + 16 f3 - 3 f4) / (12 s) + O(s^4).
			// ln L bends sharply near p = 1 (f'' ~ 2500 in the ring cases,
			// varying on a scale ~0.01), so the step is small: s = 1e-5
			// gives rounding ~ eps |ln L| 10 / s ~ 1e-7 and truncation
			// ~ f^(5) s^4 < 1e-10.
			s := 1e-5
			g := func(k float64) float64 {
				c := net.Clone()
				c.Labels[l].Detect = 1 - k*s
				return f(c)
			}
			out.Detect[l] = -(-25*g(0) + 48*g(1) - 36*g(2) + 16*g(3) - 3*g(4)) / (12 * s)
			continue
		}
		out.Detect[l] = rich(step) / sc
	}
	return out
}

// TestGradientFiniteDifferences: the exact gradient against central finite
// differences (a test oracle only) on random networks, with missed events,
// dead time, frames, both start modes, censored ends, both paths, and the
// dense (Pade) route. Tolerance 1e-6 relative to max(|g|, 1): the
// extrapolated differences have truncation error ~h^4 = 1e-12 and rounding
// error ~eps |ln L| / h ~ 1e-10 for |ln L| ~ 10^3.
func TestGradientFiniteDifferences(t *testing.T) {
	cases := []struct {
		name    string
		n       int
		chords  int
		multi   bool
		detect  float64
		opt     Options
		end     bool
		wantAll bool
	}{
		{name: "fast/exact", n: 4, detect: 1},
		{name: "general/exact", n: 4, detect: 1, opt: Options{Path: PathGeneral}},
		{name: "fast/missed", n: 5, chords: 2, detect: 0.8},
		{name: "general/missed", n: 5, chords: 2, detect: 0.8, opt: Options{Path: PathGeneral}},
		{name: "fast/dead", n: 4, chords: 1, detect: 1, opt: Options{Instrument: Instrument{DeadTime: 0.05}}},
		{name: "general/dead/missed", n: 4, chords: 1, detect: 0.9, opt: Options{Path: PathGeneral, Instrument: Instrument{DeadTime: 0.05}}},
		{name: "fast/frames", n: 4, chords: 1, detect: 1, opt: Options{Instrument: Instrument{Frame: 0.1}}},
		{name: "general/frames/dead", n: 4, chords: 1, detect: 0.9, opt: Options{Path: PathGeneral, Instrument: Instrument{Frame: 0.1, DeadTime: 0.02}}},
		{name: "fast/stationary/end", n: 4, chords: 1, detect: 1, opt: Options{Start: StartStationary}, end: true},
		{name: "general/stationary/end/dead", n: 4, chords: 1, detect: 0.9, opt: Options{Path: PathGeneral, Start: StartStationary, Instrument: Instrument{DeadTime: 0.03}}, end: true},
		{name: "pade/missed/end", n: 4, chords: 1, detect: 0.85, opt: Options{Method: ExpPade, Instrument: Instrument{DeadTime: 0.02}}, end: true},
		{name: "multi/exact", n: 5, chords: 1, multi: true, detect: 1},
		{name: "multi/missed/dead", n: 5, chords: 1, multi: true, detect: 0.9, opt: Options{Instrument: Instrument{DeadTime: 0.03}}},
		{name: "multi/frames/end", n: 4, chords: 1, multi: true, detect: 1, opt: Options{Instrument: Instrument{Frame: 0.05}}, end: true},
		{name: "multi/stationary/dead", n: 4, chords: 1, multi: true, detect: 0.95, opt: Options{Start: StartStationary, Instrument: Instrument{DeadTime: 0.03}}},
		{name: "multi/pade/dead", n: 4, chords: 1, multi: true, detect: 0.9, opt: Options{Method: ExpPade, Instrument: Instrument{DeadTime: 0.03}}},
		{name: "pade/frames", n: 3, detect: 0.9, opt: Options{Method: ExpPade, Instrument: Instrument{Frame: 0.1}}},
	}
	for ci, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			rng := rand.New(rand.NewPCG(uint64(ci+1), 7))
			net := coreRandomNet(rng, c.n, c.chords, 1.5, c.detect)
			if c.multi {
				net = coreMultiNet(rng, c.n, c.chords, 1.5, c.detect)
			}
			d := coreSimulate(t, net, uint64(ci+10), 3, 80, c.opt.Instrument.DeadTime)
			if c.opt.Instrument.Frame > 0 {
				d = coreQuantise(d, c.opt.Instrument.Frame)
			}
			if c.end {
				for i := range d.Records {
					r := &d.Records[i]
					r.End = r.Time[len(r.Time)-1] + 0.7
				}
			}
			ev, err := NewNetworkEvaluator(net, c.opt)
			if err != nil {
				t.Fatal(err)
			}
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
			fd := coreFDGrad(t, net, d, c.opt)
			for i := range g.LogRate {
				if math.Abs(g.LogRate[i]-fd.LogRate[i]) > 1e-6*math.Max(math.Abs(fd.LogRate[i]), 1) {
					t.Errorf("d lnL/d ln w[%d] = %.12g, finite differences %.12g (fast %v, method %v)", i, g.LogRate[i], fd.LogRate[i], ev.Fast(), ev.Method())
				}
			}
			for l := range g.Detect {
				if math.Abs(g.Detect[l]-fd.Detect[l]) > 1e-6*math.Max(math.Abs(fd.Detect[l]), 1) {
					t.Errorf("d lnL/d p[%d] = %.12g, finite differences %.12g", l, g.Detect[l], fd.Detect[l])
				}
			}
		})
	}
}

// TestModelGradient: the model-level gradient (chain rule through
// models.Model.Jacobian) against central finite differences in the free
// parameters x, to 1e-6 relative (same error budget as
// TestGradientFiniteDifferences). Models: ring3 (a fixed rate) with its
// shipped records, and shared-label (labels on two edges, a free
// detection probability shared by both labels) with simulated records.
func TestModelGradient(t *testing.T) {
	ring := coreLoadModel(t, "../testdata/ring3.toml")
	shared := coreLoadModel(t, "../testdata/shared-label.toml")
	snet, err := shared.Network(shared.Start())
	if err != nil {
		t.Fatal(err)
	}
	cases := []struct {
		m   *models.Model
		d   *Data
		opt Options
	}{
		{ring, coreReadCSV(t, "../testdata/likelihood/ring3-300.csv"), Options{}},
		{ring, coreReadCSV(t, "../testdata/likelihood/ring3-300.csv"), Options{Path: PathGeneral, Instrument: Instrument{DeadTime: 0.001}}},
		{shared, coreSimulate(t, snet, 3, 2, 150, 0.01), Options{Instrument: Instrument{DeadTime: 0.01}}},
	}
	for _, c := range cases {
		m, d, opt := c.m, c.d, c.opt
		x := m.Start()
		ll, g, err := ModelLogLikGrad(m, x, d, opt)
		if err != nil {
			t.Fatal(err)
		}
		if len(g) != len(x) {
			t.Fatalf("gradient has %d entries for %d free parameters", len(g), len(x))
		}
		for j := range x {
			f := func(h float64) float64 {
				y := append([]float64(nil), x...)
				y[j] *= math.Exp(h)
				v, err := ModelLogLik(m, y, d, opt)
				if err != nil {
					t.Fatal(err)
				}
				return v
			}
			cd := func(h float64) float64 { return (f(h) - f(-h)) / (2 * h) }
			fd := (4*cd(5e-4) - cd(1e-3)) / 3 / x[j] // d/dx = d/d ln x / x
			if math.Abs(g[j]-fd) > 1e-6*math.Max(math.Abs(fd), 1) {
				t.Errorf("%s: d lnL/d x[%d] (%s) = %.12g, finite differences %.12g (ln L %g)", m.Name, j, m.Free()[j], g[j], fd, ll)
			}
		}
	}
}

// TestLongGap: a gap thousands of mean waiting times long does not
// underflow on the spectral route (exp(D0 t) is carried as e^{lmax t}
// times a bounded matrix); fast and general paths agree on it, and its
// ln psi is close to the asymptote lmax t + const (checked by the
// difference of two long gaps, which must be lmax times their difference
// to 1e-9 relative: the subdominant modes have decayed by e^{-1000}).
func TestLongGap(t *testing.T) {
	rng := rand.New(rand.NewPCG(30, 31))
	net := coreRandomNet(rng, 4, 1, 1, 1)
	ev, err := NewNetworkEvaluator(net, Options{})
	if err != nil {
		t.Fatal(err)
	}
	lmax := ev.sp.lmax
	t1, t2 := 3000/-lmax, 5000/-lmax
	mk := func(gap float64) *Data {
		return &Data{Labels: []string{"+", "-"}, Records: []Record{{ID: "long", Time: []float64{0, gap}, Label: []uint8{0, 0}, End: math.NaN()}}}
	}
	var vals [2]float64
	for i, gap := range []float64{t1, t2} {
		for _, path := range []PathMode{PathFast, PathGeneral} {
			ll, err := LogLik(net, mk(gap), Options{Path: path})
			if err != nil {
				t.Fatalf("gap %g: %v", gap, err)
			}
			if math.IsInf(ll, 0) || math.IsNaN(ll) {
				t.Fatalf("gap %g: ln L = %v", gap, ll)
			}
			if path == PathFast {
				vals[i] = ll
			} else if coreRelErr(ll, vals[i], 1) > 1e-12 {
				t.Errorf("gap %g: general %.15g, fast %.15g", gap, ll, vals[i])
			}
		}
	}
	if got, want := vals[1]-vals[0], lmax*(t2-t1); coreRelErr(got, want, 1) > 1e-9 {
		t.Errorf("ln psi(t2) - ln psi(t1) = %.15g, want lmax (t2 - t1) = %.15g", got, want)
	}
}

// TestGradientRoutesAgree: the spectral gradient (eigen-coordinate sums and
// divided differences of e^{lambda t}) against the Pade route's (Van
// Loan's block exponential per interval), two independent exact methods,
// on a random network with dead time and frames, a stiff one (rates over 5
// decades) and nearly degenerate spectra (equal-rate 5-ring watched with
// p = 1e-2, 1e-3: relative eigenvalue gaps 2e-3, 2e-4, still on the
// spectral route). Tolerance 1e-8 relative to max(|g|, 1): the divided
// differences lose about eps/gap (~1e-12 here); the stiff case, where
// both routes carry rounding amplified by the spread of the rates, shows
// the largest observed difference, ~1e-9.
func TestGradientRoutesAgree(t *testing.T) {
	rng := rand.New(rand.NewPCG(80, 81))
	type gcase struct {
		name string
		net  *models.Network
		opt  Options
	}
	cases := []gcase{
		{"random/dead/frames", coreMultiNet(rng, 5, 1, 1.5, 0.9), Options{Instrument: Instrument{DeadTime: 0.02, Frame: 0.05}}},
		{"stiff", coreRandomNet(rng, 4, 1, 5, 0.95), Options{}},
		{"near-degenerate-2e-3", coreEqualRing(5, 1e-2), Options{}},
		{"near-degenerate-2e-4", coreEqualRing(5, 1e-3), Options{Start: StartStationary}},
	}
	for ci, c := range cases {
		d := coreSimulate(t, c.net, uint64(90+ci), 2, 60, c.opt.Instrument.DeadTime)
		if c.opt.Instrument.Frame > 0 {
			d = coreQuantise(d, c.opt.Instrument.Frame)
		}
		es, err := NewNetworkEvaluator(c.net, c.opt)
		if err != nil {
			t.Fatal(err)
		}
		if es.Method() != ExpSpectral {
			t.Fatalf("%s: automatic route %v, want spectral", c.name, es.Method())
		}
		op := c.opt
		op.Method = ExpPade
		ep, err := NewNetworkEvaluator(c.net, op)
		if err != nil {
			t.Fatal(err)
		}
		_, gs, err := es.Gradient(d)
		if err != nil {
			t.Fatal(err)
		}
		_, gp, err := ep.Gradient(d)
		if err != nil {
			t.Fatal(err)
		}
		for i := range gs.LogRate {
			if math.Abs(gs.LogRate[i]-gp.LogRate[i]) > 1e-8*math.Max(math.Abs(gp.LogRate[i]), 1) {
				t.Errorf("%s: d lnL/d ln w[%d]: spectral %.15g, Pade/Van Loan %.15g", c.name, i, gs.LogRate[i], gp.LogRate[i])
			}
		}
		for l := range gs.Detect {
			if math.Abs(gs.Detect[l]-gp.Detect[l]) > 1e-8*math.Max(math.Abs(gp.Detect[l]), 1) {
				t.Errorf("%s: d lnL/d p[%d]: spectral %.15g, Pade/Van Loan %.15g", c.name, l, gs.Detect[l], gp.Detect[l])
			}
		}
	}
}
