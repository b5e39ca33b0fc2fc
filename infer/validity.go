package infer

import (
	"fmt"
	"math"
	"strings"

	"edgewise/likelihood"
)

// This file holds the one rule that decides whether the model-free lower
// bounds on the entropy production rate (F*J, the uncertainty-relation
// bound J^2/D and the transition-based waiting-time bound) may be stated
// for a data set. Every command that shows or uses those bounds calls it
// (fluct, inspect, predict, and the comparison of models), so they never
// disagree on when a bound is a bound.

// MarkovWithholdLevel is the level at which the data's Markov-order test
// withholds the bounds: they are withheld when the test of first- against
// second-order dependence of the labels (MarkovOrderTest) gives p below
// it. It is stringent on purpose: a rejection is then strong evidence that
// the label sequence is not the first-order chain the bounds rest on
// (labels on several edges, spurious events, hidden memory), and valid
// data lose their bounds in about 0.1% of data sets (the level of the
// test's chi-square approximation; with few triplets it is rough).
const MarkovWithholdLevel = 1e-3

// Instrument facts the data cannot show: what the experimenter knows about
// the labels and the detection process. The zero value says "one directed
// edge per label, both directions detected alike, no dead time".
type BoundConditions struct {
	// MultiEdge: a label may sit on several directed edges.
	MultiEdge bool
	// DetectForward and DetectBackward are the detection probabilities of
	// the two labels of the visible edge, when known; 0 means unknown
	// (taken as equal). Unequal values break the bounds.
	DetectForward, DetectBackward float64
	// DeadTime is the instrument's dead time after each recorded event
	// (time units); any positive value breaks the bounds.
	DeadTime float64
}

// BoundValidity is the decision of BoundsValid.
type BoundValidity struct {
	// Hold is true when the bounds may be stated as lower bounds on the
	// entropy production rate (with Markov.P beside them); false when they
	// are withheld, for the Reasons given.
	Hold    bool
	Reasons []string
	// Markov is the data's Markov-order test (Markov.N == 0 and P NaN when
	// no data were given or the test could not be made), and Level the
	// level at which it withholds the bounds (MarkovWithholdLevel).
	Markov TestResult
	Level  float64
	// Tested reports whether the Markov-order test was made.
	Tested bool
	// Assumes lists what the bounds still rest on when they hold, to be
	// stated beside them: what the data cannot show.
	Assumes []string
}

// Reason joins the reasons for withholding the bounds ("" when they hold).
func (v BoundValidity) Reason() string { return strings.Join(v.Reasons, "; ") }

// BoundsValid decides whether the model-free entropy-production lower
// bounds hold, from the data's Markov-order test (nil when there are no
// data, e.g. for a model's own prediction) and what is known about the
// instrument. They are withheld, each reason stated:
//
//   - when a label may sit on several directed edges: the reverse of an
//     event is then not known, c need not be a current of the network and
//     F*J can exceed sigma (design section 8);
//   - when + and - are detected with different probabilities p_+ != p_-:
//     the labels then coarse-grain a chain whose entropy production is
//     sigma + J ln(p_+/p_-), so even an undriven network shows F*J > 0;
//   - with a dead time: the instrument is blind after an event and not
//     before, which breaks time-reversal symmetry of the recorded sequence;
//   - when the data's Markov-order test rejects first-order dependence at
//     MarkovWithholdLevel: each of the above (and spurious events) makes
//     the labels non-Markov, while a single directed edge per label with
//     equal detection keeps them first order (Raghu and Neri,
//     arXiv:2406.08926: sigma >= F*J is a Kullback-Leibler bound on a
//     first-order label sequence).
//
// Otherwise they hold, with the test's p beside them and the assumptions
// the data cannot check listed in Assumes. A test that does not reject is
// not proof of first-order labels: it has little power on short records.
func BoundsValid(markov *TestResult, c BoundConditions) BoundValidity {
	v := BoundValidity{Level: MarkovWithholdLevel, Markov: TestResult{P: math.NaN(), Stat: math.NaN()}}
	if c.MultiEdge {
		v.Reasons = append(v.Reasons, "a label may sit on several directed edges: the reverse of an event is not known, so F*J, J^2/D and the waiting-time sum can exceed sigma")
	}
	if c.DetectForward > 0 && c.DetectBackward > 0 && c.DetectForward != c.DetectBackward {
		v.Reasons = append(v.Reasons, fmt.Sprintf("the two directions are detected with different probabilities (%g and %g): this breaks time-reversal symmetry, so even an undriven system shows F*J > 0", c.DetectForward, c.DetectBackward))
	}
	if c.DeadTime > 0 {
		v.Reasons = append(v.Reasons, fmt.Sprintf("a dead time of %g after each event: the instrument is blind after an event and not before, which breaks time-reversal symmetry, so even an undriven system shows F*J > 0", c.DeadTime))
	}
	if markov != nil {
		v.Markov = *markov
		v.Tested = !math.IsNaN(markov.P) && markov.DF > 0
		if v.Tested && markov.P < MarkovWithholdLevel {
			v.Reasons = append(v.Reasons, fmt.Sprintf("the labels are not a first-order Markov chain (Markov-order test G = %.4g on %d df, p = %.3g < %g): a label on several edges, spurious events or hidden memory, each of which can make F*J exceed sigma", markov.Stat, markov.DF, markov.P, MarkovWithholdLevel))
		}
	}
	v.Hold = len(v.Reasons) == 0
	if v.Hold {
		if markov != nil && !v.Tested {
			v.Assumes = append(v.Assumes, "first-order Markov labels (the Markov-order test could not be made: "+orNone(markov.Note)+")")
		} else if markov != nil {
			v.Assumes = append(v.Assumes, fmt.Sprintf("first-order Markov labels (Markov-order test p = %.3g, not rejected at %g; not a proof)", markov.P, MarkovWithholdLevel))
		}
		if !c.MultiEdge {
			v.Assumes = append(v.Assumes, "each label on one directed edge")
		}
		if c.DetectForward == 0 || c.DetectBackward == 0 {
			v.Assumes = append(v.Assumes, "+ and - detected with equal probability")
		}
		v.Assumes = append(v.Assumes, "no dead time", "stationary records")
	}
	return v
}

// CheckBounds runs the Markov-order test on d and applies BoundsValid.
func CheckBounds(d *likelihood.Data, c BoundConditions) BoundValidity {
	m := MarkovOrderTest(d)
	return BoundsValid(&m, c)
}

func orNone(s string) string {
	if s == "" {
		return "too few triplets"
	}
	return s
}
