package infer

import (
	"flag"
	"fmt"
	"math"
	"strings"
	"testing"
)

// falseAlarmReps sets the data sets per model of TestChecksFalseAlarm. The
// default runs a small version in CI; the figures quoted in the README
// come from
//
//	go test ./infer -run TestChecksFalseAlarm -v -timeout 60m -args -falsealarm-reps 1000
var falseAlarmReps = flag.Int("falsealarm-reps", 0, "data sets per model of TestChecksFalseAlarm (0: the small CI version)")

// TestChecksFalseAlarm measures the false-alarm rate of the checks of one
// inspect report (AssumptionChecks, Holm at 5%) on stationary data whose
// labels are a first-order Markov chain and whose ++ and -- gaps have the
// same shape, so that every null hypothesis of the family holds: rings
// with one visible edge (ring3, ring4: every driven cycle passes through
// it) and a network at detailed balance (balanced: no driven cycle), each
// label on one directed edge, perfect detection, 4 records of 2,500
// events, the shape test calibrated by 199 resamples as inspect does. The
// family-wise rate must not exceed 5% by more than 3 binomial standard
// errors (Holm, Scand. J. Stat. 6, 65 (1979): at most the level under
// any dependence); each test's own rate at 5% is reported.
func TestChecksFalseAlarm(t *testing.T) {
	reps := *falseAlarmReps
	paths := []struct{ path, fw, bw string }{
		{"../testdata/ring3.toml", "+", "-"},
		{"../testdata/ring4.toml", "+", "-"},
		{"../testdata/balanced.toml", "out", "in"},
	}
	resamples := 199
	if reps == 0 {
		reps = 30
		resamples = 49
	}
	var lines []string
	total, alarms := 0, 0
	for mi, m := range paths {
		net := recModel(t, m.path)
		var names []string
		var raw, adj []int
		fam := 0
		for r := 0; r < reps; r++ {
			d := recSimulate(t, net, uint64(500000+100000*mi+r), 4, 2500)
			cs := AssumptionChecks(d, CheckOptions{Plus: m.fw, Minus: m.bw, ShapeResamples: resamples, Seed: uint64(r)})
			if names == nil {
				for _, c := range cs {
					names = append(names, strings.SplitN(c.Name, " (", 2)[0])
				}
				raw, adj = make([]int, len(cs)), make([]int, len(cs))
			}
			any := false
			for i, c := range cs {
				if c.P <= 0.05 {
					raw[i]++
				}
				if c.Reject {
					adj[i]++
					any = true
				}
			}
			if any {
				fam++
			}
		}
		total += reps
		alarms += fam
		line := fmt.Sprintf("%s: family-wise %.3f;", m.path[12:], float64(fam)/float64(reps))
		for i, n := range names {
			line += fmt.Sprintf(" [%s: %.3f raw, %.3f Holm]", n, float64(raw[i])/float64(reps), float64(adj[i])/float64(reps))
		}
		lines = append(lines, line)
	}
	rate := float64(alarms) / float64(total)
	ceil := 0.05 + 3*math.Sqrt(0.05*0.95/float64(total))
	t.Logf("false alarms of the Holm-corrected checks at 5%%, %d data sets: %.4f (ceiling %.4f)\n%s", total, rate, ceil, strings.Join(lines, "\n"))
	if rate > ceil {
		t.Errorf("family-wise false-alarm rate %.4f above %.4f", rate, ceil)
	}
}
