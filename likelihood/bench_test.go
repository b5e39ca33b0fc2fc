package likelihood

import (
	"math/rand/v2"
	"runtime"
	"testing"

	"edgewise/models"
)

// Benchmarks (run with, for example,
//
//	go test -run '^$' -bench . -benchtime 5x ./likelihood/
//
// ). Targets: 10^6 events of a 4-state ring with one visible edge in at
// most 60 ms for ln L and 150 ms with the gradient on one core; a 10-state
// network with two labels on two edges each (general path) in at most 1 s.
// The metrics ns/event, B/event (allocated bytes per event, beyond the
// 9 bytes per event of the data) and cpu-ms/op (process CPU time per
// evaluation, the figure to compare on a shared machine) are reported.

const benchEvents = 1_000_000

// coreRing4 is the 4-state ring of the benchmark: one visible edge (+/-).
func coreRing4() *models.Network {
	rng := rand.New(rand.NewPCG(21, 22))
	return coreRandomNet(rng, 4, 0, 1, 1)
}

// coreNet10 is a 10-state network with chords and labels + and - on two
// edges each.
func coreNet10() *models.Network {
	rng := rand.New(rand.NewPCG(23, 24))
	return coreMultiNet(rng, 10, 4, 1, 1)
}

func benchEval(b *testing.B, net *models.Network, grad bool, path PathMode) {
	benchEvalOpt(b, net, grad, Options{Workers: 1, Path: path})
}

func benchEvalOpt(b *testing.B, net *models.Network, grad bool, opt Options) {
	d := coreSimulate(b, net, 1, 1, benchEvents, opt.Instrument.DeadTime)
	if f := opt.Instrument.Frame; f > 0 {
		d = coreQuantise(d, f)
	}
	ev, err := NewNetworkEvaluator(net, opt)
	if err != nil {
		b.Fatal(err)
	}
	runtime.GC()
	b.ReportAllocs()
	b.ResetTimer()
	var ms0, ms1 runtime.MemStats
	runtime.ReadMemStats(&ms0)
	cpu0, okCPU := coreCPUTime()
	for i := 0; i < b.N; i++ {
		if grad {
			_, _, err = ev.Gradient(d)
		} else {
			_, err = ev.LogLik(d)
		}
		if err != nil {
			b.Fatal(err)
		}
	}
	cpu1, _ := coreCPUTime()
	runtime.ReadMemStats(&ms1)
	b.StopTimer()
	ev2 := float64(b.N) * float64(d.Events())
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/ev2, "ns/event")
	b.ReportMetric(float64(ms1.TotalAlloc-ms0.TotalAlloc)/ev2, "B/event")
	if okCPU {
		// CPU time of the whole process (all threads, GC included) per
		// evaluation: on a shared machine wall time also counts waiting.
		b.ReportMetric(float64(cpu1-cpu0)/float64(b.N)/1e6, "cpu-ms/op")
	}
}

func BenchmarkLogLikRing4(b *testing.B)       { benchEval(b, coreRing4(), false, PathAuto) }
func BenchmarkGradientRing4(b *testing.B)     { benchEval(b, coreRing4(), true, PathAuto) }
func BenchmarkLogLikGeneral10(b *testing.B)   { benchEval(b, coreNet10(), false, PathAuto) }
func BenchmarkGradientGeneral10(b *testing.B) { benchEval(b, coreNet10(), true, PathAuto) }

// Frame-limited timestamps (frame 0.05 time units, mean gap ~1): interval
// coefficients come from the per-goroutine cache.
func BenchmarkLogLikRing4Frames(b *testing.B) {
	benchEvalOpt(b, coreRing4(), false, Options{Workers: 1, Instrument: Instrument{Frame: 0.05}})
}

// Dead time and two workers.
func BenchmarkGradientRing4DeadTime2Workers(b *testing.B) {
	benchEvalOpt(b, coreRing4(), true, Options{Workers: 2, Instrument: Instrument{DeadTime: 0.01}})
}
