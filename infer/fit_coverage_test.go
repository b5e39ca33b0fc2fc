package infer

import (
	"fmt"
	"math"
	"strings"
	"testing"

	"edgewise/likelihood"
	"edgewise/models"

	"gonum.org/v1/gonum/stat/distuv"
)

// fitCoverage is the tally of a coverage study of fitted intervals.
type fitCoverage struct {
	names   []string
	sets    int
	profile []int // sets whose 95% profile interval holds the truth, per rate
	wald    []int // the same for ln x +- 1.96 SE(ln x)
	missing []int // sets with no interval (parameter reported undetermined)
	open    []int // sets with a one-sided interval
	notes   []string
}

// runFitCoverage fits the model m (truth: its start values) to sets data
// sets of one record of events events each, simulated with seeds
// seed0+1..seed0+sets, with profile intervals, and counts per rate how
// often the 95% profile interval and the Wald interval hold the truth.
// Fits of different sets run in parallel (one worker each); besides the
// tally it checks that no maximum lies below ln L at the truth.
func runFitCoverage(t *testing.T, m *models.Model, sets, events int, seed0 uint64, workers int) *fitCoverage {
	t.Helper()
	truth := m.Start()
	net, err := m.Network(truth)
	if err != nil {
		t.Fatal(err)
	}
	type one struct {
		res    *FitResult
		llTrue float64
		err    error
	}
	out := make([]one, sets)
	parallel(sets, workers, func(i int) {
		d := recSimulate(t, net, seed0+uint64(i)+1, 1, events)
		ll, err := likelihood.ModelLogLik(m, truth, d, likelihood.Options{})
		if err != nil {
			out[i].err = err
			return
		}
		res, err := Fit(m, d, FitOptions{Starts: 2, Seed: uint64(i), Workers: 1, Profile: true})
		out[i] = one{res: res, llTrue: ll, err: err}
	})
	z := distuv.UnitNormal.Quantile(0.975)
	p := len(truth)
	c := &fitCoverage{names: m.Free(), sets: sets, profile: make([]int, p), wald: make([]int, p), missing: make([]int, p), open: make([]int, p)}
	for i, o := range out {
		if o.err != nil {
			t.Fatalf("set %d: %v", i+1, o.err)
		}
		r := o.res
		if r.LogLik < o.llTrue-1e-6 {
			t.Errorf("set %d: max ln L %.6f below ln L at the truth %.6f", i+1, r.LogLik, o.llTrue)
		}
		if r.Level != 0.95 {
			t.Fatalf("level %g", r.Level)
		}
		for j, pf := range r.Params {
			if pf.Profile == nil {
				c.missing[j]++
				c.notes = append(c.notes, fmt.Sprintf("set %d: %s has no interval (determined %v, at bound %q)", i+1, pf.Name, pf.Determined, pf.AtBound))
				continue
			}
			pi := pf.Profile
			if pi.LowerOpen || pi.UpperOpen {
				c.open[j]++
			}
			if pi.Lower <= truth[j] && truth[j] <= pi.Upper {
				c.profile[j]++
			}
			if math.Abs(math.Log(pf.Value)-math.Log(truth[j])) <= z*pf.SELog {
				c.wald[j]++
			}
		}
	}
	return c
}

func (c *fitCoverage) String() string {
	var b strings.Builder
	fmt.Fprintf(&b, "%-6s %20s %20s %8s %8s\n", "rate", "profile 95%", "Wald 95% (ln x)", "none", "1-sided")
	for j, n := range c.names {
		fmt.Fprintf(&b, "%-6s %9d/%d (%5.1f%%) %9d/%d (%5.1f%%) %8d %8d\n", n,
			c.profile[j], c.sets, 100*float64(c.profile[j])/float64(c.sets),
			c.wald[j], c.sets, 100*float64(c.wald[j])/float64(c.sets), c.missing[j], c.open[j])
	}
	for _, s := range c.notes {
		b.WriteString(s + "\n")
	}
	return b.String()
}

// TestFitProfileCoverage: 95% profile-likelihood intervals (Venzon and
// Moolgavkar, Appl. Stat. 37, 87 (1988)) of the six rates of a 3-state
// ring (fitRing3Spec, one visible edge) over 20 data sets of 2000 events
// simulated from the truth: each rate's interval holds the truth in at
// least 15 of 20 sets. If the coverage is 95%, P(at most 14 of 20) =
// 3.3e-4 per rate (binomial tail, computed below), 0.2% for any of the
// six; a coverage of 75% or less fails with probability >= 0.38 per
// rate, 80% or less with probability >= 0.20. The long version (TestFitProfileCoverageLong, -tags long) runs
// 400 sets and checks both sides of the binomial band.
func TestFitProfileCoverage(t *testing.T) {
	if testing.Short() {
		t.Skip("coverage study: skipped with -short")
	}
	const sets, need = 20, 15
	tail := distuv.Binomial{N: sets, P: 0.95}.CDF(need - 1)
	if tail > 0.005 {
		t.Fatalf("binomial tail P(X <= %d | %d, 0.95) = %.4f: threshold too strict", need-1, sets, tail)
	}
	m := parseSpec(t, fitRing3Spec)
	c := runFitCoverage(t, m, sets, 2000, 70000, 2)
	t.Logf("coverage over %d sets of 2000 events (P(X <= %d | 95%%) = %.4f):\n%s", sets, need-1, tail, c)
	for j, n := range c.names {
		if c.profile[j] < need {
			t.Errorf("%s: profile interval holds the truth in %d of %d sets, want >= %d", n, c.profile[j], sets, need)
		}
	}
}
