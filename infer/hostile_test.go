package infer

import (
	"math"
	"math/rand/v2"
	"runtime"
	"strings"
	"testing"

	"edgewise/likelihood"
)

// TestFluctHugeWindow: a window longer than every record is refused before
// any allocation of its size (n = 1e8 allocated 5.7 GB before), and short
// records next to a long one get no count table of 2n+1 entries.
func TestFluctHugeWindow(t *testing.T) {
	net := recRing([]float64{3, 2, 1}, []float64{1, 1, 1}, 1)
	d := recSimulate(t, net, 1, 1, 2000)
	var m0, m1 runtime.MemStats
	runtime.ReadMemStats(&m0)
	_, err := FluctuationTest(d, []int{5, 100000000}, FluctOptions{})
	runtime.ReadMemStats(&m1)
	if err == nil || !strings.Contains(err.Error(), "no record has 100000000 events (the longest has 2000)") {
		t.Fatalf("error %v", err)
	}
	if a := m1.TotalAlloc - m0.TotalAlloc; a > 10<<20 {
		t.Errorf("allocated %d bytes before refusing", a)
	}
	// 2000 records of 3 events and one of 20000: windows of 10000 events.
	many := &likelihood.Data{Labels: d.Labels}
	for r := 0; r < 2000; r++ {
		many.Records = append(many.Records, likelihood.Record{Time: []float64{0, 1, 2}, Label: []uint8{0, 1, 0}, End: math.NaN()})
	}
	many.Records = append(many.Records, recSimulate(t, net, 2, 1, 20000).Records[0])
	runtime.ReadMemStats(&m0)
	if _, err := FluctuationTest(many, []int{10000}, FluctOptions{}); err != nil {
		t.Fatal(err)
	}
	runtime.ReadMemStats(&m1)
	if a := m1.TotalAlloc - m0.TotalAlloc; a > 50<<20 {
		t.Errorf("allocated %d bytes for 2001 records and n = 10000 (2000 tables of 2n+1 counts would be 640 MB)", a)
	}
}

// TestHomogeneityFlat: the flat homogeneity G (one pass, no table per
// group) equals the sum over l of the independence G of each groups x
// next-label table built as nested slices (independenceG, another route),
// with its degrees of freedom and pair count, on random sparse counts.
func TestHomogeneityFlat(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 3))
	for trial := 0; trial < 200; trial++ {
		k, groups := 1+rng.IntN(4), 1+rng.IntN(6)
		counts := make([]int, groups*k*k)
		for i := range counts {
			if rng.IntN(3) > 0 {
				counts[i] = rng.IntN(20)
			}
		}
		g, df, n, _ := homogeneityG(counts, k, nil)
		wg, wdf, wn := 0.0, 0, 0
		for l := 0; l < k; l++ {
			tab := make([][]float64, groups)
			for gi := range tab {
				tab[gi] = make([]float64, k)
				for b := range k {
					tab[gi][b] = float64(counts[(gi*k+l)*k+b])
					wn += counts[(gi*k+l)*k+b]
				}
			}
			gl, dl := independenceG(tab)
			wg += gl
			wdf += dl
		}
		if math.Abs(g-wg) > 1e-9*(1+wg) || df != wdf || n != wn {
			t.Fatalf("trial %d: G %v df %d n %d, want %v %d %d", trial, g, df, n, wg, wdf, wn)
		}
	}
}
