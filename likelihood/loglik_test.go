package likelihood

import (
	"encoding/json"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"edgewise/models"
)

// coreLoadModel parses a model spec from the repository's testdata.
func coreLoadModel(t testing.TB, path string) *models.Model {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	m, err := models.Parse(f, path)
	if err != nil {
		t.Fatal(err)
	}
	return m
}

// TestReferenceValues: ln L of shipped (model, records) pairs against
// values computed outside Go by two independent scripts:
// testdata/likelihood/reference.py (pure Python, 50-digit decimal
// arithmetic, Taylor-series exponentials) and reference_scipy.py
// (scipy.linalg.expm on every interval, float64; SciPy version in
// reference-scipy.json). The command that made each file is in its header.
// Tolerance 1e-12 relative: ln L is a sum of ~300 logs, each with a
// relative rounding error ~ cond(V) eps ~ 1e-15, so the sum's relative
// error is ~1e-15 (observed: <= 1.1e-15 against the decimal values, and the
// two references agree to ~1e-15); 1e-12 leaves room for other platforms
// and FMA contraction.
func TestReferenceValues(t *testing.T) {
	for _, file := range []string{"reference.json", "reference-scipy.json"} {
		t.Run(file, func(t *testing.T) { checkReference(t, file) })
	}
}

func checkReference(t *testing.T, file string) {
	raw, err := os.ReadFile(filepath.Join("..", "testdata", "likelihood", file))
	if err != nil {
		t.Fatal(err)
	}
	var ref struct {
		Python string
		Cases  []struct {
			Name      string
			Model     string
			Data      string
			Start     string
			DeadTime  float64  `json:"dead_time"`
			Frame     float64  `json:"frame"`
			EndOffset *float64 `json:"end_offset"`
			LogLik    string   `json:"loglik"`
		}
	}
	if err := json.Unmarshal(raw, &ref); err != nil {
		t.Fatal(err)
	}
	if len(ref.Cases) < 3 {
		t.Fatalf("%s has %d cases", file, len(ref.Cases))
	}
	for _, c := range ref.Cases {
		want, err := strconv.ParseFloat(c.LogLik, 64)
		if err != nil {
			t.Fatal(err)
		}
		m := coreLoadModel(t, filepath.Join("..", c.Model))
		d := coreReadCSV(t, filepath.Join("..", c.Data))
		if c.EndOffset != nil {
			for i := range d.Records {
				r := &d.Records[i]
				r.End = r.Time[len(r.Time)-1] + *c.EndOffset
			}
		}
		opt := Options{Instrument: Instrument{DeadTime: c.DeadTime, Frame: c.Frame}}
		if c.Start == "stationary" {
			opt.Start = StartStationary
		}
		for _, path := range []PathMode{PathAuto, PathGeneral} {
			for _, meth := range []ExpMethod{ExpAuto, ExpPade} {
				o := opt
				o.Path, o.Method = path, meth
				got, err := ModelLogLik(m, m.Start(), d, o)
				if err != nil {
					t.Fatalf("%s: %v", c.Name, err)
				}
				t.Logf("%s (path %d, %v): rel. err %.2g", c.Name, path, meth, coreRelErr(got, want, 1))
				if coreRelErr(got, want, 1) > 1e-12 {
					t.Errorf("%s (path %d, %v): ln L = %.15g, reference %.15g (rel. err %.2g)", c.Name, path, meth, got, want, coreRelErr(got, want, 1))
				}
			}
		}
	}
}

// TestFastEqualsGeneral: on single-edge data the fast path (a product of
// psi values) and the general forward recursion give the same ln L, under
// every instrument and start option, and the same gradient. Tolerance
// 1e-11 relative: both use the same decomposition and differ only in
// summation order (rounding ~ n eps).
func TestFastEqualsGeneral(t *testing.T) {
	coreFastGeneralCases(t, 150, func(i, oi int, net *models.Network, opt Options, d *Data) {
		of, og := opt, opt
		of.Path, og.Path = PathFast, PathGeneral
		ef, err := NewNetworkEvaluator(net, of)
		if err != nil {
			t.Fatal(err)
		}
		eg, err := NewNetworkEvaluator(net, og)
		if err != nil {
			t.Fatal(err)
		}
		lf, gf, err := ef.Gradient(d)
		if err != nil {
			t.Fatal(err)
		}
		lg, gg, err := eg.Gradient(d)
		if err != nil {
			t.Fatal(err)
		}
		if coreRelErr(lf, lg, 1) > 1e-11 {
			t.Errorf("net %d opt %d: fast %.15g, general %.15g", i, oi, lf, lg)
		}
		for j := range gf.LogRate {
			if coreRelErr(gf.LogRate[j], gg.LogRate[j], 1) > 1e-9 {
				t.Errorf("net %d opt %d: gradient[%d] fast %.12g, general %.12g", i, oi, j, gf.LogRate[j], gg.LogRate[j])
			}
		}
	})
}

// TestWorkersDeterministic: the result is bit-identical for any number of
// workers (work items depend on the data only and are summed in order),
// on both paths, with several work items (more than 2^15 events).
func TestWorkersDeterministic(t *testing.T) {
	rng := rand.New(rand.NewPCG(10, 11))
	net := coreRandomNet(rng, 4, 1, 1, 1)
	d := coreSimulate(t, net, 5, 3, 30000, 0)
	for _, path := range []PathMode{PathFast, PathGeneral} {
		var ref float64
		var refg []float64
		for i, w := range []int{1, 2, 5} {
			ev, err := NewNetworkEvaluator(net, Options{Workers: w, Path: path})
			if err != nil {
				t.Fatal(err)
			}
			ll, g, err := ev.Gradient(d)
			if err != nil {
				t.Fatal(err)
			}
			if i == 0 {
				ref, refg = ll, g.LogRate
				continue
			}
			if ll != ref {
				t.Errorf("path %d: %d workers give %.17g, 1 worker %.17g", path, w, ll, ref)
			}
			for j := range refg {
				if g.LogRate[j] != refg[j] {
					t.Errorf("path %d: %d workers: gradient[%d] %.17g != %.17g", path, w, j, g.LogRate[j], refg[j])
				}
			}
		}
	}
}

// TestMaximumAtTruth: a sanity check of the likelihood surface, not a
// proof. With 5 data sets simulated from a known network, ln L at the true
// rates exceeds ln L at rates perturbed by 30% in a random direction, on
// average over data sets and directions (the expected difference is n
// times a KL divergence > 0; with 2000 events it is tens of log-units).
func TestMaximumAtTruth(t *testing.T) {
	rng := rand.New(rand.NewPCG(12, 13))
	net := coreRandomNet(rng, 4, 1, 1, 0.9)
	total := 0.0
	for s := 0; s < 5; s++ {
		d := coreSimulate(t, net, uint64(200+s), 1, 2000, 0)
		ll0, err := LogLik(net, d, Options{})
		if err != nil {
			t.Fatal(err)
		}
		pert := net.Clone()
		for e := range pert.Edges {
			for k := 0; k < 2; k++ {
				pert.Edges[e].Rate[k] *= math.Exp(0.3 * (2*rng.Float64() - 1))
			}
		}
		ll1, err := LogLik(pert, d, Options{})
		if err != nil {
			t.Fatal(err)
		}
		total += ll0 - ll1
	}
	if !(total > 0) {
		t.Errorf("mean ln L(true) - ln L(perturbed) = %g, want > 0", total/5)
	}
}

// TestBadInput: impossible or invalid data give errors that name the
// record and the event, never a number.
func TestBadInput(t *testing.T) {
	rng := rand.New(rand.NewPCG(14, 15))
	net := coreRandomNet(rng, 3, 0, 1, 1)
	base := func() *Data {
		return &Data{Labels: []string{"+", "-"}, Records: []Record{{ID: "r1", Time: []float64{0.5, 1, 2, 3}, Label: []uint8{0, 1, 0, 0}, End: math.NaN()}}}
	}
	cases := []struct {
		name string
		mod  func(d *Data)
		opt  Options
		want string
	}{
		{"decreasing", func(d *Data) { d.Records[0].Time[2] = 0.9 }, Options{}, `record "r1" event 3`},
		{"nan", func(d *Data) { d.Records[0].Time[1] = math.NaN() }, Options{}, `record "r1" event 2`},
		{"nan first", func(d *Data) { d.Records[0].Time[0] = math.NaN() }, Options{}, `record "r1" event 1`},
		{"inf", func(d *Data) { d.Records[0].Time[3] = math.Inf(1) }, Options{}, `record "r1" event 4`},
		{"dead time", func(d *Data) {}, Options{Instrument: Instrument{DeadTime: 0.6}}, `record "r1" event 2`},
		{"unknown label", func(d *Data) { d.Labels[1] = "x" }, Options{}, `"x"`},
		{"label index", func(d *Data) { d.Records[0].Label[3] = 7 }, Options{}, `record "r1" event 4`},
		{"empty", func(d *Data) { d.Records = append(d.Records, Record{ID: "r2", End: math.NaN()}) }, Options{}, `record "r2" is empty`},
		{"end before last", func(d *Data) { d.Records[0].End = 2 }, Options{}, `record "r1"`},
		{"negative start", func(d *Data) { d.Records[0].Time[0] = -1 }, Options{Start: StartStationary}, `record "r1" event 1`},
	}
	for _, c := range cases {
		for _, path := range []PathMode{PathAuto, PathGeneral} {
			d := base()
			c.mod(d)
			o := c.opt
			o.Path = path
			if c.name != "dead time" && c.name != "unknown label" && c.name != "negative start" {
				if err := d.Validate(); err == nil || !strings.Contains(err.Error(), c.want) {
					t.Errorf("%s: Data.Validate gives %v, want an error containing %q", c.name, err, c.want)
				}
			}
			ll, err := LogLik(net, d, o)
			if err == nil {
				t.Errorf("%s: no error (ln L = %v)", c.name, ll)
				continue
			}
			if !strings.Contains(err.Error(), c.want) {
				t.Errorf("%s: error %q does not contain %q", c.name, err, c.want)
			}
		}
	}
	// An event the model cannot produce: "+" then "+" is impossible on an
	// irreversible 3-ring where + is A->B... use a one-way network where
	// "-" has no transition at all.
	ring := coreIrreversibleRing(3, 1)
	ring.Labels = append(ring.Labels, models.Label{Name: "-", Detect: 1})
	d := &Data{Labels: []string{"+", "-"}, Records: []Record{{ID: "r9", Time: []float64{1, 2, 3}, Label: []uint8{0, 0, 1}, End: math.NaN()}}}
	if _, err := LogLik(ring, d, Options{}); err == nil || !strings.Contains(err.Error(), `record "r9"`) {
		t.Errorf("impossible label: error %v, want one naming record r9", err)
	}
}

// TestStiffRoutes: on stiff networks (rates over 5 decades) ln L by the
// automatic route (spectral where its conditioning allows, else Pade),
// by Pade and by uniformisation agree: three independent exponentials
// inside the same recursion. Summed ln L to 1e-9 relative to |ln L|: a
// per-event error of cond(V) eps, with cond(V) at the automatic rule's
// limit 1e6, summed over the 300 events gives 1e6 * 2.2e-16 * 300 =
// 6.7e-8 absolute, i.e. <= 1.3e-10 relative for |ln L| >= 500 (the four
// networks have |ln L| = 547..1529, cond(V) = 3..13). Per event (each gap
// as its own two-event record, so one route cannot hide another's error
// in the sum): ln psi to 1e-9 absolute; observed at most 1.2e-11, and
// for these cond(V) <= 13 the expected per-event error is ~cond eps
// (sum |terms| / psi), below 1e-12 unless a sum cancels, which the
// spectral route's fallback then recomputes entry-wise.
func TestStiffRoutes(t *testing.T) {
	rng := rand.New(rand.NewPCG(40, 41))
	for i := 0; i < 4; i++ {
		net := coreRandomNet(rng, 4+i%2, 1+i%2, 5, 0.9)
		d := coreSimulate(t, net, uint64(50+i), 2, 150, 0)
		pairs := &Data{Labels: d.Labels}
		for _, r := range d.Records {
			for k := 1; k < len(r.Time); k++ {
				pairs.Records = append(pairs.Records, Record{ID: r.ID + ":" + strconv.Itoa(k+1), Time: []float64{r.Time[k-1], r.Time[k]}, Label: []uint8{r.Label[k-1], r.Label[k]}, End: math.NaN()})
			}
		}
		var vals []float64
		var routes []ExpMethod
		var per [][]float64
		for _, m := range []ExpMethod{ExpAuto, ExpPade, ExpUniform} {
			ev, err := NewNetworkEvaluator(net, Options{Method: m})
			if err != nil {
				t.Fatal(err)
			}
			ll, err := ev.LogLik(d)
			if err != nil {
				t.Fatalf("net %d, %v: %v", i, m, err)
			}
			pe, err := ev.RecordLogLiks(pairs)
			if err != nil {
				t.Fatalf("net %d, %v: %v", i, m, err)
			}
			per = append(per, pe)
			vals = append(vals, ll)
			routes = append(routes, ev.Method())
			if m == ExpAuto {
				c, g := ev.prop.Condition()
				t.Logf("net %d: automatic route %v (cond %.3g, gap %.3g)", i, ev.Method(), c, g)
			}
		}
		for j := 1; j < len(vals); j++ {
			if coreRelErr(vals[j], vals[0], 1) > 1e-9 {
				t.Errorf("net %d: ln L by %v = %.15g, by %v = %.15g", i, routes[j], vals[j], routes[0], vals[0])
			}
			for k := range per[0] {
				if math.Abs(per[j][k]-per[0][k]) > 1e-9 {
					t.Errorf("net %d gap %s: ln psi by %v = %.15g, by %v = %.15g", i, pairs.Records[k].ID, routes[j], per[j][k], routes[0], per[0][k])
				}
			}
		}
	}
}

// TestFrameProbabilitiesSumToOne: with frame-limited timestamps each gap
// contributes the probability that the true gap lies in its box
// [max(g - F/2, 0), g + F/2]; the boxes of g = 0, F, 2F, ... tile [0, inf),
// so summing over reported gaps and next labels gives 1 (the embedded
// chain's rows sum to 1: sum_l' P(l'|l) = 1), with and without dead time.
// Tolerance 1e-10: the tail beyond 1000 frames (50 time units) is below
// e^{-26} (the slowest decay rate of D0 is >= 0.53 for these networks)
// and each term is exact to ~1e-15.
func TestFrameProbabilitiesSumToOne(t *testing.T) {
	rng := rand.New(rand.NewPCG(50, 51))
	for _, detect := range []float64{1, 0.8} {
		net := coreMultiNet(rng, 4, 1, 1, detect)
		for _, dead := range []float64{0, 0.07} {
			const frame = 0.05
			ev, err := NewNetworkEvaluator(net, Options{Instrument: Instrument{Frame: frame, DeadTime: dead}})
			if err != nil {
				t.Fatal(err)
			}
			for l := uint8(0); l < 2; l++ {
				total := 0.0
				for m := 0; m < 1000; m++ {
					for l2 := uint8(0); l2 < 2; l2++ {
						d := &Data{Labels: []string{"+", "-"}, Records: []Record{{ID: "p", Time: []float64{0, float64(m) * frame}, Label: []uint8{l, l2}, End: math.NaN()}}}
						ll, err := ev.LogLik(d)
						if err != nil {
							if float64(m)*frame+frame/2 <= dead {
								continue // box inside the dead time: impossible, as it should be
							}
							t.Fatal(err)
						}
						total += math.Exp(ll)
					}
				}
				if math.Abs(total-1) > 1e-10 {
					t.Errorf("detect %g dead %g label %d: sum over boxes = %.15g, want 1", detect, dead, l, total)
				}
			}
		}
	}
}

// TestRecordLogLiks: per-record contributions sum to ln L (to 1e-12
// relative: only the summation order differs), on both paths, with a
// record long enough to be split into several fast-path work items, and
// each equals ln L of that record alone.
func TestRecordLogLiks(t *testing.T) {
	rng := rand.New(rand.NewPCG(60, 61))
	net := coreRandomNet(rng, 4, 1, 1, 1)
	d := coreSimulate(t, net, 7, 3, 200, 0)
	long := coreSimulate(t, net, 8, 1, 70000, 0)
	d.Records = append(d.Records, long.Records[0])
	for _, path := range []PathMode{PathFast, PathGeneral} {
		ev, err := NewNetworkEvaluator(net, Options{Path: path})
		if err != nil {
			t.Fatal(err)
		}
		per, err := ev.RecordLogLiks(d)
		if err != nil {
			t.Fatal(err)
		}
		total, err := ev.LogLik(d)
		if err != nil {
			t.Fatal(err)
		}
		s := 0.0
		for r, v := range per {
			s += v
			one := &Data{Labels: d.Labels, Records: d.Records[r : r+1]}
			want, err := ev.LogLik(one)
			if err != nil {
				t.Fatal(err)
			}
			if coreRelErr(v, want, 1) > 1e-12 {
				t.Errorf("path %d record %d: %.15g, alone %.15g", path, r, v, want)
			}
		}
		if coreRelErr(s, total, 1) > 1e-12 {
			t.Errorf("path %d: sum of records %.15g, ln L %.15g", path, s, total)
		}
	}
}

// TestAgreesWithPredictor: a two-event record conditioned on its first
// event has L = psi_{l->l'}(tau), and the Predictor computes psi and the
// stationary post-event law by its own route (Pade exponentials, its own
// post-event chain); the two implementations agree to 1e-10 relative on
// networks with labels on two edges, missed events and a dead time.
func TestAgreesWithPredictor(t *testing.T) {
	rng := rand.New(rand.NewPCG(70, 71))
	for i := 0; i < 3; i++ {
		net := coreMultiNet(rng, 4+i, i, 1, 0.85+0.05*float64(i))
		const dead = 0.03
		k, err := NewKernels(net)
		if err != nil {
			t.Fatal(err)
		}
		pr, err := NewPredictor(k, Instrument{DeadTime: dead})
		if err != nil {
			t.Fatal(err)
		}
		ev, err := NewEvaluator(k, Options{Instrument: Instrument{DeadTime: dead}})
		if err != nil {
			t.Fatal(err)
		}
		phi := pr.StationaryPostEvent()
		for s := range phi {
			if math.Abs(phi[s]-ev.nu[s]) > 1e-10 {
				t.Errorf("net %d: post-event law[%d] predictor %.15g, evaluator %.15g", i, s, phi[s], ev.nu[s])
			}
		}
		for l := 0; l < 2; l++ {
			for l2 := 0; l2 < 2; l2++ {
				for _, tau := range []float64{0.05, 0.4, 2, 7} {
					d := &Data{Labels: []string{"+", "-"}, Records: []Record{{ID: "pair", Time: []float64{1, 1 + tau}, Label: []uint8{uint8(l), uint8(l2)}, End: math.NaN()}}}
					ll, err := ev.LogLik(d)
					if err != nil {
						t.Fatal(err)
					}
					want := pr.Psi(l, l2, []float64{tau})[0]
					if coreRelErr(math.Exp(ll), want, 1e-300) > 1e-10 {
						t.Errorf("net %d: psi_{%d->%d}(%g): evaluator %.15g, predictor %.15g", i, l, l2, tau, math.Exp(ll), want)
					}
				}
			}
		}
	}
}

// TestPutFirst: renumbering labels keeps every event's label name and
// leaves ln L unchanged (labels are matched to the model by name).
func TestPutFirst(t *testing.T) {
	d := &Data{Labels: []string{"-", "x", "+"}, Records: []Record{
		{Time: []float64{1, 2, 3, 4}, Label: []uint8{0, 2, 1, 2}, End: math.NaN()},
		{Time: []float64{1, 5}, Label: []uint8{2, 0}, End: math.NaN()},
	}}
	names := func(d *Data) []string {
		var out []string
		for _, r := range d.Records {
			for _, l := range r.Label {
				out = append(out, d.Labels[l])
			}
		}
		return out
	}
	before := names(d)
	if err := d.PutFirst("+", "-", "absent"); err != nil {
		t.Fatal(err)
	}
	if got := strings.Join(d.Labels, " "); got != "+ - x" {
		t.Fatalf("labels %q, want \"+ - x\"", got)
	}
	if after := names(d); strings.Join(after, "") != strings.Join(before, "") {
		t.Fatalf("events changed: %v -> %v", before, after)
	}
	d.Records[0].Label[0] = 9
	if err := d.PutFirst("x"); err == nil || d.Labels[0] != "+" {
		t.Fatalf("bad index: err %v, labels %v (must be unchanged)", err, d.Labels)
	}
}
