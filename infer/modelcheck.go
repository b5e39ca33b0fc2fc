package infer

import (
	"errors"
	"fmt"
	"math"

	"edgewise/likelihood"

	"gonum.org/v1/gonum/stat/distuv"
)

// This file sets a model's predictions against data: each quantity with
// the model's value, the data's estimate and a test that stays finite and
// keeps its level with small counts, and the tests of one comparison as a
// Holm-corrected family. predict uses it; the ranking of models uses the
// same rows.

// SlopeTest is the score test of a data set's fluctuation histogram
// against a model's value of the same slope, the model's law being the
// exact law of the current for the same kind of window (count-stopped,
// post-selected or fixed-time): with W windows and N(c) of them at
// current c,
//
//	U = sum_{c>0} c [N(c) - (N(c) + N(-c)) sigma(s_m c)],
//
// s_m the model's slope (CountDist.SlopeEstimand). U is a sum of one
// contribution per window, u = c (1 - sigma(s_m c)) for c > 0 and
// -|c| sigma(s_m |c|) for c < 0, whose law under the model is known
// exactly from the model's P(c); under the model E[u] = 0 (s_m is the
// root of the same score in expectation). The two-sided p-value doubles
// the saddlepoint approximation of the tail of U beyond its observed value
// (Lugannani and Rice; scoreLaw.tail), with windows taken as independent,
// as non-overlapping windows nearly are. A normal approximation of U
// rejected up to 12% at a nominal 5% when a few windows of the rarer sign
// dominate U (ring3, post-selected windows of 5 events, 20 windows;
// measured on the model's own law); the saddlepoint keeps the level there
// (modelcheck_test.go). Unlike (slope_hat - s_m)/SE the test is finite when
// the data's slope is not (windows on one side only) and uses the model's
// law, so zero counts do not make it infinite. Z is the normal score of P,
// positive when the data's slope lies above the model's. For all windows
// (not post-selected) of a few events, adjacent windows are negatively
// correlated through their shared boundary label, which the law ignores:
// the test is then conservative (Var z measured 0.75 for windows of 5
// events on ring4, 0.92-0.99 for post-selected and fixed-time windows).
func SlopeTest(s Symmetry, law likelihood.CountDist) CountTest {
	m := law.SlopeEstimand()
	t := CountTest{K: -1, N: -1, Model: m.Slope, Expected: math.NaN(), Method: "score test at the model's slope, saddlepoint tail of its exact law"}
	if !m.Defined || !(m.ScoreVar > 0) || s.Windows == 0 {
		t.P, t.Z = math.NaN(), math.NaN()
		t.Note = "no test: the model's slope is not finite (one sign of c never occurs) or there are no windows"
		return t
	}
	contrib := func(c int) float64 {
		pr := 1 / (1 + math.Exp(-m.Slope*math.Abs(float64(c))))
		switch {
		case c > 0:
			return float64(c) * (1 - pr)
		case c < 0:
			return float64(c) * pr
		}
		return 0
	}
	var sl scoreLaw
	for i, c := range law.C {
		if law.P[i] > 0 {
			sl.U = append(sl.U, contrib(c))
			sl.P = append(sl.P, law.P[i])
		}
	}
	u := 0.0
	for i, n := range s.Count {
		if n > 0 {
			u += float64(n) * contrib(i-s.Offset)
		}
	}
	w := float64(s.Windows)
	tail, ok := sl.tail(w, u)
	lp := math.Log(tail) // ln of the one-sided tail
	if !ok {
		// U at (or beyond) an end of the support: every window at the c
		// with the largest (smallest) contribution, probability P(c)^W,
		// taken in logs.
		best, pc := 0.0, 0.0
		for i, x := range sl.U {
			if (u > 0 && x >= best) || (u < 0 && x <= best) {
				best, pc = x, sl.P[i]
			}
		}
		lp = math.Inf(-1)
		if math.Abs(u-w*best) <= 1e-9*math.Abs(u) && pc > 0 {
			lp = w * math.Log(pc)
		}
		t.Note = "the data's score lies at the end of its range under the model"
	}
	if math.IsInf(lp, -1) {
		// Beyond what the computed law reaches: windows at currents it
		// leaves out (probability at most likelihood.LawTail each), or a
		// tail below the float64 range. W LawTail bounds the tail, so the
		// p-value is an upper bound and z finite: the data are improbable
		// under the model, not impossible.
		lp = math.Log(w * likelihood.LawTail)
		t.Note = joinNote(t.Note, "the data lie beyond the model's computed law: the p-value is an upper bound")
	}
	t.P = math.Min(1, 2*math.Exp(lp))
	t.Z = normalScore(math.Min(0, math.Log(2)+lp))
	if u < 0 {
		t.Z = -t.Z
	}
	rare := 0.0 // windows of the rarer sign expected under the model
	for i, c := range law.C {
		if c > 0 {
			rare += math.Min(law.P[i], law.Prob(-c))
		}
	}
	if rare *= w; rare < minRareExpected {
		t.Note = joinNote(t.Note, fmt.Sprintf("only %.2g windows of the rarer sign expected under the model: the p-value is approximate", rare))
	}
	return t
}

// minRareExpected is the number of windows of the rarer sign, expected
// under the model, below which SlopeTest says its p-value is approximate:
// U then turns on a handful of windows and its law is far from smooth (the
// saddlepoint test was measured to reject up to 7% at a nominal 5% with
// about one such window expected, and to be conservative with fewer).
const minRareExpected = 5

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
	// Windows longer than every record cannot be formed: say so and
	// compare the others (many short records are a real case).
	longest := 0
	for r := range d.Records {
		longest = max(longest, d.Records[r].Len())
	}
	var windows []int
	for _, n := range o.Windows {
		if n > longest {
			notes = append(notes, fmt.Sprintf("no record has %d events (the longest has %d): the count-stopped slope for n = %d is not compared", n, longest, n))
			continue
		}
		windows = append(windows, n)
	}
	if len(windows) > 0 {
		if nl != 2 {
			notes = append(notes, fmt.Sprintf("the data have %d labels: the count-stopped slopes need the two labels of one visible edge only, so they are not compared", nl))
		} else {
			fr, err := FluctuationTest(d, windows, FluctOptions{Labels: EdgeLabels{Forward: pl, Backward: mi}, Level: o.Level, FixedTime: o.FixedTime})
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
					name := fmt.Sprintf("fluctuation slope, n = %d, %s", f.N, slopeKindName(s))
					tst := SlopeTest(s, law)
					out = append(out, Agreement{Quantity: name, Model: tst.Model, Data: s.Slope, Test: tst})
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

// scoreLaw is the law of one window's score contribution u under a model:
// values U with probabilities P.
type scoreLaw struct{ U, P []float64 }

// cgf returns K(th) = ln E[e^{th u}] and its first two derivatives.
func (l scoreLaw) cgf(th float64) (k, k1, k2 float64) {
	mx := math.Inf(-1)
	for i, u := range l.U {
		if l.P[i] > 0 {
			mx = math.Max(mx, th*u)
		}
	}
	var s, s1, s2 float64
	for i, u := range l.U {
		if l.P[i] == 0 {
			continue
		}
		e := l.P[i] * math.Exp(th*u-mx)
		s += e
		s1 += e * u
		s2 += e * u * u
	}
	k = mx + math.Log(s)
	k1 = s1 / s
	k2 = math.Max(s2/s-k1*k1, 0)
	return k, k1, k2
}

// tail returns the saddlepoint approximation of Lugannani and Rice (Adv.
// Appl. Prob. 12, 475 (1980); reference from memory) to P(S >= s) when s
// lies above the mean 0 of the sum S of w independent contributions, or
// to P(S <= s) below it:
//
//	K'(th) = s/w,  r = sign(th) sqrt(2 w (th s/w - K(th))),  q = th sqrt(w K''(th)),
//	P ~ 1 - Phi(r) + phi(r) (1/q - 1/r)    (upper tail; the lower by symmetry).
//
// It is accurate far into the tails where the normal law of S is not
// (a few windows of the rarer sign make S skewed). ok is false when s lies
// at or beyond the end of the support.
func (l scoreLaw) tail(w, s float64) (p float64, ok bool) {
	m := s / w
	lo, hi := math.Inf(1), math.Inf(-1)
	for i, u := range l.U {
		if l.P[i] > 0 {
			lo, hi = math.Min(lo, u), math.Max(hi, u)
		}
	}
	if !(m > lo && m < hi) {
		return 0, false
	}
	// K' increases in th: bracket the root, then Newton kept in the bracket.
	a, b := -1.0, 1.0
	for _, k1, _ := l.cgf(a); k1 > m && a > -1e6; _, k1, _ = l.cgf(a) {
		a *= 2
	}
	for _, k1, _ := l.cgf(b); k1 < m && b < 1e6; _, k1, _ = l.cgf(b) {
		b *= 2
	}
	th := 0.0
	for range 200 {
		_, k1, k2 := l.cgf(th)
		if k1 < m {
			a = th
		} else {
			b = th
		}
		next := th - (k1-m)/k2
		if !(next > a && next < b) || k2 == 0 {
			next = (a + b) / 2
		}
		if math.Abs(next-th) < 1e-14*math.Max(1, math.Abs(th)) {
			th = next
			break
		}
		th = next
	}
	k, _, k2 := l.cgf(th)
	r2 := 2 * w * (th*m - k)
	if !(r2 > 1e-12) {
		return 0.5, true // at the mean
	}
	r := math.Copysign(math.Sqrt(r2), th)
	q := th * math.Sqrt(w*k2)
	nrm := distuv.UnitNormal
	if th > 0 {
		p = nrm.Survival(r) + nrm.Prob(r)*(1/q-1/r)
	} else {
		p = nrm.CDF(r) - nrm.Prob(r)*(1/q-1/r)
	}
	return math.Min(1, math.Max(p, 0)), true
}
