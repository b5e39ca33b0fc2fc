package models

import (
	"bufio"
	"math"
	"math/big"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
)

// TestSimulatorOccupationAndCurrents: time-averaged occupations and net edge
// currents of a long run lie within 4 standard errors of the exact GTH
// values. Standard errors come from batch means over 50 batches (common
// practice, no source); a correct simulator fails with probability ~1e-4
// per compared quantity.
func TestSimulatorOccupationAndCurrents(t *testing.T) {
	rng := rand.New(rand.NewPCG(11, 12))
	net := randomNetwork(rng, 5, 1)
	pi, _ := net.Stationary()
	cur := net.Currents(pi)
	sim, err := NewSimulator(net, 42)
	if err != nil {
		t.Fatal(err)
	}
	sim.StartStationary()
	const batches, perBatch = 50, 20000
	k, ne := len(net.States), len(net.Edges)
	occ := make([][]float64, batches)
	flux := make([][]float64, batches)
	edgeOf := map[[2]int]int{}
	for i, e := range net.Edges {
		edgeOf[[2]int{e.From, e.To}] = i + 1
		edgeOf[[2]int{e.To, e.From}] = -(i + 1)
	}
	for b := 0; b < batches; b++ {
		occ[b] = make([]float64, k)
		flux[b] = make([]float64, ne)
		st, t0 := sim.State()
		for n := 0; n < perBatch; n++ {
			j := sim.step()
			_, t1 := sim.State()
			occ[b][st] += t1 - t0
			if e := edgeOf[[2]int{st, j.to}]; e > 0 {
				flux[b][e-1]++
			} else {
				flux[b][-e-1]--
			}
			st, t0 = j.to, t1
		}
		total := 0.0
		for _, x := range occ[b] {
			total += x
		}
		for i := range occ[b] {
			occ[b][i] /= total
		}
		for i := range flux[b] {
			flux[b][i] /= total
		}
	}
	check := func(name string, get func(b int) float64, want float64) {
		mean, sq := 0.0, 0.0
		for b := 0; b < batches; b++ {
			mean += get(b)
		}
		mean /= batches
		for b := 0; b < batches; b++ {
			sq += (get(b) - mean) * (get(b) - mean)
		}
		se := math.Sqrt(sq / float64(batches-1) / batches)
		if math.Abs(mean-want) > 4*se {
			t.Errorf("%s: simulated %.5g +- %.2g, exact %.5g", name, mean, se, want)
		}
	}
	for i := 0; i < k; i++ {
		check("occupation "+net.States[i], func(b int) float64 { return occ[b][i] }, pi[i])
	}
	for e := 0; e < ne; e++ {
		check("current", func(b int) float64 { return flux[b][e] }, cur[e])
	}
}

// TestSimulatorDetection: the fraction of recorded + events equals the
// detection probability within 4 binomial standard errors, and a seed fixes
// the output.
func TestSimulatorDetection(t *testing.T) {
	net := ring([]float64{2, 3, 1}, []float64{1, 1, 1})
	net.Labels = []Label{{Name: "+", Detect: 0.7}}
	net.Edges[0].Label = [2]int{0, Hidden}
	sim, _ := NewSimulator(net, 7)
	events, jumps := sim.Visible(20000, nil)
	// Reference: the rate of + events per jump with detection 1, from an
	// independent stream.
	full := net.Clone()
	full.Labels = []Label{{Name: "+", Detect: 1}}
	sim2, _ := NewSimulator(full, 99)
	ev2, j2 := sim2.Visible(20000, nil)
	perJump := float64(len(ev2)) / float64(j2)
	p := float64(len(events)) / float64(jumps) / perJump
	// Each run stops after a fixed number k of events and counts the jumps
	// J it took. After each + event the ring is in state B, so J is a sum of
	// k independent, identically distributed blocks and Var(J)/J^2 = CV^2/k,
	// CV the coefficient of variation of one block (measured once: 0.70 at
	// p = 1 and 0.79 at p = 0.7). The runs are independent, so 1/k + 1/k
	// bounds the relative variance of the ratio.
	se := 0.7 * math.Sqrt(2.0/20000)
	if math.Abs(p-0.7) > 4*se {
		t.Fatalf("detected fraction %.4f, want 0.7 +- %.4f", p, 4*se)
	}
	sim3, _ := NewSimulator(net, 7)
	again, _ := sim3.Visible(20000, nil)
	for i := range events {
		if events[i] != again[i] {
			t.Fatal("same seed gave different events")
		}
	}
}

// TestSimulatorDeadTime: the dead time only removes events and draws no
// random numbers, so a run with dead time delta equals the run without it
// (same seed, hence the same random stream) filtered by the rule "drop an
// event within delta after the last kept one", written here a second time.
// The rates the dead time predicts are checked against simulation in
// package likelihood.
func TestSimulatorDeadTime(t *testing.T) {
	net := ring([]float64{2, 3, 1, 4}, []float64{1, 0.5, 1, 0.2})
	net.Labels = []Label{{Name: "+", Detect: 0.9}, {Name: "-", Detect: 1}}
	net.Edges[0].Label = [2]int{0, 1}
	const delta = 0.05
	for rec := 0; rec < 3; rec++ {
		plain, _ := NewSimulator(net, uint64(rec))
		plain.StartStationary()
		all, _ := plain.Visible(20000, nil)
		blind, _ := NewSimulator(net, uint64(rec))
		if err := blind.SetDeadTime(delta); err != nil {
			t.Fatal(err)
		}
		blind.StartStationary()
		var want []Event
		last := math.Inf(-1)
		for _, e := range all {
			if e.Time-last > delta {
				want = append(want, e)
				last = e.Time
			}
		}
		got, _ := blind.Visible(len(want), nil)
		if len(want) > len(all)*99/100 {
			t.Fatalf("dead time removed only %d of %d events: test too weak", len(all)-len(want), len(all))
		}
		for i := range want {
			if got[i] != want[i] {
				t.Fatalf("record %d event %d: %+v, want %+v", rec, i, got[i], want[i])
			}
			if i > 0 && got[i].Time-got[i-1].Time <= delta {
				t.Fatalf("gap %g inside the dead time", got[i].Time-got[i-1].Time)
			}
		}
	}
	s, _ := NewSimulator(net, 1)
	for _, bad := range []float64{-1, math.NaN(), math.Inf(1)} {
		if s.SetDeadTime(bad) == nil {
			t.Errorf("dead time %v accepted", bad)
		}
		if s.SetFrame(bad) == nil {
			t.Errorf("frame %v accepted", bad)
		}
	}
}

// TestSimulatorFrame: frame-limited stamps are the exact times of the same
// stream rounded down to a multiple of the frame (the camera model).
func TestSimulatorFrame(t *testing.T) {
	net := ring([]float64{2, 3, 1}, []float64{1, 1, 1})
	net.Labels = []Label{{Name: "+", Detect: 1}, {Name: "-", Detect: 1}}
	net.Edges[0].Label = [2]int{0, 1}
	const frame = 0.25
	exact, _ := NewSimulator(net, 5)
	framed, _ := NewSimulator(net, 5)
	if err := framed.SetFrame(frame); err != nil {
		t.Fatal(err)
	}
	a, _ := exact.Visible(5000, nil)
	b, _ := framed.Visible(5000, nil)
	repeats := 0
	for i := range a {
		k := math.Floor(a[i].Time / frame)
		if b[i].Label != a[i].Label || b[i].Time != k*frame || b[i].Time > a[i].Time || a[i].Time-b[i].Time >= frame {
			t.Fatalf("event %d: framed %+v, exact %+v", i, b[i], a[i])
		}
		if i > 0 && b[i].Time == b[i-1].Time {
			repeats++
		}
	}
	if repeats == 0 {
		t.Fatal("no two events shared a frame: test too weak")
	}
}

func BenchmarkSimulatorRing4(b *testing.B) {
	net := ring([]float64{3, 2, 4, 1}, []float64{1, 0.5, 1, 2})
	sim, _ := NewSimulator(net, 1)
	b.ResetTimer()
	sim.Steps(b.N)
}

// BenchmarkSimulatorRing4Write: visible events written as CSV lines to a
// buffered file; ns/op is per jump (every jump of the ring's first edge in
// either direction is visible).
func BenchmarkSimulatorRing4Write(b *testing.B) {
	net := ring([]float64{3, 2, 4, 1}, []float64{1, 0.5, 1, 2})
	net.Labels = []Label{{Name: "+", Detect: 1}, {Name: "-", Detect: 1}}
	net.Edges[0].Label = [2]int{0, 1}
	sim, _ := NewSimulator(net, 1)
	f, err := os.Create(filepath.Join(b.TempDir(), "ev.csv"))
	if err != nil {
		b.Fatal(err)
	}
	defer f.Close()
	w := bufio.NewWriterSize(f, 1<<16)
	buf := make([]Event, 0, 1024)
	line := make([]byte, 0, 64)
	b.ResetTimer()
	jumps := 0
	for jumps < b.N {
		var n int
		buf, n = sim.Visible(256, buf[:0])
		jumps += n
		for _, e := range buf {
			line = strconv.AppendFloat(line[:0], e.Time, 'g', -1, 64)
			line = append(line, ',')
			line = append(line, net.Labels[e.Label].Name...)
			line = append(line, '\n')
			w.Write(line)
		}
	}
	w.Flush()
}

// BenchmarkProperties10: stationary law, currents, cycle basis, affinities
// and sigma of a 10-state network.
func BenchmarkProperties10(b *testing.B) {
	net := randomNetwork(rand.New(rand.NewPCG(1, 1)), 10, 4)
	for i := 0; i < b.N; i++ {
		pi, _ := net.Stationary()
		net.Currents(pi)
		for _, c := range net.CycleBasis() {
			net.Affinity(c)
		}
		net.EntropyProduction(pi)
	}
}

// TestSimulatorClock: on a stiff ring (rates 1e-6 .. 1e6, clock values up
// to ~1e11 where the float64 spacing is ~1e-5, far above the fast holding
// times of ~1e-6) every recorded time lies within one float64 spacing of
// the exact sum of the holding times drawn so far, computed here in
// 400-bit arithmetic (math/big) from a replay of the random stream. A
// plain float64 sum, checked the same way, drifts by many spacings (it
// drops every holding time below half a spacing), so the test can fail.
func TestSimulatorClock(t *testing.T) {
	net := ring([]float64{1e6, 1e5, 1e-6, 1e6, 1e5, 1e-6}, []float64{1e5, 1e6, 1e-6, 1e5, 1e6, 1e-6})
	net.Labels = []Label{{Name: "+", Detect: 1}, {Name: "-", Detect: 1}}
	net.Edges[0].Label = [2]int{0, 1}
	sim, err := NewSimulator(net, 9)
	if err != nil {
		t.Fatal(err)
	}
	ev, _ := sim.Visible(20000, nil)
	if err := sim.Err(); err != nil {
		t.Fatal(err)
	}
	// Replay: same seed, same draws in the same order.
	rng := rand.New(rand.NewPCG(9, 0x9e3779b97f4a7c15))
	exact := new(big.Float).SetPrec(400)
	naive, naiveBad, state, k := 0.0, 0, 0, 0
	for k < len(ev) {
		dt := rng.ExpFloat64() / sim.exit[state]
		exact.Add(exact, new(big.Float).SetPrec(400).SetFloat64(dt))
		naive += dt
		jumps := sim.out[state]
		u := rng.Float64()
		j := 0
		for j < len(jumps)-1 && u >= jumps[j].cum {
			j++
		}
		state = jumps[j].to
		if jumps[j].label == Hidden {
			continue
		}
		want, _ := exact.Float64()
		ulp := math.Nextafter(want, math.Inf(1)) - want
		if math.Abs(ev[k].Time-want) > ulp {
			t.Fatalf("event %d: time %.17g, exact sum %.17g (%.3g spacings)", k, ev[k].Time, want, math.Abs(ev[k].Time-want)/ulp)
		}
		if math.Abs(naive-want) > ulp {
			naiveBad++
		}
		k++
	}
	if naiveBad == 0 || ev[len(ev)-1].Time < 1e9 {
		t.Fatalf("a plain sum was never off by a spacing (%d events): test too weak", naiveBad)
	}
	t.Logf("last time %.4g; a plain float64 sum was off by more than a spacing at %d of %d events", ev[len(ev)-1].Time, naiveBad, len(ev))
}

// TestSimulatorBounded: instruments and networks that would make Visible
// loop without end, or write times outside the float64 range, are refused
// with an error instead.
func TestSimulatorBounded(t *testing.T) {
	net := ring([]float64{2, 3, 1}, []float64{1, 1, 1})
	net.Labels = []Label{{Name: "+", Detect: 1}, {Name: "-", Detect: 1}}
	net.Edges[0].Label = [2]int{0, 1}
	s, _ := NewSimulator(net, 1)
	if err := s.SetDeadTime(1e300); err == nil || !strings.Contains(err.Error(), "no event would be recorded") {
		t.Errorf("dead time 1e300: %v", err)
	}
	if err := s.SetFrame(1e-310); err == nil || !strings.Contains(err.Error(), "below the smallest normal") {
		t.Errorf("frame 1e-310: %v", err)
	}
	if err := s.SetFrame(1e-300); err != nil {
		t.Fatal(err)
	}
	s.StartStationary()
	if ev, _ := s.Visible(10, nil); len(ev) != 0 || s.Err() == nil || !strings.Contains(s.Err().Error(), "beyond 2^53") {
		t.Errorf("frame 1e-300: %d events, %v", len(ev), s.Err())
	}
	// No labelled transition: refused before any jump.
	hidden := net.Clone()
	hidden.Edges[0].Label = [2]int{Hidden, Hidden}
	h, err := NewSimulator(hidden, 1)
	if err != nil {
		t.Fatal(err)
	}
	if ev, jumps := h.Visible(5, nil); len(ev) != 0 || jumps != 0 || h.Err() == nil {
		t.Errorf("no detection: %d events, %d jumps, %v", len(ev), jumps, h.Err())
	}
	// Rates of 1e-306: holding times of ~1e306 overflow the clock within
	// a few hundred jumps.
	slow := ring([]float64{1e-306, 1e-306, 1e-306}, []float64{1e-306, 1e-306, 1e-306})
	slow.Labels = []Label{{Name: "+", Detect: 1}}
	slow.Edges[0].Label = [2]int{0, Hidden}
	o, err := NewSimulator(slow, 1)
	if err != nil {
		t.Fatal(err)
	}
	ev, _ := o.Visible(1000, nil)
	if o.Err() == nil || !strings.Contains(o.Err().Error(), "float64 range") || len(ev) >= 1000 {
		t.Errorf("clock overflow: %d events, %v", len(ev), o.Err())
	}
	for _, e := range ev {
		if math.IsInf(e.Time, 0) {
			t.Fatal("an infinite time was recorded")
		}
	}
	if again, jumps := o.Visible(1, nil); len(again) != 0 || jumps != 0 {
		t.Error("Visible ran after an error")
	}
}
