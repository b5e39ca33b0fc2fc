package likelihood

import "testing"

// BenchmarkCountStopped200: exact post-selected count-stopped law, n = 200,
// 4-state ring with one visible edge.
func BenchmarkCountStopped200(b *testing.B) {
	p := obsPredictor(b, obsRing([]float64{3, 2, 4, 1}, []float64{1, 0.5, 1, 2}, 1), 0)
	q := []int{1, -1}
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		if _, err := p.CountStopped(200, q, true); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkCountStopped200MultiEdge: the same with a label on two edges, a
// dead time and missed events (dense post-event kernels).
func BenchmarkCountStopped200MultiEdge(b *testing.B) {
	p := obsPredictor(b, obsMultiEdge(0.9), 0.05)
	q := []int{1, -1}
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		if _, err := p.CountStopped(200, q, true); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkFixedTime: exact fixed-time law on the 4-state two-cycle network
// at t = 50 (Lambda t = 275, about 400 uniformised jumps).
func BenchmarkFixedTime(b *testing.B) {
	p := obsPredictor(b, obsTwoCycle(1), 0)
	q := []int{1, -1}
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		if _, err := p.FixedTime(50, q); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkNewPredictor: kernels to observables, 4 states, with dead time.
func BenchmarkNewPredictor(b *testing.B) {
	net := obsTwoCycle(0.9)
	k, err := NewKernels(net)
	if err != nil {
		b.Fatal(err)
	}
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		if _, err := NewPredictor(k, Instrument{DeadTime: 0.1}); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkFixedTimeDeadTime: as BenchmarkFixedTime with 30% missed events
// and a dead time of 0.1 (about 5% of the mean gap).
func BenchmarkFixedTimeDeadTime(b *testing.B) {
	p := obsPredictor(b, obsTwoCycle(0.7), 0.1)
	q := []int{1, -1}
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		if _, err := p.FixedTime(50, q); err != nil {
			b.Fatal(err)
		}
	}
}
