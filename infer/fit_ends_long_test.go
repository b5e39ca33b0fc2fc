//go:build long

package infer

// Long checks of the ends of the fit's local searches, run with
//
//	go test -tags long -run 'TestFitSearchEndsLong' -v -timeout 60m ./infer

import "testing"

// TestFitSearchEndsLong: on 10^5 events simulated from a 3-state ring, a
// 4-state ring and a two-cycle network (ring4 with a chord), with 12
// starts each, the start at the truth and most converged random starts
// reach the same maximum, which is not below ln L at the truth; the other
// starts end at maxima on the edge of the parameter space, never at a
// second interior maximum (checkSearchEnds; properties of a maximum, no
// source needed).
func TestFitSearchEndsLong(t *testing.T) {
	t.Run("ring3", func(t *testing.T) {
		checkSearchEnds(t, parseSpec(t, fitRing3Spec), 100000, 12, 31)
	})
	t.Run("ring4", func(t *testing.T) {
		checkSearchEnds(t, freeAll(loadSpec(t, "../testdata/ring4.toml")), 100000, 12, 32)
	})
	t.Run("twocycle", func(t *testing.T) {
		checkSearchEnds(t, parseSpec(t, fitTwoCycleSpec), 100000, 12, 33)
	})
}
