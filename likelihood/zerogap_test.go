package likelihood

import (
	"errors"
	"math"
	"testing"
)

// TestZeroGapRefused: with exact timestamps a zero gap is refused by name
// (record and event) on every route (fast and general path, value,
// gradient, PIT), whether psi(0) of its pair is 0 (+ after +: the ring
// must go round) or positive (- after +: the chain is at B); with the
// resolution declared as a frame the same records give a finite ln L.
func TestZeroGapRefused(t *testing.T) {
	net := obsRing([]float64{3, 2, 1.5}, []float64{1, 0.5, 0.7}, 1)
	for _, pair := range [][2]uint8{{0, 0}, {0, 1}} {
		d := &Data{Labels: []string{"+", "-"}, Records: []Record{
			{ID: "a", Time: []float64{0, 1, 2.5}, Label: []uint8{0, 1, 0}, End: math.NaN()},
			{ID: "b", Time: []float64{0.5, 1.25, 1.25, 3}, Label: []uint8{1, pair[0], pair[1], 0}, End: math.NaN()},
		}}
		for _, path := range []PathMode{PathFast, PathGeneral} {
			e, err := NewNetworkEvaluator(net, Options{Path: path})
			if err != nil {
				t.Fatal(err)
			}
			_, err1 := e.LogLik(d)
			_, _, err2 := e.Gradient(d)
			_, err3 := e.PIT(d, 1)
			for i, err := range []error{err1, err2, err3} {
				var zg *ZeroGapError
				if !errors.As(err, &zg) || zg.ID != "b" || zg.Event != 3 || zg.Time != 1.25 {
					t.Errorf("pair %v path %d route %d: error %v, want a zero gap at record b event 3", pair, path, i, err)
				}
			}
			ef, err := NewNetworkEvaluator(net, Options{Path: path, Instrument: Instrument{Frame: 0.01}})
			if err != nil {
				t.Fatal(err)
			}
			if ll, err := ef.LogLik(d); err != nil || math.IsInf(ll, 0) || math.IsNaN(ll) {
				t.Errorf("pair %v path %d with a frame: ln L %v, %v", pair, path, ll, err)
			}
		}
	}
}
