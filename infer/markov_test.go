package infer

import (
	"math"
	"testing"

	"edgewise/likelihood"
	"edgewise/models"
)

// recShared builds a 4-ring A-B-C-D-A whose label "+" sits on two edges
// (A->B and C->D) and "-" on their reverses, with rates that make B and D
// behave differently, so that the label sequence has second-order memory.
func recShared() *models.Network {
	h := models.Hidden
	return &models.Network{
		States: []string{"A", "B", "C", "D"},
		Labels: []models.Label{{Name: "+", Detect: 1}, {Name: "-", Detect: 1}},
		Edges: []models.Edge{
			{From: 0, To: 1, Rate: [2]float64{2, 1}, Label: [2]int{0, 1}},
			{From: 1, To: 2, Rate: [2]float64{3, 0.5}, Label: [2]int{h, h}},
			{From: 2, To: 3, Rate: [2]float64{1, 2}, Label: [2]int{0, 1}},
			{From: 3, To: 0, Rate: [2]float64{0.5, 1}, Label: [2]int{h, h}},
		},
	}
}

// TestMarkovOrderStatistic: G equals 2 (ln L2 - ln L1) with the maximised
// second- and first-order log-likelihoods of the triplets, ln L2 =
// sum n_ijk ln(n_ijk/n_ij.) and ln L1 = sum n_ijk ln(n_.jk/n_.j.) (Anderson
// and Goodman 1957, eq. 3.21 ff.), computed here directly; and two labels
// with all cells filled give df = s(s-1)^2 = 2.
func TestMarkovOrderStatistic(t *testing.T) {
	d := recSimulate(t, recShared(), 3, 2, 3000)
	r := MarkovOrderTest(d)
	var n [2][2][2]float64
	for _, rec := range d.Records {
		for i := 2; i < rec.Len(); i++ {
			n[rec.Label[i-2]][rec.Label[i-1]][rec.Label[i]]++
		}
	}
	l1, l2 := 0.0, 0.0
	for i := 0; i < 2; i++ {
		for j := 0; j < 2; j++ {
			for k := 0; k < 2; k++ {
				nij := n[i][j][0] + n[i][j][1]
				njk := n[0][j][k] + n[1][j][k]
				nj := n[0][j][0] + n[0][j][1] + n[1][j][0] + n[1][j][1]
				l2 += xlogx(n[i][j][k]) - n[i][j][k]*math.Log(nij)
				l1 += n[i][j][k] * math.Log(njk/nj)
			}
		}
	}
	if want := 2 * (l2 - l1); math.Abs(r.Stat-want) > 1e-9*want || r.DF != 2 || r.N != 2*2998 {
		t.Errorf("G %v df %d N %d, want %v df 2 N %d", r.Stat, r.DF, r.N, want, 2*2998)
	}
}

// TestMarkovOrderSize: on first-order data the test at 5% rejects about 5%
// of 200 replicates (2000 events each): the binomial 3-sigma band is
// [0.004, 0.096]. Data with missed events on a single edge (p = 0.6) are
// still first-order (each seen event fixes the hidden state) and must pass
// too.
func TestMarkovOrderSize(t *testing.T) {
	for _, p := range []float64{1, 0.6} {
		net := recRing([]float64{1.2, 0.9, 1.1, 1.0}, []float64{1.0, 1.0, 0.8, 1.1}, p)
		rej := 0
		const reps = 200
		for r := 0; r < reps; r++ {
			d := recSimulate(t, net, uint64(9000+r), 1, 2000)
			if MarkovOrderTest(d).P < 0.05 {
				rej++
			}
		}
		frac := float64(rej) / reps
		t.Logf("detection %.1f: rejection rate at 5%% = %.3f (%d/%d)", p, frac, rej, reps)
		if frac < 0.004 || frac > 0.096 {
			t.Errorf("detection %.1f: rejection rate %.3f outside [0.004, 0.096]", p, frac)
		}
	}
}

// TestMarkovOrderPower: a label shared by two edges gives second-order
// memory; at 10^5 events the test must reject at 5% in at least 9 of 10
// replicates (the power found at 10^3 and 10^4 events is logged only).
func TestMarkovOrderPower(t *testing.T) {
	net := recShared()
	for _, n := range []int{1000, 10000, 100000} {
		rej := 0
		const reps = 10
		var g float64
		for r := 0; r < reps; r++ {
			res := MarkovOrderTest(recSimulate(t, net, uint64(4000+r), 1, n))
			g += res.Stat / reps
			if res.P < 0.05 {
				rej++
			}
		}
		t.Logf("%d events: power at 5%% = %d/%d, mean G = %.1f (df 2)", n, rej, reps, g)
		if n == 100000 && rej < 9 {
			t.Errorf("power %d/%d at %d events", rej, reps, n)
		}
	}
}

// TestStationarity: stationary records pass every check at 0.1% (a false
// alarm has probability about 4 x 1e-3). A record whose second half comes
// from the same ring with every rate doubled (same P(l'|l), half the mean
// gap) must fail the mean-gap half comparison at p < 1e-6 and pass the
// P(l'|l) one at 0.1%; a record whose second half comes from a differently
// driven ring must fail the P(l'|l) comparison at p < 1e-6. The same two
// contrasts between records (three records of each kind) must show in the
// between-record tests.
func TestStationarity(t *testing.T) {
	u, w := []float64{1.2, 0.9, 1.1, 1.0}, []float64{1.0, 1.0, 0.8, 1.1}
	ring := recRing(u, w, 1)
	double := ring.Clone()
	for i := range double.Edges {
		double.Edges[i].Rate[0] *= 2
		double.Edges[i].Rate[1] *= 2
	}
	skew := recRing([]float64{3, 0.9, 2, 1.0}, []float64{0.5, 1.0, 0.8, 1.1}, 1)
	d := recSimulate(t, ring, 31, 6, 20000)
	s := StationarityTest(d)
	for name, r := range map[string]TestResult{"halves P": s.HalvesNext, "halves gap": s.HalvesGap, "between P": s.BetweenNext, "between gap": s.BetweenGap} {
		t.Logf("stationary, %s: stat %.2f df %d p %.3g", name, r.Stat, r.DF, r.P)
		if !(r.P > 1e-3) {
			t.Errorf("stationary data, %s: p = %v", name, r.P)
		}
	}
	if len(s.Records) != 6 || s.HalvesNext.DF != 6*2 || s.BetweenNext.DF != 5*2 || s.BetweenGap.DF != 5 {
		t.Errorf("records %d, df %d %d %d", len(s.Records), s.HalvesNext.DF, s.BetweenNext.DF, s.BetweenGap.DF)
	}
	join := func(seed uint64, second *models.Network) likelihood.Record {
		a := recSimulate(t, ring, seed, 1, 10000).Records[0]
		b := recSimulate(t, second, seed+1, 1, 10000).Records[0]
		off := a.Time[a.Len()-1]
		for i := range b.Time {
			a.Time = append(a.Time, off+b.Time[i])
			a.Label = append(a.Label, b.Label[i])
		}
		return a
	}
	drift := &likelihood.Data{Labels: []string{"+", "-"}, Records: []likelihood.Record{join(40, double), join(42, skew)}}
	sd := StationarityTest(drift)
	r0, r1 := sd.Records[0], sd.Records[1]
	t.Logf("rates doubled: P(l'|l) p %.3g, mean gap p %.3g; drive changed: P(l'|l) p %.3g", r0.Next.P, r0.MeanGap.P, r1.Next.P)
	if !(r0.MeanGap.P < 1e-6) || !(r0.Next.P > 1e-3) || !(r1.Next.P < 1e-6) {
		t.Errorf("drift: %+v\n%+v", r0, r1)
	}
	h := recSimulate(t, ring, 34, 3, 5000)
	h.Records = append(h.Records, recSimulate(t, double, 35, 3, 5000).Records...)
	sh := StationarityTest(h)
	h2 := recSimulate(t, ring, 36, 3, 5000)
	h2.Records = append(h2.Records, recSimulate(t, skew, 37, 3, 5000).Records...)
	sh2 := StationarityTest(h2)
	t.Logf("between, rates doubled: P p %.3g, gap p %.3g; drive changed: P p %.3g", sh.BetweenNext.P, sh.BetweenGap.P, sh2.BetweenNext.P)
	if !(sh.BetweenGap.P < 1e-6) || !(sh.BetweenNext.P > 1e-3) || !(sh2.BetweenNext.P < 1e-6) {
		t.Errorf("between: %+v %+v %+v", sh.BetweenNext, sh.BetweenGap, sh2.BetweenNext)
	}
}
