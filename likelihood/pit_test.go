package likelihood

import (
	"math"
	"math/rand/v2"
	"slices"
	"strings"
	"testing"

	"edgewise/models"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/stat/distuv"
)

// pitOf returns the transforms of d under net with opt.
func pitOf(t *testing.T, net *models.Network, d *Data, opt Options, seed uint64) *PIT {
	t.Helper()
	ev, err := NewNetworkEvaluator(net, opt)
	if err != nil {
		t.Fatal(err)
	}
	p, err := ev.PIT(d, seed)
	if err != nil {
		t.Fatal(err)
	}
	return p
}

// ksDistanceUniform is the one-sample Kolmogorov-Smirnov distance of u
// from the uniform law (test helper; the package infer has the test).
func ksDistanceUniform(u []float64) float64 {
	s := slices.Clone(u)
	slices.Sort(s)
	n := float64(len(s))
	d := 0.0
	for i, v := range s {
		d = math.Max(d, math.Max(float64(i+1)/n-v, v-float64(i)/n))
	}
	return d
}

// TestPITErlang: on a totally irreversible ring of N states with every
// rate k and "+" on one step, each gap is Erlang(N, k) distributed
// (design notes, section 8), so the transform of a gap g is the Erlang
// distribution function at g, here gonum's distuv.Gamma{N, k}.CDF. D0 is a
// Jordan block: the automatic route falls back to Pade and the general
// path. (A dead time is not checked here: events lost during it do not
// stop the ring, so the gap is not delta plus an Erlang time; the dead
// time is checked against the dense route in TestPITBruteForce.)
// Tolerance 1e-11 absolute (Pade and Van Loan's block exponential, errors
// ~1e-15 relative on these small norms).
func TestPITErlang(t *testing.T) {
	const k = 1.7
	for _, n := range []int{2, 3, 5} {
		net := coreIrreversibleRing(n, k)
		d := coreSimulate(t, net, uint64(10+n), 2, 300, 0)
		ev, err := NewNetworkEvaluator(net, Options{})
		if err != nil {
			t.Fatal(err)
		}
		if ev.Method() != ExpPade || ev.Fast() {
			t.Fatalf("N=%d: route %v fast %v, want the Pade fallback", n, ev.Method(), ev.Fast())
		}
		p, err := ev.PIT(d, 0)
		if err != nil {
			t.Fatal(err)
		}
		erl := distuv.Gamma{Alpha: float64(n), Beta: k}
		i := 0
		for _, r := range d.Records {
			for j := 1; j < r.Len(); j++ {
				want := erl.CDF(r.Time[j] - r.Time[j-1])
				if math.Abs(p.U[i]-want) > 1e-11 {
					t.Errorf("N=%d gap %d: u = %.15g, Erlang CDF %.15g", n, i, p.U[i], want)
				}
				i++
			}
		}
		if i != len(p.U) || p.Randomised {
			t.Errorf("N=%d: %d values for %d gaps", n, len(p.U), i)
		}
	}
}

// TestPITHypoexponential: with unequal rates k_i on the irreversible ring
// the gap is a sum of independent exponentials, with distribution function
// 1 - sum_i prod_{j != i} k_j/(k_j - k_i) e^{-k_i t} (hypoexponential,
// design notes section 8). The spectral route and the fast path apply.
// Tolerance 1e-12 (the closed form's coefficients are below 10 for these
// well-separated rates).
func TestPITHypoexponential(t *testing.T) {
	ks := []float64{1, 2, 3.5, 5}
	net := coreIrreversibleRing(4, 1)
	for i := range net.Edges {
		net.Edges[i].Rate[0] = ks[i]
	}
	d := coreSimulate(t, net, 3, 1, 2000, 0)
	ev, err := NewNetworkEvaluator(net, Options{})
	if err != nil {
		t.Fatal(err)
	}
	if !ev.Fast() {
		t.Fatal("fast path expected")
	}
	p, err := ev.PIT(d, 0)
	if err != nil {
		t.Fatal(err)
	}
	cdf := func(x float64) float64 {
		s := 0.0
		for i, ki := range ks {
			c := 1.0
			for j, kj := range ks {
				if j != i {
					c *= kj / (kj - ki)
				}
			}
			s += c * math.Exp(-ki*x)
		}
		return 1 - s
	}
	r := d.Records[0]
	worst := 0.0
	for j := 1; j < r.Len(); j++ {
		worst = math.Max(worst, math.Abs(p.U[j-1]-cdf(r.Time[j]-r.Time[j-1])))
	}
	if worst > 1e-12 {
		t.Errorf("largest difference from the hypoexponential CDF %g", worst)
	}
	// Near 0 the error shrinks with the gap: F(t) = (prod k) t^4/4! (1 -
	// (sum k) t/5 + O(t^2)) = 1.458e-16 at t = 1e-4, and the expm1 terms
	// (each ~ k t) cancel to it with an absolute error ~ 1e-16 * 1e-4 *
	// sum |h|, not the ~1e-16 of 1 - S (which would return 0 or 2e-16).
	tiny := &Data{Labels: []string{"+"}, Records: []Record{{Time: []float64{0, 1e-4}, Label: []uint8{0, 0}, End: math.NaN()}}}
	pt, err := ev.PIT(tiny, 0)
	if err != nil {
		t.Fatal(err)
	}
	want := 35 * math.Pow(1e-4, 4) / 24 * (1 - 11.5e-4/5) // leading terms of the series
	if math.Abs(pt.U[0]-want) > 1e-18 {
		t.Errorf("F(1e-4) = %.6g, series %.6g", pt.U[0], want)
	}
}

// pitBrute computes the transforms of d under net with dead time delta
// and frame length frame by a separate dense route: gonum's mat.Exp for
// exp(L delta) and exp(D0 t), (-D0)^{-1} by mat.Inverse, int_0^t exp(D0 s)
// ds = (-D0)^{-1} (I - exp(D0 t)), the start law from the stationary law
// of the post-event chain by a linear solve, and the forward recursion
// alpha <- alpha exp(L delta) E D_l normalised, E the exponential at the
// gap or the integral over the frame box.
func pitBrute(t *testing.T, net *models.Network, d *Data, delta, frame float64, seed uint64) []float64 {
	n := net.NumStates()
	nl := len(net.Labels)
	lg := mat.NewDense(n, n, nil)
	d0 := mat.NewDense(n, n, nil)
	dl := make([]*mat.Dense, nl)
	for l := range dl {
		dl[l] = mat.NewDense(n, n, nil)
	}
	for _, e := range net.Edges {
		for dir := 0; dir < 2; dir++ {
			a, b := e.From, e.To
			if dir == 1 {
				a, b = b, a
			}
			w := e.Rate[dir]
			lg.Set(a, b, lg.At(a, b)+w)
			lg.Set(a, a, lg.At(a, a)-w)
			d0.Set(a, a, d0.At(a, a)-w)
			if l := e.Label[dir]; l >= 0 {
				p := net.Labels[l].Detect
				dl[l].Set(a, b, dl[l].At(a, b)+p*w)
				d0.Set(a, b, d0.At(a, b)+(1-p)*w)
			} else {
				d0.Set(a, b, d0.At(a, b)+w)
			}
		}
	}
	var g, am, negD0 mat.Dense
	var ld mat.Dense
	ld.Scale(delta, lg)
	g.Exp(&ld)
	negD0.Scale(-1, d0)
	if err := am.Inverse(&negD0); err != nil {
		t.Fatal(err)
	}
	expD0 := func(s float64) *mat.Dense {
		var x, e mat.Dense
		x.Scale(s, d0)
		e.Exp(&x)
		return &e
	}
	integral := func(s float64) *mat.Dense { // int_0^s exp(D0 u) du
		var id, m mat.Dense
		id.Sub(obsIdentity(n), expD0(s))
		m.Mul(&am, &id)
		return &m
	}
	// Stationary post-event law nu K = nu, K = G A sum_l D_l.
	dsum := mat.NewDense(n, n, nil)
	for _, m := range dl {
		dsum.Add(dsum, m)
	}
	var ga, kk mat.Dense
	ga.Mul(&g, &am)
	kk.Mul(&ga, dsum)
	sys := mat.NewDense(n, n, nil)
	for i := 0; i < n; i++ {
		for j := 0; j < n; j++ {
			v := kk.At(j, i)
			if i == j {
				v--
			}
			sys.Set(i, j, v)
		}
	}
	rhs := mat.NewVecDense(n, nil)
	for j := 0; j < n; j++ {
		sys.Set(n-1, j, 1)
	}
	rhs.SetVec(n-1, 1)
	var nu mat.VecDense
	if err := nu.SolveVec(sys, rhs); err != nil {
		t.Fatal(err)
	}
	row := func(v []float64, m mat.Matrix) []float64 {
		out := make([]float64, n)
		for j := 0; j < n; j++ {
			for i := 0; i < n; i++ {
				out[j] += v[i] * m.At(i, j)
			}
		}
		return out
	}
	norm := func(v []float64) {
		s := 0.0
		for _, x := range v {
			s += x
		}
		for i := range v {
			v[i] /= s
		}
	}
	var out []float64
	for r, rec := range d.Records {
		alpha := row(row(nu.RawVector().Data, &ga), dl[rec.Label[0]])
		norm(alpha)
		for k := 1; k < rec.Len(); k++ {
			l := rec.Label[k]
			x := row(alpha, &g)
			bcol := make([]float64, n)
			for i := 0; i < n; i++ {
				for j := 0; j < n; j++ {
					bcol[i] += dl[l].At(i, j)
				}
			}
			F := func(s float64) float64 {
				if s <= 0 {
					return 0
				}
				num, den := 0.0, 0.0
				xi, xa := row(x, integral(s)), row(x, &am)
				for i := range bcol {
					num += xi[i] * bcol[i]
					den += xa[i] * bcol[i]
				}
				return num / den
			}
			gap := rec.Time[k] - rec.Time[k-1]
			var e *mat.Dense
			if frame == 0 {
				out = append(out, F(gap-delta))
				e = expD0(gap - delta)
			} else {
				lo := math.Max(math.Max(gap-frame/2, 0)-delta, 0)
				hi := gap + frame/2 - delta
				flo, fhi := F(lo), F(hi)
				out = append(out, flo+pitDraw(seed, r, k)*(fhi-flo))
				var m mat.Dense
				m.Sub(integral(hi), integral(lo))
				e = &m
			}
			alpha = row(row(x, e), dl[l])
			norm(alpha)
		}
	}
	return out
}

// TestPITBruteForce: the transforms on data whose labels sit on two edges
// each (general path), with missed events, with and without dead time and
// frames, against pitBrute's separate dense computation. Tolerance 1e-9
// absolute: both routes are accurate to ~1e-13, and the filtered law is
// carried over a few hundred events, each step well conditioned.
func TestPITBruteForce(t *testing.T) {
	rng := rand.New(rand.NewPCG(31, 32))
	for i, inst := range []Instrument{{}, {DeadTime: 0.05}, {Frame: 0.1}, {DeadTime: 0.02, Frame: 0.05}} {
		net := coreMultiNet(rng, 5, 2, 1, 0.9)
		d := coreSimulate(t, net, uint64(40+i), 2, 200, inst.DeadTime)
		if inst.Frame > 0 {
			d = coreQuantise(d, inst.Frame)
		}
		p := pitOf(t, net, d, Options{Instrument: inst}, 77)
		want := pitBrute(t, net, d, inst.DeadTime, inst.Frame, 77)
		if len(p.U) != len(want) || p.Randomised != (inst.Frame > 0) {
			t.Fatalf("case %d: %d values, want %d", i, len(p.U), len(want))
		}
		worst := 0.0
		for j := range want {
			worst = math.Max(worst, math.Abs(p.U[j]-want[j]))
		}
		if worst > 1e-9 {
			t.Errorf("case %d (%+v): largest difference from the dense route %g", i, inst, worst)
		}
	}
}

// TestPITFastEqualsGeneral: on single-edge data the fast path and the
// general path give the same transforms under every instrument and start
// option (the general path's filtered law is then a unit vector).
// Tolerance 1e-10 absolute (the same decomposition, different products).
func TestPITFastEqualsGeneral(t *testing.T) {
	coreFastGeneralCases(t, 300, func(i, oi int, net *models.Network, opt Options, d *Data) {
		of, og := opt, opt
		of.Path, og.Path = PathFast, PathGeneral
		uf := pitOf(t, net, d, of, 5)
		ug := pitOf(t, net, d, og, 5)
		if len(uf.U) != len(ug.U) || len(uf.U) != 600-2+2*int(opt.Start) {
			t.Fatalf("net %d opt %d: %d and %d values", i, oi, len(uf.U), len(ug.U))
		}
		for j := range uf.U {
			if math.Abs(uf.U[j]-ug.U[j]) > 1e-10 {
				t.Errorf("net %d opt %d value %d: fast %.15g, general %.15g", i, oi, j, uf.U[j], ug.U[j])
				break
			}
		}
	})
}

// TestPITUniform: on records simulated from the model the transforms are
// uniform: the one-sample Kolmogorov-Smirnov distance stays below the
// 0.1% critical value 1.95/sqrt(n) (Kolmogorov's limit law, from memory:
// P(sqrt(n) D > 1.95) = 0.001) on both paths, with missed events, a dead
// time, labels on two edges and (randomised) frames. Fixed seeds, so the
// outcome is deterministic; a wrong conditioning (for example the filtered
// law without exp(L delta)) fails it.
func TestPITUniform(t *testing.T) {
	rng := rand.New(rand.NewPCG(51, 52))
	cases := []struct {
		net  *models.Network
		inst Instrument
	}{
		{coreRandomNet(rng, 4, 1, 1, 1), Instrument{}},
		{coreRandomNet(rng, 4, 1, 1, 0.8), Instrument{DeadTime: 0.1}},
		{coreMultiNet(rng, 5, 2, 1, 0.9), Instrument{DeadTime: 0.05}},
		{coreRandomNet(rng, 4, 0, 1, 1), Instrument{Frame: 0.02}},
	}
	for i, c := range cases {
		d := coreSimulate(t, c.net, uint64(60+i), 4, 5000, c.inst.DeadTime)
		if c.inst.Frame > 0 {
			d = coreQuantise(d, c.inst.Frame)
		}
		p := pitOf(t, c.net, d, Options{Instrument: c.inst}, 9)
		dist := ksDistanceUniform(p.U)
		t.Logf("case %d: sqrt(n) D = %.6f over %d gaps", i, math.Sqrt(float64(len(p.U)))*dist, len(p.U))
		if math.Sqrt(float64(len(p.U)))*dist > 1.95 {
			t.Errorf("case %d: sqrt(n) D = %.3f: not uniform", i, math.Sqrt(float64(len(p.U)))*dist)
		}
		// Ignoring the dead time in the model is detected.
		if c.inst.DeadTime > 0 {
			q := pitOf(t, c.net, d, Options{}, 9)
			if bad := math.Sqrt(float64(len(q.U))) * ksDistanceUniform(q.U); bad < 3 {
				t.Errorf("case %d: without the dead time sqrt(n) D = %.3f, want a clear rejection", i, bad)
			}
		}
	}
}

// TestPITDeterministic: identical transforms for 1 and 3 workers and for
// several work items (records longer than 2^15 events), on both paths;
// the randomised transform depends on the seed.
func TestPITDeterministic(t *testing.T) {
	rng := rand.New(rand.NewPCG(10, 11))
	net := coreRandomNet(rng, 4, 1, 1, 1)
	d := coreQuantise(coreSimulate(t, net, 5, 3, 40000, 0), 0.05)
	for _, path := range []PathMode{PathFast, PathGeneral} {
		a := pitOf(t, net, d, Options{Workers: 1, Path: path, Instrument: Instrument{Frame: 0.05}}, 3)
		b := pitOf(t, net, d, Options{Workers: 3, Path: path, Instrument: Instrument{Frame: 0.05}}, 3)
		c := pitOf(t, net, d, Options{Workers: 3, Path: path, Instrument: Instrument{Frame: 0.05}}, 4)
		if !slices.Equal(a.U, b.U) {
			t.Errorf("path %v: workers change the result", path)
		}
		if slices.Equal(a.U, c.U) {
			t.Errorf("path %v: the seed does not change the randomised transform", path)
		}
		if a.Offsets[3] != len(a.U) || a.Offsets[1] != 39999 {
			t.Errorf("offsets %v", a.Offsets)
		}
	}
}

// TestPITBadInput: errors name the record and the event.
func TestPITBadInput(t *testing.T) {
	net := coreIrreversibleRing(3, 1)
	ev, err := NewNetworkEvaluator(net, Options{Instrument: Instrument{DeadTime: 0.5}})
	if err != nil {
		t.Fatal(err)
	}
	d := &Data{Labels: []string{"+"}, Records: []Record{{ID: "r1", Time: []float64{0, 1, 1.2}, Label: []uint8{0, 0, 0}, End: math.NaN()}}}
	if _, err := ev.PIT(d, 0); err == nil || !strings.Contains(err.Error(), `record "r1" event 3`) || !strings.Contains(err.Error(), "dead time") {
		t.Errorf("short gap: %v", err)
	}
	d.Labels = []string{"x"}
	if _, err := ev.PIT(d, 0); err == nil || !strings.Contains(err.Error(), `"x"`) {
		t.Errorf("unknown label: %v", err)
	}
	if _, err := ev.PIT(&Data{}, 0); err == nil {
		t.Error("empty data accepted")
	}
	// A - after a + on a ring whose - direction is never detected... use
	// a two-state chain: + must be followed by -.
	ch := &models.Network{States: []string{"A", "B"}, Labels: []models.Label{{Name: "+", Detect: 1}, {Name: "-", Detect: 1}},
		Edges: []models.Edge{{From: 0, To: 1, Rate: [2]float64{1, 2}, Label: [2]int{0, 1}}}}
	for _, path := range []PathMode{PathFast, PathGeneral} {
		e2, err := NewNetworkEvaluator(ch, Options{Path: path})
		if err != nil {
			t.Fatal(err)
		}
		dd := &Data{Labels: []string{"+", "-"}, Records: []Record{{ID: "c", Time: []float64{0, 1, 2}, Label: []uint8{0, 1, 1}, End: math.NaN()}}}
		if _, err := e2.PIT(dd, 0); err == nil || !strings.Contains(err.Error(), `record "c" event 3`) || !strings.Contains(err.Error(), "impossible") {
			t.Errorf("path %v: impossible pair: %v", path, err)
		}
	}
}

// BenchmarkPITRing4: transforms of 10^6 events of the 4-state ring of the
// likelihood benchmarks (fast path, one worker).
func BenchmarkPITRing4(b *testing.B) { benchPIT(b, coreRing4(), Options{Workers: 1}) }

// BenchmarkPITGeneral10: the same on the 10-state network with labels on
// two edges each (general path).
func BenchmarkPITGeneral10(b *testing.B) { benchPIT(b, coreNet10(), Options{Workers: 1}) }

func benchPIT(b *testing.B, net *models.Network, opt Options) {
	d := coreSimulate(b, net, 1, 1, benchEvents, 0)
	ev, err := NewNetworkEvaluator(net, opt)
	if err != nil {
		b.Fatal(err)
	}
	b.ResetTimer()
	for b.Loop() {
		if _, err := ev.PIT(d, 1); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/float64(d.Events()), "ns/event")
}

// TestPITRoutesAgree: the spectral sum and the uniformisation route (the
// fallback for pairs whose eigen-terms would cancel) give the same F(t)
// for every label pair of several random networks, rates over two decades,
// at gaps from 1e-3 to 30 mean holding times. Tolerance 1e-10 absolute
// (uniformisation's truncation is below 1e-25; the spectral error is
// estimated below pitTol = 1e-10 for every pair that takes that route).
func TestPITRoutesAgree(t *testing.T) {
	rng := rand.New(rand.NewPCG(71, 72))
	nets := 0
	for i := 0; i < 6; i++ {
		net := coreRandomNet(rng, 3+i%4, i%3, 2, 0.9)
		ev, err := NewNetworkEvaluator(net, Options{Instrument: Instrument{DeadTime: 0.01 * float64(i%2)}})
		if err != nil {
			t.Fatal(err)
		}
		if !ev.Fast() {
			continue
		}
		tb := ev.pitTables()
		ws := ev.newWork(false)
		np1 := ev.nl + 1
		checked := 0
		for pr := range tb.h {
			if tb.h[pr] == nil || tb.exact[pr] || !(tb.den[pr] > 0) {
				continue
			}
			for _, tt := range []float64{1e-3, 0.01, 0.1, 0.5, 1, 3, 10, 30} {
				us := ev.pitSpectral(tb.h[pr], tb.den[pr], tt)
				ud, err := ev.pitDense(ws, ev.avec[pr/np1], ev.bvec[pr%np1], tb.den[pr], tt)
				if err != nil {
					t.Fatal(err)
				}
				if math.Abs(us-ud) > 1e-10 {
					t.Errorf("net %d pair %d t=%g: spectral %.15g, uniformisation %.15g", i, pr, tt, us, ud)
				}
				checked++
			}
		}
		if checked == 0 {
			t.Errorf("net %d: no pair checked", i)
		}
		nets++
	}
	if nets < 4 {
		t.Errorf("only %d networks on the spectral route", nets)
	}
}
