package infer

import (
	"math"
	"math/rand/v2"
	"slices"
	"strings"
	"testing"

	"edgewise/likelihood"
)

// TestAffinityRing: for a unicyclic ring with perfect detection F equals the
// cycle affinity ln(prod u / prod w) (Polettini and Esposito, PRL 119,
// 240601 (2017); design section 8). The estimate from 10^5 events of the
// shipped ring (F = 4.3175, so -- pairs are rare and dominate the error)
// and of a weakly driven 4-ring must lie within 4 standard errors
// (two-sided normal tail 6e-5: a failure is a bug, not bad luck).
func TestAffinityRing(t *testing.T) {
	ring3 := recModel(t, "../testdata/ring3.toml")
	ring4 := recRing([]float64{1.2, 0.9, 1.1, 1.0}, []float64{1.0, 1.0, 0.8, 1.1}, 1)
	check := func(name string, d *likelihood.Data, want float64, boot bool) {
		t.Helper()
		p, m, err := LabelPair(d, "+", "-")
		if err != nil {
			t.Fatal(err)
		}
		opt := AffinityOptions{}
		if boot {
			opt.Bootstrap, opt.Seed = 400, 5
		}
		e := EffectiveAffinity(d, p, m, opt)
		if !(e.SE > 0) || math.Abs(e.Value-want) > 4*e.SE {
			t.Errorf("%s: F = %.4f +- %.4f (%s), cycle affinity %.4f", name, e.Value, e.SE, e.Method, want)
		}
		if !(e.Lo < e.Value && e.Value < e.Hi) {
			t.Errorf("%s: interval [%v, %v] does not hold the estimate %v", name, e.Lo, e.Hi, e.Value)
		}
		t.Logf("%s: F = %.4f SE %.4f [%.4f, %.4f] %s; cycle affinity %.4f", name, e.Value, e.SE, e.Lo, e.Hi, e.Method, want)
	}
	d3 := recSimulate(t, ring3, 11, 4, 25000)
	check("ring3 delta", d3, recRingAffinity(t, ring3), false)
	check("ring3 block bootstrap", d3, recRingAffinity(t, ring3), true)
	d4 := recSimulate(t, ring4, 12, 20, 5000)
	check("ring4 delta", d4, recRingAffinity(t, ring4), false)
	check("ring4 record bootstrap", d4, recRingAffinity(t, ring4), true)
}

// TestAffinityDeltaSE: the delta-method standard error must match the spread
// of F over independent replicates. 200 replicates of 2000 events of a ring
// with F = ln 5.4 = 1.686: the sample standard deviation has a relative
// error of about 1/sqrt(2*199) = 5%, so 20% (4 of those) is the tolerance
// on the ratio; the mean of F must lie within 4 standard errors of the mean
// of the cycle affinity (the O(1/N) bias of the log-ratio is far below that).
func TestAffinityDeltaSE(t *testing.T) {
	net := recRing([]float64{2, 1.5, 1.8}, []float64{1, 1, 1}, 1)
	want := recRingAffinity(t, net)
	const reps = 200
	var f, se2 []float64
	for r := 0; r < reps; r++ {
		d := recSimulate(t, net, uint64(1000+r), 1, 2000)
		e := EffectiveAffinity(d, 0, 1)
		if math.IsInf(e.Value, 0) || math.IsNaN(e.Value) {
			t.Fatalf("replicate %d: F = %v", r, e.Value)
		}
		f = append(f, e.Value)
		se2 = append(se2, e.SE*e.SE)
	}
	mf, vf := meanVar(f)
	ms, _ := meanVar(se2)
	ratio := math.Sqrt(ms / vf)
	t.Logf("F mean %.4f (affinity %.4f), replicate sd %.4f, rms delta SE %.4f, ratio %.3f", mf, want, math.Sqrt(vf), math.Sqrt(ms), ratio)
	if math.Abs(ratio-1) > 0.2 {
		t.Errorf("delta SE / replicate sd = %.3f, want 1 +- 0.2", ratio)
	}
	if math.Abs(mf-want) > 4*math.Sqrt(vf/reps) {
		t.Errorf("mean F %.4f, want %.4f +- %.4f", mf, want, 4*math.Sqrt(vf/reps))
	}
}

// TestAffinityInfinite: a pair never seen gives an infinite F with the
// one-sided bound the data support, and the note names the missing pair.
// With N++ = 9 of N+. = 10 and N-- = 0 of N-. = 10, the bound is
// ln(CP lower of 9/10 at 2.5%) - ln(1 - 0.025^(1/10)) (closed form for k = 0).
func TestAffinityInfinite(t *testing.T) {
	// Sequence: ten + followed by (+ nine times, then -), and ten - each followed by +.
	var lab []uint8
	lab = append(lab, 0)
	for i := 0; i < 9; i++ {
		lab = append(lab, 0) // ++ pairs
	}
	for i := 0; i < 10; i++ {
		lab = append(lab, 1, 0) // +- then -+
	}
	// Pairs: 9 ++, 10 +-, 10 -+; N+. = 19, N-. = 10, N-- = 0.
	tm := make([]float64, len(lab))
	for i := range tm {
		tm[i] = float64(i)
	}
	d := &likelihood.Data{Labels: []string{"+", "-"}, Records: []likelihood.Record{{Time: tm, Label: lab, End: math.NaN()}}}
	e := EffectiveAffinity(d, 0, 1)
	lo, _ := ClopperPearson(9, 19, 0.95)
	want := math.Log(lo) - math.Log(1-math.Pow(0.025, 0.1))
	if !math.IsInf(e.Value, 1) || math.Abs(e.Lo-want) > 1e-12 || !math.IsInf(e.Hi, 1) || !strings.Contains(e.Note, "no -- pair") {
		t.Errorf("got %+v, want +Inf with Lo = %v", e, want)
	}
	// Swap the labels: F = -Inf with an upper bound.
	d.Labels = []string{"-", "+"}
	e = EffectiveAffinity(d, 1, 0)
	if !math.IsInf(e.Value, -1) || math.Abs(e.Hi+want) > 1e-12 || !strings.Contains(e.Note, "no ++ pair") {
		t.Errorf("swapped: got %+v, want -Inf with Hi = %v", e, -want)
	}
	// Only + events: undefined.
	d.Records[0].Label = make([]uint8, len(lab))
	e = EffectiveAffinity(d, 1, 0)
	if !math.IsNaN(e.Value) || !strings.Contains(e.Note, "undefined") {
		t.Errorf("no - followed: got %+v", e)
	}
}

// TestSummaryRing: counts, rates, P(l'|l), current, diffusion and Fano
// factor from 2x10^5 events of a uniform 3-ring (u = 2, w = 0.5) against
// exact values. Derrida (J. Stat. Phys. 31, 433 (1983)), uniform rates:
// velocity V = u - w and diffusion D = (u + w)/2 in sites; the current
// through one edge counts turns, 1 turn = N sites, so J = (u - w)/N and
// D_c = (u + w)/(2 N^2), Fano = 2 D_c / J. J is also checked against
// models.Currents. Tolerance 4 SE (two-sided normal tail 6e-5). D is the
// long-time slope, free of the window offset, so it needs no allowance
// for bias; the Fano factor at one window length t carries the offset
// a/(|J| t), O(1/events per window) = 0.5% at 200 events per window, so
// it gets 5% on top. Also P(+|+) + P(-|+) = 1 and rate(+) + rate(-) =
// activity, to rounding.
func TestSummaryRing(t *testing.T) {
	u, w := 2.0, 0.5
	net := recRing([]float64{u, u, u}, []float64{w, w, w}, 1)
	d := recSimulate(t, net, 21, 4, 50000)
	s, err := Summarize(d, SummaryOptions{WindowEvents: 200, PerRecord: true})
	if err != nil {
		t.Fatal(err)
	}
	pi, _ := net.Stationary()
	wantJ := net.Currents(pi)[0]
	if math.Abs(wantJ-(u-w)/3) > 1e-12 {
		t.Fatalf("edge current %v, Derrida V/N = %v", wantJ, (u-w)/3)
	}
	p := s.Pooled
	if math.Abs(p.Current.Value-wantJ) > 4*p.Current.SE {
		t.Errorf("J = %v +- %v, want %v", p.Current.Value, p.Current.SE, wantJ)
	}
	wantD := (u + w) / (2 * 3 * 3)
	if math.Abs(p.Diffusion.Value-wantD) > 4*p.Diffusion.SE {
		t.Errorf("D = %v +- %v, want %v", p.Diffusion.Value, p.Diffusion.SE, wantD)
	}
	wantFano := 2 * wantD / wantJ
	if math.Abs(p.Fano.Value-wantFano) > 4*p.Fano.SE+0.05*wantFano {
		t.Errorf("Fano = %v +- %v, want %v", p.Fano.Value, p.Fano.SE, wantFano)
	}
	if math.Abs(p.Rates[0].Value+p.Rates[1].Value-p.Activity.Value) > 1e-12*p.Activity.Value {
		t.Errorf("rates %v + %v != activity %v", p.Rates[0].Value, p.Rates[1].Value, p.Activity.Value)
	}
	if got := p.Next[0][0].Value + p.Next[0][1].Value; math.Abs(got-1) > 1e-15 {
		t.Errorf("P(+|+) + P(-|+) = %v", got)
	}
	if p.Counts[0]+p.Counts[1] != 200000 || len(s.Records) != 4 || s.Records[2].Events != 50000 {
		t.Errorf("counts %v, %d records", p.Counts, len(s.Records))
	}
	n := 0
	for a := range p.Gaps {
		for b := range p.Gaps[a] {
			n += p.Gaps[a][b].N
		}
	}
	if n != 200000-4 {
		t.Errorf("%d gaps, want %d", n, 200000-4)
	}
	t.Logf("J %.4f +- %.4f (exact %.4f), D %.4f +- %.4f (exact %.4f), Fano %.4f +- %.4f (exact %.4f)", p.Current.Value, p.Current.SE, wantJ, p.Diffusion.Value, p.Diffusion.SE, wantD, p.Fano.Value, p.Fano.SE, wantFano)
}

// TestSummaryDegenerate: records of one event each have no observed time
// and no pairs: the summary says so instead of printing numbers.
func TestSummaryDegenerate(t *testing.T) {
	d := &likelihood.Data{Labels: []string{"+", "-"}, Records: []likelihood.Record{
		{ID: "a", Time: []float64{1}, Label: []uint8{0}, End: math.NaN()},
		{ID: "b", Time: []float64{2}, Label: []uint8{1}, End: math.NaN()},
	}}
	s, err := Summarize(d, SummaryOptions{PerRecord: true})
	if err != nil {
		t.Fatal(err)
	}
	p := s.Pooled
	if !math.IsNaN(p.Current.Value) || !strings.Contains(p.Current.Note, "zero observed time") || !math.IsNaN(p.Affinity.Value) || !math.IsNaN(p.Rates[0].Value) {
		t.Errorf("got %+v", p)
	}
	if !math.IsNaN(p.Next[0][0].Value) || p.Gaps[0][0].N != 0 {
		t.Errorf("pairs: %+v %+v", p.Next[0][0], p.Gaps[0][0])
	}
	if _, err := Summarize(&likelihood.Data{Labels: []string{"+"}}, SummaryOptions{}); err == nil {
		t.Error("no error for empty data")
	}
	// Labels absent: single-edge quantities are skipped with a note.
	s, _ = Summarize(d, SummaryOptions{Plus: "f", Minus: "b"})
	if s.Plus != -1 || len(s.Notes) == 0 || !math.IsNaN(s.Pooled.Affinity.Value) {
		t.Errorf("absent labels: %+v", s)
	}
}

// TestGapStatsHistogram: the three-pass gap statistics (median through a
// histogram of bit patterns) equal those from the stored gaps (meanVar and
// median of PairGaps) bit for bit, on random records with one to three
// labels, many tied times (zero gaps), gaps spread over many decades,
// pairs with 0, 1 and 2 gaps, and out-of-order times (the fallback).
func TestGapStatsHistogram(t *testing.T) {
	rng := rand.New(rand.NewPCG(21, 22))
	same := func(a, b float64) bool { return a == b || (math.IsNaN(a) && math.IsNaN(b)) }
	for trial := 0; trial < 200; trial++ {
		k := 1 + rng.IntN(3)
		var recs []likelihood.Record
		for r := 0; r < 1+rng.IntN(3); r++ {
			rec := likelihood.Record{End: math.NaN()}
			tm := 0.0
			n := rng.IntN(4)
			if trial%2 == 0 {
				n = rng.IntN(3000)
			}
			for j := 0; j < n; j++ {
				switch rng.IntN(4) {
				case 0: // tie
				case 1:
					tm += math.Exp(rng.NormFloat64() * 8)
				default:
					tm += rng.ExpFloat64()
				}
				if trial%17 == 5 && j == n/2 {
					tm -= 1 // out of order
				}
				rec.Time = append(rec.Time, tm)
				rec.Label = append(rec.Label, uint8(rng.IntN(k)))
			}
			recs = append(recs, rec)
		}
		got, want := gapStats(recs, k), gapStatsStored(recs, k)
		for a := range k {
			for b := range k {
				g, w := got[a][b], want[a][b]
				if g.N != w.N || !same(g.Mean, w.Mean) || !same(g.Median, w.Median) || !same(g.CV, w.CV) {
					t.Fatalf("trial %d pair %d%d: %+v, want %+v", trial, a, b, g, w)
				}
			}
		}
	}
}

// TestWindowCurrents: windows (t_1 + i w, t_1 + (i+1) w] by hand. An event
// tied with t_1 is outside every window, an event on a boundary belongs to
// the window it ends, a third label counts 0, and the incomplete last
// window is dropped: with w = 1 and End = 2.6 the windows are (0, 1] and
// (1, 2], holding + - (c = 0) and x + + (c = 2).
func TestWindowCurrents(t *testing.T) {
	r := likelihood.Record{
		Time:  []float64{0, 0, 0.5, 1, 1.2, 1.5, 2, 2.5},
		Label: []uint8{0, 1, 0, 1, 2, 0, 0, 1},
		End:   2.6,
	}
	got := windowCurrents([]likelihood.Record{r}, 0, 1, 1)
	if !slices.Equal(got, []float64{0, 2}) {
		t.Errorf("window currents %v, want [0 2]", got)
	}
}
