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
// The metrics ns/event and B/event (allocated bytes per event, beyond the
// 9 bytes per event of the data) are reported.

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
	d := coreSimulate(b, net, 1, 1, benchEvents, 0)
	ev, err := NewNetworkEvaluator(net, Options{Workers: 1, Path: path})
	if err != nil {
		b.Fatal(err)
	}
	runtime.GC()
	b.ReportAllocs()
	b.ResetTimer()
	var ms0, ms1 runtime.MemStats
	runtime.ReadMemStats(&ms0)
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
	runtime.ReadMemStats(&ms1)
	b.StopTimer()
	ev2 := float64(b.N) * float64(d.Events())
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/ev2, "ns/event")
	b.ReportMetric(float64(ms1.TotalAlloc-ms0.TotalAlloc)/ev2, "B/event")
}

func BenchmarkLogLikRing4(b *testing.B)       { benchEval(b, coreRing4(), false, PathAuto) }
func BenchmarkGradientRing4(b *testing.B)     { benchEval(b, coreRing4(), true, PathAuto) }
func BenchmarkLogLikGeneral10(b *testing.B)   { benchEval(b, coreNet10(), false, PathAuto) }
func BenchmarkGradientGeneral10(b *testing.B) { benchEval(b, coreNet10(), true, PathAuto) }
