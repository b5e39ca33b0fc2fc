package infer

import (
	"fmt"
	"math"

	"edgewise/likelihood"
	"edgewise/models"

	"gonum.org/v1/gonum/stat/distuv"
)

// Consistency is a fitted candidate held against the records' own
// evidence.
type Consistency struct {
	// Checks are the statistical tests of the candidate, one Holm family
	// at the family-wise level 1 - Level: the absolute goodness of fit of
	// the gaps (probability integral transform, KS), the data's F against
	// the model's (exact likelihood-ratio test), the count-stopped law
	// P_n(c) against the data's windows (G-test, one per window length),
	// the model's sigma against the data's valid entropy bound (one-sided),
	// and a known force (likelihood ratio), when given.
	Checks []Check
	// Structural rule-outs: statements that follow from the data's tests
	// and the candidate's structure, with no fitted number involved.
	ShapeRuledOut  bool // the data's shapes differ and the model's psi(++)/psi(--) is constant in t
	MarkovRuledOut bool // the labels are not first-order Markov and each of the model's labels sits on one directed edge
	ShapeConstant  bool // the fitted psi(++)/psi(--) is constant in t
	SingleEdge     bool // each label of the model sits on one directed edge
	// Model quantities at the maximum; SigmaSE is sigma's delta-method
	// standard error (NaN when it could not be computed, +Inf when sigma
	// moves along a direction the data do not determine).
	F, Sigma, J float64
	SigmaSE     float64
	GOF         *Goodness
	Reasons     []string // why the candidate is ruled out; empty when consistent
}

// RuledOut reports whether any reason rules the candidate out.
func (c *Consistency) RuledOut() bool { return len(c.Reasons) > 0 }

// Verdict is "consistent" or "ruled out".
func (c *Consistency) Verdict() string {
	if c.RuledOut() {
		return "ruled out"
	}
	return "consistent"
}

// ConsistencyOptions sets up CheckConsistency.
type ConsistencyOptions struct {
	Likelihood likelihood.Options
	Level      float64 // default 0.95: the family of checks rejects at 1 - Level
	Seed       uint64  // randomised PIT of frame-limited timestamps
	// Known is the likelihood-ratio test of a known force, when made
	// (nil otherwise); it joins the family.
	Known *Check
}

// ratioConstTol: psi(++)/psi(--) is taken as constant when its values on
// a grid of times differ by less than this relative amount; for a scheme
// whose driven cycles all pass through the visible edge the ratio is e^F
// exactly, so the spread is rounding (about 1e-12).
const ratioConstTol = 1e-6

// CheckConsistency holds the fitted candidate fit against the evidence ev
// of the records d (labels aligned with the model's).
func CheckConsistency(fit *FitResult, d *likelihood.Data, ev *Evidence, o ConsistencyOptions) (*Consistency, error) {
	if o.Level == 0 {
		o.Level = 0.95
	}
	alpha := roundLevel(1 - o.Level)
	net, err := fit.Model.Network(fit.X)
	if err != nil {
		return nil, err
	}
	d, err = alignLabels(d, net)
	if err != nil {
		return nil, err
	}
	k, err := likelihood.NewKernels(net)
	if err != nil {
		return nil, err
	}
	pred, err := likelihood.NewPredictor(k, o.Likelihood.Instrument)
	if err != nil {
		return nil, err
	}
	c := &Consistency{F: math.NaN(), Sigma: math.NaN(), J: math.NaN(), SigmaSE: math.NaN()}
	pi, err := net.Stationary()
	if err == nil {
		c.Sigma = net.EntropyProduction(pi)
	}
	if der, err := DerivedQuantities(fit, DerivedOptions{Instrument: o.Likelihood.Instrument, Level: o.Level}); err == nil {
		for _, q := range der {
			if q.Name == "sigma" {
				c.SigmaSE = q.SE
			}
		}
	}
	plus, minus := net.LabelIndex(ev.Plus), net.LabelIndex(ev.Minus)
	c.SingleEdge = true
	for _, es := range k.Edges {
		if len(es) != 1 {
			c.SingleEdge = false
		}
	}
	// Absolute goodness of fit.
	if g, err := GapGoodness(net, d, o.Likelihood, o.Seed); err == nil {
		c.GOF = g
		c.Checks = append(c.Checks, Check{Name: "gap goodness of fit", Null: "every gap's probability integral transform under the fitted model is uniform", Alternative: "the model does not describe the gaps", Stat: g.KS, N: g.N, P: g.KSP,
			Note: "parameters fitted to the same gaps make this test conservative"})
	}
	if plus >= 0 && minus >= 0 {
		c.F = pred.EffectiveAffinity(plus, minus)
		q := make([]float64, pred.NumLabels())
		q[plus], q[minus] = 1, -1
		if jm, _, err := pred.Current(q); err == nil {
			c.J = jm
		}
		// F by the exact likelihood-ratio test of the pair counts.
		pairs := TransitionCounts(d)
		rowN := func(l int) int {
			n := 0
			for _, v := range pairs[l] {
				n += v
			}
			return n
		}
		P := pred.Transition()
		ft := AffinityTest(pairs[plus][plus], rowN(plus), pairs[minus][minus], rowN(minus), P[plus][plus], P[minus][minus])
		c.Checks = append(c.Checks, Check{Name: "effective affinity F", Null: fmt.Sprintf("the data's F equals the model's %.4g", c.F), Alternative: "the model's F differs from the data's", Stat: ft.Z, P: ft.P, N: rowN(plus) + rowN(minus), Note: ft.Note})
		// Shape: psi(++)/psi(--) constant?
		c.ShapeConstant = psiRatioConstant(pred, plus, minus, ev)
		// Count-stopped laws.
		qi := make([]int, pred.NumLabels())
		qi[plus], qi[minus] = 1, -1
		for _, fl := range ev.Fluct {
			law, err := pred.CountStopped(fl.N, qi, false)
			if err != nil {
				continue
			}
			g, df, n := gTestCounts(fl.Raw.Count, fl.Raw.Offset, law)
			if df < 1 {
				continue
			}
			c.Checks = append(c.Checks, Check{Name: fmt.Sprintf("count-stopped law P_%d(c)", fl.N), Null: fmt.Sprintf("the windows of %d events follow the model's exact P_%d(c)", fl.N, fl.N), Alternative: "the model's count statistics differ from the data's", Stat: g, DF: df, N: n,
				P: distuv.ChiSquared{K: float64(df)}.Survival(g), Note: "G-test on non-overlapping windows, tails pooled to expected counts >= 5"})
		}
		// Sigma against the valid bound: one-sided, the bound's estimate
		// minus sigma over the combined standard error of the two (both
		// are estimated from the same records; treating them as
		// independent is conservative when they are positively
		// correlated, as a fitted sigma and a bound of the same data are).
		if name, b, ok := ev.Bound(); ok && !math.IsNaN(c.Sigma) && b.SE > 0 {
			se, note := b.SE, "one-sided z with the bound's standard error (the model's sigma has none)"
			if s := c.SigmaSE; !math.IsNaN(s) && !math.IsInf(s, 0) {
				se, note = math.Hypot(b.SE, s), "one-sided z with the bound's and the model's standard errors combined"
			}
			z := (b.Value - c.Sigma) / se
			if math.IsInf(c.SigmaSE, 1) {
				z, note = math.NaN(), "sigma is not determined by the data under this scheme: no test"
			}
			ch := Check{Name: "sigma against the " + name + " bound", Null: fmt.Sprintf("the model's sigma %.4g is at least the data's lower bound %s = %.4g", c.Sigma, name, b.Value), Alternative: "the model dissipates less than the data require: thermodynamically inconsistent", Stat: z, P: distuv.UnitNormal.Survival(z), Note: note}
			if math.IsNaN(z) {
				ch.P = math.NaN()
			}
			c.Checks = append(c.Checks, ch)
		}
	}
	if o.Known != nil {
		c.Checks = append(c.Checks, *o.Known)
	}
	AdjustChecks(c.Checks, alpha)
	for _, ch := range c.Checks {
		if ch.Reject {
			c.Reasons = append(c.Reasons, fmt.Sprintf("%s: p = %.3g (Holm-adjusted %.3g < %g)", ch.Name, ch.P, ch.Adjusted, alpha))
		}
	}
	if ev.ShapeDiffers && c.ShapeConstant {
		c.ShapeRuledOut = true
		c.Reasons = append(c.Reasons, fmt.Sprintf("shape test: the data's psi(++) and psi(--) differ in shape (p = %.3g), but this model's psi(++)/psi(--) is constant in t (no driven cycle off the visible edge, perfect detection)", ev.ShapeP))
	}
	if ev.NotMarkov && c.SingleEdge {
		c.MarkovRuledOut = true
		c.Reasons = append(c.Reasons, fmt.Sprintf("Markov order: the labels are not first-order Markov (G = %.4g on %d df, p = %.3g), but each label of this model sits on one directed edge, which keeps them first order whatever the detection probability or dead time", ev.Markov.Stat, ev.Markov.DF, ev.Markov.P))
	}
	return c, nil
}

// psiRatioConstant evaluates psi(++)(t)/psi(--)(t) on the data's ++ and --
// gap quantiles and reports whether it is constant within ratioConstTol.
func psiRatioConstant(p *likelihood.Predictor, plus, minus int, ev *Evidence) bool {
	ts := []float64{}
	mean := 1.0
	if ev.Shape != nil && ev.Shape.MeanPlus > 0 {
		mean = ev.Shape.MeanPlus
	}
	for _, f := range []float64{0.05, 0.2, 0.5, 1, 2, 4} {
		ts = append(ts, f*mean)
	}
	a := p.Psi(plus, plus, ts)
	b := p.Psi(minus, minus, ts)
	var r0 float64
	for i := range ts {
		if !(a[i] > 0 && b[i] > 0) {
			return false
		}
		r := math.Log(a[i]) - math.Log(b[i])
		if i == 0 {
			r0 = r
			continue
		}
		if math.Abs(r-r0) > ratioConstTol*math.Max(1, math.Abs(r0)) {
			return false
		}
	}
	return true
}

// gTestCounts is the G-test of observed window counts (Count[c+offset])
// against the law: bins from the low end are pooled until each holds an
// expected count of at least 5 (the last bin takes the rest). Returns G,
// the degrees of freedom (bins - 1) and the number of windows.
func gTestCounts(count []int64, offset int, law likelihood.CountDist) (float64, int, int) {
	var n int64
	for _, v := range count {
		n += v
	}
	if n == 0 || len(law.C) == 0 {
		return 0, 0, 0
	}
	lo := min(law.C[0], -offset)
	hi := max(law.C[len(law.C)-1], len(count)-1-offset)
	type bin struct{ o, e float64 }
	var bins []bin
	cur := bin{}
	for c := lo; c <= hi; c++ {
		o := 0.0
		if i := c + offset; i >= 0 && i < len(count) {
			o = float64(count[i])
		}
		cur.o += o
		cur.e += float64(n) * law.Prob(c)
		if cur.e >= 5 {
			bins = append(bins, cur)
			cur = bin{}
		}
	}
	if cur.o > 0 || cur.e > 0 {
		if len(bins) == 0 {
			bins = append(bins, cur)
		} else {
			bins[len(bins)-1].o += cur.o
			bins[len(bins)-1].e += cur.e
		}
	}
	g := 0.0
	for _, b := range bins {
		switch {
		case b.o > 0 && b.e > 0:
			g += 2 * b.o * math.Log(b.o/b.e)
		case b.o > 0:
			return math.Inf(1), len(bins) - 1, int(n)
		}
	}
	// The o ln(o/e) terms sum to G/2 minus sum(o - e) = 0 when the
	// expected counts sum to n; guard round-off.
	return math.Max(g, 0), len(bins) - 1, int(n)
}

// KnownForceTest is the likelihood-ratio test of a known force: the
// constrained model (the same scheme with the force imposed) against the
// free fit, 2 (ln L_free - ln L_constrained) on (effective free -
// effective constrained) degrees of freedom, at least 1.
func KnownForceTest(free, constrained *FitResult, what string) Check {
	lr := math.Max(0, 2*(free.LogLik-constrained.LogLik))
	df := free.Effective() - constrained.Effective()
	if df < 1 {
		df = 1
	}
	return Check{Name: "known force " + what, Null: "the scheme with the known force imposed fits as well as the free scheme", Alternative: "the data's driving differs from the known force", Stat: lr, DF: df, P: distuv.ChiSquared{K: float64(df)}.Survival(lr), N: free.Gaps}
}

// withKnownForce returns m with every cycle that crosses the visible edge
// once in the + direction held at the affinity value (k_BT), by
// TightCoupling, ready to fit from the free fit's values.
func withKnownForce(m *models.Model, plus string, value float64, free *FitResult) (*models.Model, error) {
	mc, err := TightCoupling(m, plus, value)
	if err != nil {
		return nil, err
	}
	byName := map[string]float64{}
	for j, n := range free.Free {
		byName[n] = free.X[j]
	}
	for i := range mc.Params {
		if v, ok := byName[mc.Params[i].Name]; ok && !mc.Params[i].Fixed {
			mc.Params[i].Value = v
		}
	}
	return mc, nil
}

// roundLevel removes the round-off of 1 - level (0.050000000000000044).
func roundLevel(a float64) float64 { return math.Round(a*1e12) / 1e12 }
