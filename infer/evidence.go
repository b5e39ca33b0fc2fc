package infer

import (
	"fmt"
	"math"

	"edgewise/likelihood"
)

// Evidence is what the records say on their own, computed once for a
// comparison: the statistics every candidate is held against.
type Evidence struct {
	Plus, Minus   string // labels of the visible edge
	Level         float64
	Summary       *Summary
	F             Estimate // the data's effective affinity
	Shape         *ShapeResult
	ShapeP        float64 // twice the smaller of the KS and AD p-values (Bonferroni over two statistics of one hypothesis)
	ShapeDiffers  bool    // ShapeP < 1 - Level
	Markov        TestResult
	NotMarkov     bool // Markov.P < 1 - Level
	Bounds        *Bounds
	BoundsHold    bool
	BoundsReason  string
	Windows       []int
	Fluct         []Fluctuation // per window length, the data's count histograms
	SingleEdgeOK  bool          // the records hold only the two labels of one edge
	Notes         []string
	evidenceLevel float64
}

// EvidenceOptions sets up GatherEvidence.
type EvidenceOptions struct {
	Plus, Minus string  // "" and "": "+" and "-"
	Level       float64 // confidence level, default 0.95; tests reject at 1 - Level
	Windows     []int   // count-stopped window lengths, default 5, 10, 20
	Conditions  BoundConditions
}

// GatherEvidence computes the data's side of a comparison: the effective
// affinity F, the shape test of the ++ and -- gaps, the Markov-order test
// of the labels, the entropy-production lower bounds (only where they hold
// for the instrument, BoundsValid) and the count-stopped histograms of the
// windows. A statistic that cannot be computed is left out with a note.
func GatherEvidence(d *likelihood.Data, o EvidenceOptions) (*Evidence, error) {
	if o.Plus == "" && o.Minus == "" {
		o.Plus, o.Minus = "+", "-"
	}
	if o.Level == 0 {
		o.Level = 0.95
	}
	if len(o.Windows) == 0 {
		o.Windows = []int{5, 10, 20}
	}
	ev := &Evidence{Plus: o.Plus, Minus: o.Minus, Level: o.Level, Windows: o.Windows, ShapeP: math.NaN()}
	alpha := 1 - o.Level
	sum, err := Summarize(d, SummaryOptions{Plus: o.Plus, Minus: o.Minus, Level: o.Level})
	if err != nil {
		return nil, err
	}
	ev.Summary = sum
	ev.F = sum.Pooled.Affinity
	ev.Markov = MarkovOrderTest(d)
	ev.NotMarkov = !math.IsNaN(ev.Markov.P) && ev.Markov.DF > 0 && ev.Markov.P < alpha
	pl, mi, err := LabelPair(d, o.Plus, o.Minus)
	if err != nil {
		ev.Notes = append(ev.Notes, "no visible edge "+o.Plus+"/"+o.Minus+" in the records: "+err.Error())
		return ev, nil
	}
	if sh, err := ShapeTest(d, pl, mi); err == nil {
		ev.Shape = &sh
		ev.ShapeP = math.Min(1, 2*math.Min(sh.P, sh.AD.P))
		ev.ShapeDiffers = ev.ShapeP < alpha
	} else {
		ev.Notes = append(ev.Notes, "shape test not made: "+err.Error())
	}
	labels := EdgeLabels{Forward: o.Plus, Backward: o.Minus}
	if _, _, err := labels.resolve(d); err != nil {
		ev.Notes = append(ev.Notes, "count-stopped windows and entropy bounds need one visible edge: "+err.Error())
		return ev, nil
	}
	ev.SingleEdgeOK = true
	b, err := EntropyBounds(d, BoundOptions{Labels: labels, Level: o.Level, Conditions: o.Conditions})
	if err != nil {
		ev.Notes = append(ev.Notes, "entropy bounds not computed: "+err.Error())
	} else {
		ev.Bounds = b
		ev.BoundsHold = b.Validity.Hold
		ev.BoundsReason = b.Validity.Reason()
	}
	var ns []int
	for _, n := range o.Windows {
		if n >= 2 {
			ns = append(ns, n)
		}
	}
	if len(ns) > 0 {
		fl, err := FluctuationTest(d, ns, FluctOptions{Labels: labels, Level: o.Level, Boot: 1})
		if err != nil {
			ev.Notes = append(ev.Notes, "count-stopped windows not computed: "+err.Error())
		} else {
			ev.Fluct = fl
		}
	}
	return ev, nil
}

// Bound returns the largest entropy-production lower bound that holds,
// with its name, or ok = false when none holds.
func (ev *Evidence) Bound() (name string, e Estimate, ok bool) {
	if ev.Bounds == nil || !ev.BoundsHold {
		return "", Estimate{}, false
	}
	best := math.Inf(-1)
	for _, c := range []struct {
		n string
		e Estimate
	}{{"F*J", ev.Bounds.FJ}, {"J^2/D", ev.Bounds.TUR}, {"transition-based", ev.Bounds.Transition}} {
		if c.e.Undefined || math.IsNaN(c.e.Lo) {
			continue
		}
		if c.e.Lo > best {
			best, name, e, ok = c.e.Lo, c.n, c.e, true
		}
	}
	return name, e, ok
}

func (ev *Evidence) String() string {
	return fmt.Sprintf("F = %.4g, shape p = %.3g, Markov p = %.3g", ev.F.Value, ev.ShapeP, ev.Markov.P)
}
