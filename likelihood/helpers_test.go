package likelihood

import (
	"bufio"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"strconv"
	"strings"
	"testing"

	"edgewise/models"
)

// coreRandomNet returns a strongly connected network on n states: a ring
// 0-1-...-(n-1)-0 plus `chords` random extra edges, log-uniform rates in
// [10^-lo, 10^hi], and labels "+" (0->1) and "-" (1->0) on edge 0 with
// detection probability detect.
func coreRandomNet(rng *rand.Rand, n, chords int, decades float64, detect float64) *models.Network {
	net := &models.Network{Labels: []models.Label{{Name: "+", Detect: detect}, {Name: "-", Detect: detect}}}
	for i := 0; i < n; i++ {
		net.States = append(net.States, fmt.Sprintf("S%d", i))
	}
	rate := func() float64 { return math.Pow(10, decades*(rng.Float64()-0.5)) }
	seen := map[[2]int]bool{}
	add := func(a, b int) {
		k := [2]int{min(a, b), max(a, b)}
		if a == b || seen[k] {
			return
		}
		seen[k] = true
		net.Edges = append(net.Edges, models.Edge{From: a, To: b, Rate: [2]float64{rate(), rate()}, Label: [2]int{models.Hidden, models.Hidden}})
	}
	for i := 0; i < n; i++ {
		add(i, (i+1)%n)
	}
	for c := 0; c < chords; c++ {
		add(rng.IntN(n), rng.IntN(n))
	}
	net.Edges[0].Label = [2]int{0, 1}
	return net
}

// coreMultiNet is coreRandomNet with labels "+" and "-" also on edge 2
// (so each label sits on two directed edges: the state after an event is
// not known and the general path is needed).
func coreMultiNet(rng *rand.Rand, n, chords int, decades, detect float64) *models.Network {
	net := coreRandomNet(rng, n, chords, decades, detect)
	net.Edges[2].Label = [2]int{0, 1}
	return net
}

// coreSimulate draws nrec records of nev visible events each, starting
// from the stationary law, with the given dead time; End is NaN.
func coreSimulate(t testing.TB, net *models.Network, seed uint64, nrec, nev int, dead float64) *Data {
	t.Helper()
	sim, err := models.NewSimulator(net, seed)
	if err != nil {
		t.Fatal(err)
	}
	if err := sim.SetDeadTime(dead); err != nil {
		t.Fatal(err)
	}
	d := &Data{}
	for _, l := range net.Labels {
		d.Labels = append(d.Labels, l.Name)
	}
	for r := 0; r < nrec; r++ {
		sim.StartStationary()
		ev, _ := sim.Visible(nev, nil)
		rec := Record{ID: strconv.Itoa(r + 1), End: math.NaN()}
		for _, e := range ev {
			rec.Time = append(rec.Time, e.Time)
			rec.Label = append(rec.Label, uint8(e.Label))
		}
		d.Records = append(d.Records, rec)
	}
	return d
}

// coreQuantise rounds every time down to a multiple of frame (the frame
// start), as a camera does.
func coreQuantise(d *Data, frame float64) *Data {
	out := &Data{Labels: d.Labels}
	for _, r := range d.Records {
		q := Record{ID: r.ID, End: r.End}
		for i, t := range r.Time {
			q.Time = append(q.Time, math.Floor(t/frame)*frame)
			q.Label = append(q.Label, r.Label[i])
		}
		out.Records = append(out.Records, q)
	}
	return out
}

// coreReadCSV is a minimal test-only reader for the simulator's output:
// '#' comments, a header with columns record,time,label.
func coreReadCSV(t testing.TB, path string) *Data {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	d := &Data{}
	labels := map[string]uint8{}
	recs := map[string]int{}
	sc := bufio.NewScanner(f)
	header := false
	for line := 1; sc.Scan(); line++ {
		s := strings.TrimSpace(sc.Text())
		if s == "" || strings.HasPrefix(s, "#") {
			continue
		}
		if !header {
			if s != "record,time,label" {
				t.Fatalf("%s:%d: unexpected header %q", path, line, s)
			}
			header = true
			continue
		}
		f := strings.Split(s, ",")
		if len(f) != 3 {
			t.Fatalf("%s:%d: %d fields", path, line, len(f))
		}
		tm, err := strconv.ParseFloat(f[1], 64)
		if err != nil {
			t.Fatalf("%s:%d: %v", path, line, err)
		}
		l, ok := labels[f[2]]
		if !ok {
			l = uint8(len(d.Labels))
			labels[f[2]] = l
			d.Labels = append(d.Labels, f[2])
		}
		r, ok := recs[f[0]]
		if !ok {
			r = len(d.Records)
			recs[f[0]] = r
			d.Records = append(d.Records, Record{ID: f[0], End: math.NaN()})
		}
		d.Records[r].Time = append(d.Records[r].Time, tm)
		d.Records[r].Label = append(d.Records[r].Label, l)
	}
	if err := sc.Err(); err != nil {
		t.Fatal(err)
	}
	return d
}

// coreScaleRate returns a copy of net with the rate at index 2*e+d
// multiplied by f.
func coreScaleRate(net *models.Network, idx int, f float64) *models.Network {
	c := net.Clone()
	c.Edges[idx/2].Rate[idx%2] *= f
	return c
}

// coreRelErr is |a-b| / max(|b|, floor).
func coreRelErr(a, b, floor float64) float64 {
	return math.Abs(a-b) / math.Max(math.Abs(b), floor)
}

// coreFastGeneralCases calls f with single-edge networks (6 random
// networks of 3 to 5 states, rates over two decades, every other one with
// missed events) and data of 2 records of nev events under each of four
// instruments and starts (none; dead time; frames; stationary start with
// dead time, frames and a censored end), for fast-path against
// general-path comparisons.
func coreFastGeneralCases(t *testing.T, nev int, f func(i, oi int, net *models.Network, opt Options, d *Data)) {
	rng := rand.New(rand.NewPCG(8, 9))
	opts := []Options{
		{},
		{Instrument: Instrument{DeadTime: 0.05}},
		{Instrument: Instrument{Frame: 0.1}},
		{Start: StartStationary, Instrument: Instrument{DeadTime: 0.02, Frame: 0.05}},
	}
	for i := 0; i < 6; i++ {
		p := 1.0
		if i%2 == 1 {
			p = 0.85
		}
		net := coreRandomNet(rng, 3+i%3, i%3, 2, p)
		for oi, opt := range opts {
			d := coreSimulate(t, net, uint64(100+i), 2, nev, opt.Instrument.DeadTime)
			if opt.Instrument.Frame > 0 {
				d = coreQuantise(d, opt.Instrument.Frame)
			}
			if oi == 3 {
				d.Records[1].End = d.Records[1].Time[nev-1] + 1
			}
			f(i, oi, net, opt, d)
		}
	}
}
