//go:build long

package infer

// Long coverage study of the fitted profile intervals, run with
//
//	go test -tags long -run 'TestFitProfileCoverageLong' -v -timeout 60m ./infer

import (
	"math"
	"runtime"
	"testing"
)

// TestFitProfileCoverageLong: as TestFitProfileCoverage with 400 data sets
// of 2000 events: the coverage of each rate's 95% profile interval (Venzon
// and Moolgavkar, Appl. Stat. 37, 87 (1988)) lies within the binomial
// 3-sigma band 0.95 +- 3 sqrt(0.95 0.05 / 400) = [0.917, 0.983]. The Wald
// coverage (ln x +- 1.96 SE) is logged for comparison, not checked: it is
// known to fall short when the log-likelihood is skewed.
func TestFitProfileCoverageLong(t *testing.T) {
	const sets = 400
	m := parseSpec(t, fitRing3Spec)
	c := runFitCoverage(t, m, sets, 2000, 80000, runtime.GOMAXPROCS(0))
	band := 3 * math.Sqrt(0.95*0.05/sets)
	t.Logf("coverage over %d sets of 2000 events (band %.3f..%.3f):\n%s", sets, 0.95-band, 0.95+band, c)
	for j, n := range c.names {
		cov := float64(c.profile[j]) / sets
		if math.Abs(cov-0.95) > band {
			t.Errorf("%s: profile coverage %.3f (%d/%d), outside %.3f..%.3f", n, cov, c.profile[j], sets, 0.95-band, 0.95+band)
		}
	}
}
