package infer

import (
	"flag"
	"fmt"
	"math"
	"strings"
	"testing"

	"edgewise/likelihood"
)

// coverageReps sets the replicates per case of TestIntervalCoverage. The
// default runs a small version in CI; the figures quoted in the README
// come from
//
//	go test ./infer -run TestIntervalCoverage -v -timeout 60m -args -coverage-reps 400
var coverageReps = flag.Int("coverage-reps", 0, "replicates per case of TestIntervalCoverage (0: the small CI version)")

// coverageCase is one network and data size of the coverage study.
type coverageCase struct {
	name, path, fw, bw string
	records, events    int
}

// TestIntervalCoverage measures by simulation how often the 95% intervals
// contain the exact values (likelihood.Predictor: rates, J, D from the
// scaled cumulant generating function, F from the embedded chain): the
// rate of +, the activity, J, D (Summarize), F (delta method), F*J and
// J^2/D (EntropyBounds), at equilibrium (balanced.toml, F = 0), near
// stalling (twocycle-stall.toml, F = 0.072) and far from it (ring4.toml,
// F = 1.1; ring3.toml, F = 4.3), with 3,000 and 50,000 events (4 records).
// Each coverage must not fall below 95% by more than 3 binomial standard
// errors; over-coverage is reported, not failed (near equilibrium the
// intervals of F*J and J^2/D are conservative by construction,
// boundinterval.go). The coverage of the Garwood interval of the activity,
// which assumes Poisson counting, is reported for contrast. The CI version
// runs 40 replicates of two cases.
func TestIntervalCoverage(t *testing.T) {
	reps := *coverageReps
	all := []coverageCase{
		{"equilibrium", "../testdata/balanced.toml", "out", "in", 4, 750},
		{"near stalling", "../testdata/twocycle-stall.toml", "+", "-", 4, 750},
		{"far (F = 1.1)", "../testdata/ring4.toml", "+", "-", 4, 750},
		{"far (F = 4.3)", "../testdata/ring3.toml", "+", "-", 4, 750},
		{"equilibrium", "../testdata/balanced.toml", "out", "in", 4, 12500},
		{"near stalling", "../testdata/twocycle-stall.toml", "+", "-", 4, 12500},
		{"far (F = 1.1)", "../testdata/ring4.toml", "+", "-", 4, 12500},
		{"far (F = 4.3)", "../testdata/ring3.toml", "+", "-", 4, 12500},
	}
	cases := all
	if reps == 0 {
		reps = 40
		cases = []coverageCase{all[0], all[6]}
	}
	const level = 0.95
	floor := level - 3*math.Sqrt(level*(1-level)/float64(reps))
	var report []string
	for ci, c := range cases {
		net := recModel(t, c.path)
		plus, minus := net.LabelIndex(c.fw), net.LabelIndex(c.bw)
		k, err := likelihood.NewKernels(net)
		if err != nil {
			t.Fatal(err)
		}
		pr, err := likelihood.NewPredictor(k, likelihood.Instrument{})
		if err != nil {
			t.Fatal(err)
		}
		q := make([]float64, len(k.Labels))
		q[plus], q[minus] = 1, -1
		J, D, err := pr.Current(q)
		if err != nil {
			t.Fatal(err)
		}
		F := pr.EffectiveAffinity(plus, minus)
		rates := pr.Rates()
		truth := []float64{rates[plus], rates[plus] + rates[minus], J, D, F, F * J, J * J / D}
		names := []string{"rate(+)", "activity", "J", "D", "F", "F*J", "J^2/D"}
		garwood := 0 // the Garwood interval of the activity, for contrast
		covered := make([]int, len(names))
		given := make([]int, len(names))
		for r := 0; r < reps; r++ {
			d := recSimulate(t, net, uint64(100000*ci+r+1), c.records, c.events)
			s, err := Summarize(d, SummaryOptions{Plus: c.fw, Minus: c.bw})
			if err != nil {
				t.Fatal(err)
			}
			b, err := EntropyBounds(d, BoundOptions{Labels: EdgeLabels{Forward: c.fw, Backward: c.bw}})
			if err != nil {
				t.Fatal(err)
			}
			p := &s.Pooled
			if lo, hi := PoissonInterval(int(p.Activity.Value*p.Duration+0.5), level); lo/p.Duration <= truth[1] && truth[1] <= hi/p.Duration {
				garwood++
			}
			for i, e := range []Estimate{p.Rates[plus], p.Activity, p.Current, p.Diffusion, p.Affinity, b.FJ, b.TUR} {
				switch {
				case i >= 5 && !b.Claimed:
					// A valid data set can lose its bounds (at the Markov
					// test's level): counted as given and not covered,
					// which errs against the method.
					given[i]++
					continue
				case e.Undefined:
					continue // too few events: reported as fewer given
				}
				given[i]++
				if e.Lo <= truth[i] && truth[i] <= e.Hi {
					covered[i]++
				}
			}
		}
		line := fmt.Sprintf("%-14s %6d events:", c.name, c.records*c.events)
		for i, n := range names {
			cov := float64(covered[i]) / float64(max(given[i], 1))
			line += fmt.Sprintf("  %s %.3f", n, cov)
			if given[i] < reps {
				line += fmt.Sprintf(" (%d of %d given)", given[i], reps)
			}
			if given[i] > 0 && float64(covered[i]) < floor*float64(given[i]) {
				t.Errorf("%s, %d events: %s covered %d of %d (%.3f), below %.3f", c.name, c.records*c.events, n, covered[i], given[i], cov, floor)
			}
		}
		line += fmt.Sprintf("  [activity, Garwood: %.3f]", float64(garwood)/float64(reps))
		report = append(report, line)
	}
	t.Logf("coverage of 95%% intervals, %d replicates per case (3-SE floor %.3f):\n%s", reps, floor, strings.Join(report, "\n"))
}
