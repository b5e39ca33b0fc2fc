package infer

import (
	"fmt"
	"math"
	"slices"
	"sort"

	"edgewise/likelihood"
)

// This file holds the checks of one report as a family of tests: each
// with its own p-value, the family corrected for multiplicity by Holm's
// step-down procedure (Holm, Scand. J. Stat. 6, 65 (1979)), so that the
// chance that any check of a report fires on data for which every null
// hypothesis holds is at most the stated level.

// Check is one test in a report, worded as evidence: what is tested
// (Null, the hypothesis the data are held against), what a rejection
// points to (Alternative), the test's own p-value and its Holm-adjusted
// p-value within the report's family.
type Check struct {
	Name        string  // short name of the test
	Null        string  // the hypothesis under test
	Alternative string  // what a rejection is evidence for
	Stat        float64 // test statistic (NaN when none)
	DF          int     // degrees of freedom (0 when not a chi-square)
	N           int     // observations used
	P           float64 // the test's own p-value; NaN when not computed
	// Adjusted is the Holm-adjusted p-value within the family (NaN when P
	// is), and Reject reports Adjusted <= Level: evidence against Null at
	// the family-wise level Level.
	Adjusted float64
	Level    float64
	Reject   bool
	Note     string // why P is NaN, or a caution about the test
}

// Holm returns the Holm-adjusted p-values of ps: with the m non-NaN
// p-values sorted as p_(1) <= ... <= p_(m),
//
//	adj_(i) = max_{j <= i} min(1, (m - j + 1) p_(j)),
//
// and NaN where ps is NaN (such tests are not in the family). Rejecting
// every hypothesis with adj <= a controls the family-wise error rate at a
// for any dependence between the tests (Holm, Scand. J. Stat. 6, 65
// (1979)).
func Holm(ps []float64) []float64 {
	idx := make([]int, 0, len(ps))
	for i, p := range ps {
		if !math.IsNaN(p) {
			idx = append(idx, i)
		}
	}
	sort.SliceStable(idx, func(a, b int) bool { return ps[idx[a]] < ps[idx[b]] })
	out := make([]float64, len(ps))
	for i := range out {
		out[i] = math.NaN()
	}
	m := len(idx)
	run := 0.0
	for j, i := range idx {
		run = math.Max(run, math.Min(1, float64(m-j)*ps[i]))
		out[i] = run
	}
	return out
}

// AdjustChecks fills Adjusted, Level and Reject of a family of checks by
// Holm's procedure at the family-wise level.
func AdjustChecks(cs []Check, level float64) {
	ps := make([]float64, len(cs))
	for i, c := range cs {
		ps[i] = c.P
	}
	adj := Holm(ps)
	for i := range cs {
		cs[i].Adjusted = adj[i]
		cs[i].Level = level
		cs[i].Reject = adj[i] <= level
	}
}

// CheckOptions sets up AssumptionChecks.
type CheckOptions struct {
	// Plus and Minus name the labels of the visible edge ("" means "+"
	// and "-"); without both in the data the shape test is left out.
	Plus, Minus string
	// Level is the family-wise level; 0 means 0.05.
	Level float64
	// ShapeResamples > 0 calibrates the shape test by that many null
	// resamples (ShapeOptions.Bootstrap), seeded by Seed.
	ShapeResamples int
	Seed           uint64
}

// AssumptionChecks runs the model-free checks of a data set as one
// family, Holm-adjusted at the family-wise level:
//
//   - the shape test of the ++ and -- gaps (ShapeTest; one member, whose
//     p is twice the smaller of the Kolmogorov-Smirnov and
//     Anderson-Darling p-values, Bonferroni over the two statistics of one
//     hypothesis), when the data hold a visible edge;
//   - the Markov-order test of the labels (MarkovOrderTest);
//   - the four drift and heterogeneity tests of StationarityTest (P(next|last)
//     and the mean gap, between the halves of each record and between
//     records; the between-record ones only with two records or more).
//
// Each Check states its null hypothesis and what a rejection is evidence
// for. Under the nulls the chance that any check rejects is at most the
// level (Holm); its measured value on stationary first-order data is in
// checks_test.go.
func AssumptionChecks(d *likelihood.Data, o CheckOptions) []Check {
	if o.Level == 0 {
		o.Level = 0.05
	}
	if o.Plus == "" {
		o.Plus = "+"
	}
	if o.Minus == "" {
		o.Minus = "-"
	}
	var cs []Check
	pi, mi := slices.Index(d.Labels, o.Plus), slices.Index(d.Labels, o.Minus)
	if pi >= 0 && mi >= 0 && pi != mi {
		c := Check{Name: "shape of the ++ and -- gap distributions (each scaled by its mean)",
			Null:        "the ++ and -- gaps have the same shape, as when every driven cycle passes through the visible edge and detection is perfect",
			Alternative: "a driven cycle that avoids the visible edge, or missed events: this rules out every scheme in which each driven cycle passes through the visible edge with perfect detection",
			Stat:        math.NaN()}
		sh, err := ShapeTest(d, uint8(pi), uint8(mi), ShapeOptions{Bootstrap: o.ShapeResamples, Seed: o.Seed})
		switch {
		case err != nil:
			c.P, c.Note = math.NaN(), err.Error()
		default:
			pks, pad := sh.P, sh.AD.P
			how := "KS and Anderson-Darling p from their null laws (conservative: each sample is scaled by its own mean)"
			if sh.Bootstrap > 0 {
				pks, pad = sh.PBoot, sh.ADPBoot
				how = fmt.Sprintf("KS and Anderson-Darling p from %d null resamples", sh.Bootstrap)
			}
			c.Stat, c.N = sh.D, sh.NPlus+sh.NMinus
			c.P = math.Min(1, 2*math.Min(pks, pad))
			c.Note = joinNote(how+"; p = twice the smaller", sh.Note)
			if math.IsNaN(pks) || math.IsNaN(pad) {
				c.P = math.NaN()
				c.Note = joinNote("too few ++ or -- gaps", sh.Note)
			}
		}
		cs = append(cs, c)
	}
	mo := MarkovOrderTest(d)
	cs = append(cs, Check{Name: "first- against second-order Markov dependence of the labels (G test)",
		Null:        "the labels form a first-order Markov chain, as when each label sits on one directed edge",
		Alternative: "spurious events, a label shared by several edges, or hidden memory that no single-edge scheme has",
		Stat:        mo.Stat, DF: mo.DF, N: mo.N, P: mo.P, Note: mo.Note})
	st := stationarity(d, false) // pooled tests only: no list per record
	add := func(name, null, alt string, t TestResult) {
		c := Check{Name: name, Null: null, Alternative: alt, Stat: t.Stat, DF: t.DF, N: t.N, P: t.P, Note: t.Note}
		cs = append(cs, c)
	}
	add("P(next|last), first against second half of each record (G test)", "P(next|last) is the same in both halves of each record", "drift within records: pooled estimates would mix different conditions", st.HalvesNext)
	add("mean gap, first against second half of each record (batch-means t, summed as z^2)", "the mean gap is the same in both halves of each record", "drift within records: pooled estimates would mix different conditions", st.HalvesGap)
	if len(d.Records) > 1 {
		add("P(next|last), between records (G test)", "the records share P(next|last)", "the records differ: fit them separately or test pooled against per-record fits", st.BetweenNext)
		add("mean gap, between records (Cochran's Q)", "the records share the mean gap", "the records differ: fit them separately or test pooled against per-record fits", st.BetweenGap)
	}
	AdjustChecks(cs, o.Level)
	return cs
}
