package infer

import (
	"math"
	"strconv"
	"testing"

	"edgewise/likelihood"
	"edgewise/models"
)

// recSimulate draws records of visible events from net, each started from
// the stationary law, exactly as `edgewise simulate` does (one simulator,
// chunks of 4096 events), so that a seed gives the same data.
func recSimulate(tb testing.TB, net *models.Network, seed uint64, records, events int) *likelihood.Data {
	tb.Helper()
	sim, err := models.NewSimulator(net, seed)
	if err != nil {
		tb.Fatal(err)
	}
	d := &likelihood.Data{}
	for _, l := range net.Labels {
		d.Labels = append(d.Labels, l.Name)
	}
	buf := make([]models.Event, 0, 4096)
	for r := 1; r <= records; r++ {
		sim.StartStationary()
		rec := likelihood.Record{ID: strconv.Itoa(r), End: math.NaN(), Time: make([]float64, 0, events), Label: make([]uint8, 0, events)}
		if records == 1 {
			rec.ID = ""
		}
		for left := events; left > 0; {
			n := min(left, 4096)
			buf, _ = sim.Visible(n, buf[:0])
			if err := sim.Err(); err != nil {
				tb.Fatal(err)
			}
			left -= n
			for _, e := range buf {
				rec.Time = append(rec.Time, e.Time)
				rec.Label = append(rec.Label, uint8(e.Label))
			}
		}
		d.Records = append(d.Records, rec)
	}
	return d
}

// recRing builds a ring 0 -> 1 -> ... -> N-1 -> 0 with forward rates u and
// backward rates w; edge 0 (state 0 -> 1) carries "+" forward and "-"
// backward, with detection probability p.
func recRing(u, w []float64, p float64) *models.Network {
	n := len(u)
	net := &models.Network{Labels: []models.Label{{Name: "+", Detect: p}, {Name: "-", Detect: p}}}
	for i := 0; i < n; i++ {
		net.States = append(net.States, string(rune('A'+i)))
		lab := [2]int{models.Hidden, models.Hidden}
		if i == 0 {
			lab = [2]int{0, 1}
		}
		net.Edges = append(net.Edges, models.Edge{From: i, To: (i + 1) % n, Rate: [2]float64{u[i], w[i]}, Label: lab})
	}
	return net
}

// loadSpec reads a model spec file (readSpec, under the name the fit
// tests use).
func loadSpec(tb testing.TB, path string) *models.Model {
	tb.Helper()
	return readSpec(tb, path)
}

// recModel loads a shipped model spec at its start values.
func recModel(tb testing.TB, path string) *models.Network {
	tb.Helper()
	m := readSpec(tb, path)
	net, err := m.Network(m.Start())
	if err != nil {
		tb.Fatal(err)
	}
	return net
}

// recRingAffinity returns the cycle affinity of a unicyclic network.
func recRingAffinity(tb testing.TB, net *models.Network) float64 {
	tb.Helper()
	cs := net.CycleBasis()
	if len(cs) != 1 {
		tb.Fatalf("%d cycles, want 1", len(cs))
	}
	return net.Affinity(cs[0])
}

// recEqualData reports the first difference between two data sets.
func recEqualData(a, b *likelihood.Data) string {
	if len(a.Labels) != len(b.Labels) {
		return "label tables differ in length"
	}
	for i := range a.Labels {
		if a.Labels[i] != b.Labels[i] {
			return "label " + strconv.Itoa(i) + " differs: " + a.Labels[i] + " vs " + b.Labels[i]
		}
	}
	if len(a.Records) != len(b.Records) {
		return "record counts differ"
	}
	for i := range a.Records {
		x, y := &a.Records[i], &b.Records[i]
		if x.ID != y.ID {
			return "record IDs differ: " + x.ID + " vs " + y.ID
		}
		if x.Len() != y.Len() {
			return "record " + x.ID + ": event counts differ"
		}
		if !(x.End == y.End || (math.IsNaN(x.End) && math.IsNaN(y.End))) {
			return "record " + x.ID + ": ends differ"
		}
		for k := range x.Time {
			if x.Time[k] != y.Time[k] || math.Signbit(x.Time[k]) != math.Signbit(y.Time[k]) {
				return "record " + x.ID + ": time " + strconv.Itoa(k) + " differs"
			}
			if x.Label[k] != y.Label[k] {
				return "record " + x.ID + ": label " + strconv.Itoa(k) + " differs"
			}
		}
	}
	return ""
}
