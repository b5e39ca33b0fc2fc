package infer

import (
	"errors"
	"fmt"
	"math"

	"edgewise/likelihood"
)

// This file sets a model's predictions against data: each quantity with
// the model's value, the data's estimate and a test that stays finite and
// keeps its level with small counts, and the tests of one comparison as a
// Holm-corrected family. predict uses it; the ranking of models uses the
// same rows.

// SlopeTest is the score test of a data set's fluctuation histogram
// against a model's value of the same slope (CountDist.SlopeEstimand of
// the model's law for the same kind of window): with W windows and N(c)
// of them at current c,
//
//	U = sum_{c>0} c [N(c) - (N(c) + N(-c)) sigma(s_m c)],   z = U / sqrt(W ScoreVar),
//
// s_m the model's slope and ScoreVar its per-window score variance. Under
// the model U has mean 0 (s_m is the root of the same score in
// expectation) and variance W ScoreVar (windows taken as independent, as
// non-overlapping windows nearly are); z is referred to the normal law.
// Unlike (slope_hat - s_m)/SE it is finite when the data's slope is not
// (windows on one side only) and uses the model's variance, so zero counts
// do not make it infinite. Z > 0 when the data's slope is above the
// model's. For all windows (not post-selected) of a few events, adjacent
// windows are negatively correlated through their shared boundary label,
// which the variance ignores: the test is then conservative (Var z
// measured 0.75 for windows of 5 events on ring4, 0.92-0.99 for
// post-selected and fixed-time windows; modelcheck_test.go).
func SlopeTest(s Symmetry, m likelihood.SlopeEstimand) CountTest {
	t := CountTest{K: -1, N: -1, Model: m.Slope, Expected: math.NaN(), Method: "score test of the window counts at the model's slope (normal)"}
	if !m.Defined || !(m.ScoreVar > 0) || s.Windows == 0 {
		t.P, t.Z = math.NaN(), math.NaN()
		t.Note = "no test: the model's slope is not finite (one sign of c never occurs) or there are no windows"
		return t
	}
	u := 0.0
	for c := 1; c <= s.Offset; c++ {
		k, j := float64(s.Count[s.Offset+c]), float64(s.Count[s.Offset-c])
		if k+j == 0 {
			continue
		}
		pr := 1 / (1 + math.Exp(-m.Slope*float64(c)))
		u += float64(c) * (k - (k+j)*pr)
	}
	t.Z = u / math.Sqrt(float64(s.Windows)*m.ScoreVar)
	t.P = normalSF2(t.Z)
	return t
}

// CurrentTest tests the data's current j (1/time, over the observed time
// T) against a model's current jm with the model's diffusion coefficient
// dm: Var(J_hat) = 2 D / T at long times (Var c(t) ~ 2 D t), so
// z = (j - jm) / sqrt(2 dm / T), referred to the normal law. The model's
// variance makes z finite whatever the data's own spread.
func CurrentTest(j, T, jm, dm float64) CountTest {
	t := CountTest{K: -1, N: -1, Model: jm, Expected: math.NaN(), Method: "z with the model's variance 2D/T (normal)"}
	if !(dm > 0) || !(T > 0) || math.IsNaN(j) {
		t.P, t.Z = math.NaN(), math.NaN()
		t.Note = "no test: the model's D or the observed time is not positive"
		return t
	}
	t.Z = (j - jm) / math.Sqrt(2*dm/T)
	t.P = normalSF2(t.Z)
	return t
}

// Agreement is one quantity of a model set against data.
type Agreement struct {
	Quantity string
	Model    float64  // the model's value
	Data     Estimate // the data's estimate with its interval
	Test     CountTest
	// Check is Test as a member of the comparison's family, with its
	// Holm-adjusted p-value.
	Check Check
}

// AgainstOptions sets up AgainstModel.
type AgainstOptions struct {
	Plus, Minus int     // label indices of the visible edge in both data and model
	Windows     []int   // window lengths of the count-stopped slopes (none: no slopes)
	FixedTime   bool    // also the fixed-time slopes
	Level       float64 // confidence level of the intervals and family-wise level of the checks; 0 means 0.95
}

// AgainstModel sets the data d against the model's predictor p (built for
// the same instrument; the data's labels must be the model's, in the same
// order): P(+|+) and P(-|-) by the exact binomial test (BinomialTest), F by
// the exact likelihood-ratio test (AffinityTest), J with the model's
// variance (CurrentTest), and, for each window length, the count-stopped
// slope of all windows and of post-selected ones (and the fixed-time one)
// by SlopeTest against the model's value of the same estimand
// (CountDist.SlopeEstimand; for fixed-time windows at the data's window
// duration). The tests form one family, Holm-adjusted at the level.
// Slopes need data with only the two labels of the visible edge; with
// other labels they are left out (say so from the returned notes).
func AgainstModel(d *likelihood.Data, p *likelihood.Predictor, o AgainstOptions) ([]Agreement, []string, error) {
	if o.Level == 0 {
		o.Level = 0.95
	}
	nl := p.NumLabels()
	if len(d.Labels) != nl || o.Plus < 0 || o.Minus < 0 || o.Plus >= nl || o.Minus >= nl || o.Plus == o.Minus {
		return nil, nil, errors.New("against model: the data's labels must be the model's, with a visible edge")
	}
	pl, mi := d.Labels[o.Plus], d.Labels[o.Minus]
	sum, err := Summarize(d, SummaryOptions{Plus: pl, Minus: mi, Level: o.Level})
	if err != nil {
		return nil, nil, err
	}
	var out []Agreement
	var notes []string
	P := p.Transition()
	pairs := sum.Pooled.Pairs
	row := func(l int) (k, n int) {
		for _, v := range pairs[l] {
			n += v
		}
		return pairs[l][l], n
	}
	for _, l := range []int{o.Plus, o.Minus} {
		k, n := row(l)
		q := fmt.Sprintf("P(%s|%s)", d.Labels[l], d.Labels[l])
		out = append(out, Agreement{Quantity: q, Model: P[l][l], Data: sum.Pooled.Next[l][l], Test: BinomialTest(k, n, P[l][l])})
	}
	kp, np := row(o.Plus)
	km, nm := row(o.Minus)
	out = append(out, Agreement{Quantity: "effective affinity F (k_BT)", Model: p.EffectiveAffinity(o.Plus, o.Minus), Data: sum.Pooled.Affinity,
		Test: AffinityTest(kp, np, km, nm, P[o.Plus][o.Plus], P[o.Minus][o.Minus])})
	q := make([]float64, nl)
	q[o.Plus], q[o.Minus] = 1, -1
	jm, dm, err := p.Current(q)
	if err != nil {
		return nil, nil, err
	}
	cur := sum.Pooled.Current
	jd := float64(0)
	if sum.Pooled.Duration > 0 {
		jd = float64(sum.Pooled.Counts[o.Plus]-sum.Pooled.Counts[o.Minus]) / sum.Pooled.Duration
		if !cur.Undefined {
			jd = cur.Value
		}
	}
	out = append(out, Agreement{Quantity: "current J (1/time)", Model: jm, Data: cur, Test: CurrentTest(jd, sum.Pooled.Duration, jm, dm)})
	if len(o.Windows) > 0 {
		if nl != 2 {
			notes = append(notes, fmt.Sprintf("the data have %d labels: the count-stopped slopes need the two labels of one visible edge only, so they are not compared", nl))
		} else {
			fr, err := FluctuationTest(d, o.Windows, FluctOptions{Labels: EdgeLabels{Forward: pl, Backward: mi}, Level: o.Level, FixedTime: o.FixedTime})
			if err != nil {
				return nil, nil, err
			}
			qi := make([]int, nl)
			qi[o.Plus], qi[o.Minus] = 1, -1
			for _, f := range fr {
				kinds := []Symmetry{f.Raw, f.PostSelected}
				if f.FixedTime != nil {
					kinds = append(kinds, *f.FixedTime)
				}
				for _, s := range kinds {
					var law likelihood.CountDist
					var err error
					switch s.Kind {
					case "fixed-time":
						law, err = p.FixedTime(s.Duration, qi)
					default:
						law, err = p.CountStopped(f.N, qi, s.Kind == "post-selected")
					}
					if err != nil {
						return nil, nil, err
					}
					m := law.SlopeEstimand()
					name := fmt.Sprintf("count-stopped slope, n = %d, %s", f.N, slopeKindName(s))
					out = append(out, Agreement{Quantity: name, Model: m.Slope, Data: s.Slope, Test: SlopeTest(s, m)})
				}
			}
		}
	}
	cs := make([]Check, len(out))
	for i, a := range out {
		cs[i] = Check{Name: a.Quantity, Null: "the model's value", Alternative: "the data depart from the model", Stat: a.Test.Z, P: a.Test.P, Note: a.Test.Note}
	}
	AdjustChecks(cs, 1-o.Level)
	for i := range out {
		out[i].Check = cs[i]
	}
	return out, notes, nil
}

// slopeKindName names a kind of window for a table.
func slopeKindName(s Symmetry) string {
	switch s.Kind {
	case "count-stopped":
		return "all windows"
	case "fixed-time":
		return fmt.Sprintf("fixed time T = %.5g", s.Duration)
	}
	return s.Kind
}
