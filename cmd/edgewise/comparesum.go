package main

import (
	"bytes"
	"encoding/json"
	"fmt"
	"math"
	"slices"
	"strconv"
	"strings"

	"edgewise/cmd/edgewise/internal/output"
	"edgewise/infer"
	"edgewise/models"
)

// The report of compare is built in two steps, so that a single run and
// a merge of shards give the same bytes by construction:
//
//  1. cmpSummary holds every number the tables and notes show, per
//     candidate and for the records' evidence, in a form that survives
//     JSON exactly (jnum: shortest round-trip decimals, NaN and
//     infinities as strings). A shard writes it to its part file; a single
//     run makes the same summary and goes through the same JSON round
//     trip.
//  2. rankSummary ranks the candidates of one or more summaries (the
//     criteria and Akaike weights by infer.Rank, the nested tests by
//     infer.NestedTests, on fit results rebuilt from the summary), and
//     compareTables renders the ranked view.

// jnum is a float64 that survives JSON exactly: finite values as the
// shortest decimal that reads back to the same float64, NaN and
// infinities as the strings "NaN", "+Inf" and "-Inf".
type jnum float64

// MarshalJSON implements json.Marshaler.
func (x jnum) MarshalJSON() ([]byte, error) {
	f := float64(x)
	switch {
	case math.IsNaN(f):
		return []byte(`"NaN"`), nil
	case math.IsInf(f, 1):
		return []byte(`"+Inf"`), nil
	case math.IsInf(f, -1):
		return []byte(`"-Inf"`), nil
	}
	return strconv.AppendFloat(nil, f, 'g', -1, 64), nil
}

// UnmarshalJSON implements json.Unmarshaler.
func (x *jnum) UnmarshalJSON(b []byte) error {
	switch string(b) {
	case `"NaN"`:
		*x = jnum(math.NaN())
		return nil
	case `"+Inf"`:
		*x = jnum(math.Inf(1))
		return nil
	case `"-Inf"`:
		*x = jnum(math.Inf(-1))
		return nil
	}
	f, err := strconv.ParseFloat(string(b), 64)
	if err != nil {
		return fmt.Errorf("not a number: %s", b)
	}
	*x = jnum(f)
	return nil
}

// jnums converts a slice.
func jnums(xs []float64) []jnum {
	out := make([]jnum, len(xs))
	for i, x := range xs {
		out[i] = jnum(x)
	}
	return out
}

func floats(xs []jnum) []float64 {
	out := make([]float64, len(xs))
	for i, x := range xs {
		out[i] = float64(x)
	}
	return out
}

// cmpSummary is the serialisable outcome of infer.Compare on some (or
// all) of the candidates.
type cmpSummary struct {
	Evidence   evSummary     `json:"evidence"`
	Candidates []candSummary `json:"candidates"` // in candidate order
	// Interrupted: the run was stopped; only the finished candidates are
	// here.
	Interrupted bool `json:"interrupted"`
}

// evSummary is what the report shows of the records' own evidence.
type evSummary struct {
	Plus         string `json:"plus"`
	Minus        string `json:"minus"`
	Level        jnum   `json:"level"`
	F            jnum   `json:"F"`
	FLo          jnum   `json:"F_lo"`
	FHi          jnum   `json:"F_hi"`
	HasShape     bool   `json:"has_shape"`
	ShapeD       jnum   `json:"shape_D"`
	ShapeP       jnum   `json:"shape_p"`
	ShapeDiffers bool   `json:"shape_differs"`
	MarkovStat   jnum   `json:"markov_G"`
	MarkovDF     int    `json:"markov_df"`
	MarkovP      jnum   `json:"markov_p"`
	NotMarkov    bool   `json:"not_markov"`
	HasBound     bool   `json:"has_bound"`
	BoundName    string `json:"bound_name"`
	Bound        jnum   `json:"bound"`
	BoundLo      jnum   `json:"bound_lo"`
	BoundHi      jnum   `json:"bound_hi"`
	BoundsReason string `json:"bounds_reason"`
}

// Candidate status values.
const (
	candFitted     = "fitted"
	candImpossible = "impossible"
	candFailed     = "failed"
)

// candSummary is one candidate's outcome.
type candSummary struct {
	Index  int    `json:"index"` // position in the full candidate list
	Name   string `json:"name"`
	Source string `json:"source"`
	// Spec is the candidate as a TOML spec (models.Write): the nested
	// tests and the bootstrap rebuild the model from it.
	Spec   string `json:"spec"`
	NFree  int    `json:"free"`
	Status string `json:"status"` // fitted, impossible or failed
	Err    string `json:"error,omitempty"`
	// Impossible is the statement that the records cannot come from the
	// scheme.
	Impossible string `json:"impossible,omitempty"`
	// The fit: free parameter names and maximum-likelihood values, ln L,
	// the effective number of parameters and the number of gaps.
	Free      []string     `json:"free_names,omitempty"`
	X         []jnum       `json:"x,omitempty"`
	LogLik    jnum         `json:"log_likelihood"`
	Effective int          `json:"effective"`
	Gaps      int          `json:"gaps"`
	Ident     []string     `json:"identifiability,omitempty"`
	Cons      *consSummary `json:"consistency,omitempty"`
}

// consSummary is a candidate's consistency checks.
type consSummary struct {
	Checks         []checkSummary `json:"checks"`
	F              jnum           `json:"F"`
	Sigma          jnum           `json:"sigma"`
	ShapeRuledOut  bool           `json:"shape_ruled_out"`
	MarkovRuledOut bool           `json:"markov_ruled_out"`
	Reasons        []string       `json:"reasons"`
}

type checkSummary struct {
	Name     string `json:"name"`
	P        jnum   `json:"p"`
	Adjusted jnum   `json:"adjusted"`
	Reject   bool   `json:"reject"`
}

// ruledOut reports whether the candidate is ruled out.
func (c *candSummary) ruledOut() bool {
	return c.Status == candImpossible || (c.Cons != nil && len(c.Cons.Reasons) > 0)
}

// reasons lists why the candidate is ruled out.
func (c *candSummary) reasons() []string {
	if c.Status == candImpossible {
		return []string{c.Impossible}
	}
	if c.Cons != nil {
		return c.Cons.Reasons
	}
	return nil
}

// summarize turns the outcome of infer.Compare into a cmpSummary, the
// candidates in candidate order.
func summarize(res *infer.Ranking) (*cmpSummary, error) {
	s := &cmpSummary{Evidence: summarizeEvidence(res.Evidence), Interrupted: res.Interrupted, Candidates: []candSummary{}}
	rs := slices.Clone(res.Ranked)
	slices.SortFunc(rs, func(a, b infer.Ranked) int { return a.Index - b.Index })
	for _, r := range rs {
		var spec bytes.Buffer
		if err := r.Model.Write(&spec); err != nil {
			return nil, fmt.Errorf("candidate %s: %w", r.Name, err)
		}
		c := candSummary{Index: r.Index, Name: r.Name, Source: r.Source, Spec: spec.String(), NFree: len(r.Model.Free()), LogLik: jnum(math.NaN())}
		switch {
		case r.Impossible != nil:
			c.Status, c.Impossible = candImpossible, r.Impossible.Error()
		case r.Fit == nil:
			c.Status, c.Err = candFailed, r.Err
		default:
			f := r.Fit
			c.Status, c.Err = candFitted, r.Err
			c.Free, c.X, c.LogLik, c.Effective, c.Gaps = f.Free, jnums(f.X), jnum(f.LogLik), f.Effective(), f.Gaps
			if f.Ident != nil {
				c.Ident = f.Ident.Statements
			}
			if cs := r.Consistency; cs != nil {
				cc := &consSummary{F: jnum(cs.F), Sigma: jnum(cs.Sigma), ShapeRuledOut: cs.ShapeRuledOut, MarkovRuledOut: cs.MarkovRuledOut, Reasons: cs.Reasons, Checks: []checkSummary{}}
				for _, ch := range cs.Checks {
					cc.Checks = append(cc.Checks, checkSummary{Name: ch.Name, P: jnum(ch.P), Adjusted: jnum(ch.Adjusted), Reject: ch.Reject})
				}
				c.Cons = cc
			}
		}
		s.Candidates = append(s.Candidates, c)
	}
	return s, nil
}

func summarizeEvidence(ev *infer.Evidence) evSummary {
	e := evSummary{Plus: ev.Plus, Minus: ev.Minus, Level: jnum(ev.Level), F: jnum(ev.F.Value), FLo: jnum(ev.F.Lo), FHi: jnum(ev.F.Hi),
		ShapeP: jnum(ev.ShapeP), ShapeDiffers: ev.ShapeDiffers, MarkovStat: jnum(ev.Markov.Stat), MarkovDF: ev.Markov.DF, MarkovP: jnum(ev.Markov.P),
		NotMarkov: ev.NotMarkov, BoundsReason: ev.BoundsReason, ShapeD: jnum(math.NaN()), Bound: jnum(math.NaN()), BoundLo: jnum(math.NaN()), BoundHi: jnum(math.NaN())}
	if ev.Shape != nil {
		e.HasShape, e.ShapeD = true, jnum(ev.Shape.D)
	}
	if name, b, ok := ev.Bound(); ok {
		e.HasBound, e.BoundName, e.Bound, e.BoundLo, e.BoundHi = true, name, jnum(b.Value), jnum(b.Lo), jnum(b.Hi)
	}
	return e
}

// rankedCand is a candidate of the ranked view with its criteria (NaN
// without a fit).
type rankedCand struct {
	*candSummary
	model                            *models.Model
	AIC, AICc, BIC, DeltaBIC, Weight float64
}

// cmpView is the ranked comparison the report shows.
type cmpView struct {
	Evidence    evSummary
	Ranked      []rankedCand // best BIC first; candidates without a fit last
	Nested      []infer.NestedTest
	Interrupted bool
	Boot        *bootView // the parametric bootstrap, when asked for
}

// rankSummary ranks the candidates (which must have distinct indices) by
// infer.Rank and finds the nested tests by infer.NestedTests, on fit
// results rebuilt from the summaries: the same code for a single run and
// a merge.
func rankSummary(ev evSummary, cands []candSummary, interrupted bool) (*cmpView, error) {
	cs := slices.Clone(cands)
	slices.SortFunc(cs, func(a, b candSummary) int { return a.Index - b.Index })
	rs := make([]infer.Ranked, len(cs))
	for i := range cs {
		c := &cs[i]
		m, err := models.Parse(strings.NewReader(c.Spec), "candidate "+c.Name)
		if err != nil {
			return nil, fmt.Errorf("candidate %s: its spec does not read back: %w", c.Name, err)
		}
		rs[i] = infer.Ranked{Candidate: infer.Candidate{Name: c.Name, Source: c.Source, Model: m}, Index: c.Index}
		if c.Status == candFitted {
			rs[i].Fit = &infer.FitResult{Model: m, Free: c.Free, X: floats(c.X), LogLik: float64(c.LogLik), Gaps: c.Gaps, Ident: &infer.Identifiability{Effective: c.Effective}}
		}
	}
	rk := &infer.Ranking{Ranked: rs}
	infer.Rank(rk)
	byIndex := map[int]*candSummary{}
	for i := range cs {
		byIndex[cs[i].Index] = &cs[i]
	}
	v := &cmpView{Evidence: ev, Interrupted: interrupted, Nested: infer.NestedTests(rk.Ranked)}
	for _, r := range rk.Ranked {
		v.Ranked = append(v.Ranked, rankedCand{candSummary: byIndex[r.Index], model: r.Model, AIC: r.AIC, AICc: r.AICc, BIC: r.BIC, DeltaBIC: r.DeltaBIC, Weight: r.Weight})
	}
	return v, nil
}

// gaps is the number of gaps n of the criteria.
func (v *cmpView) gaps() int {
	for _, c := range v.Ranked {
		if c.Status == candFitted {
			return c.Gaps
		}
	}
	return 0
}

// verdict is the word of the ranking's verdict column.
func (c *rankedCand) verdict() string {
	switch {
	case c.ruledOut():
		return "ruled out"
	case c.Status == candFailed:
		return "fit failed"
	case c.Cons == nil:
		return "not checked"
	}
	return "consistent"
}

// compareTables adds the ranking, the consistency checks, the data's
// evidence, the nested tests and the bootstrap.
func compareTables(r *output.Report, v *cmpView, u output.TimeUnit) {
	ev := v.Evidence
	rk := output.NewTable("ranking", "Ranking of the candidates (best BIC first)", "model",
		output.Col("verdict", "verdict", ""), output.Col("free", "free", ""), output.Col("k", "k", ""),
		output.Col("log_likelihood", "ln L", "nats"), output.Col("AIC", "AIC", ""), output.Col("AICc", "AICc", ""),
		output.Col("BIC", "BIC", ""), output.Col("delta_BIC", "ΔBIC", ""), output.Col("weight", "weight", ""))
	for _, c := range v.Ranked {
		if c.Status != candFitted {
			why := c.Err
			if c.Status == candImpossible {
				why = "records impossible under this scheme"
			}
			u := output.Undefined(why)
			rk.Add(output.Key(c.Name), c.Name, output.Text(c.verdict()), output.Count(c.NFree), u, u, u, u, u, u, u)
			continue
		}
		rk.Add(output.Key(c.Name), c.Name, output.Text(c.verdict()), output.Count(len(c.Free)), output.Count(c.Effective),
			output.Fixed(float64(c.LogLik), 2), output.Fixed(c.AIC, 2), output.Fixed(c.AICc, 2), output.Fixed(c.BIC, 2),
			output.Fixed(c.DeltaBIC, 2), output.Num(c.Weight))
	}
	rk.Note("k: parameter combinations the data determine (free parameters minus flat directions); n = %d gaps; weight: Akaike weight exp(-ΔAIC/2), normalised", v.gaps())
	r.Add(rk)

	ct := output.NewTable("consistency", "Consistency with the records (p-values; Holm-adjusted within each model)", "model",
		output.Col("gof_p", "gap fit p", ""), output.Col("F_model", "model F", "k_BT"), output.Col("F_p", "F p", ""),
		output.Col("pn_p", "P_n(c) p", ""), output.Col("sigma", "model sigma", u.Entropy()), output.Col("sigma_p", "sigma ≥ bound p", ""),
		output.Col("rules", "structural rules", ""))
	for _, c := range v.Ranked {
		if c.Cons == nil {
			continue
		}
		cs := c.Cons
		gof, fp, pnp, sp := output.Undefined("not tested"), output.Undefined("not tested"), output.Undefined("not tested"), output.Undefined("no valid bound")
		for _, ch := range cs.Checks {
			adj := float64(ch.Adjusted)
			switch {
			case ch.Name == "gap goodness of fit":
				gof = output.P(adj)
			case ch.Name == "effective affinity F":
				fp = output.P(adj)
			case strings.HasPrefix(ch.Name, "count-stopped"):
				if pnp.Kind != output.KindP || adj < pnp.Value {
					pnp = output.P(adj)
				}
			case strings.HasPrefix(ch.Name, "sigma against"):
				sp = output.P(adj)
			}
		}
		var rules []string
		if cs.ShapeRuledOut {
			rules = append(rules, "shape")
		}
		if cs.MarkovRuledOut {
			rules = append(rules, "Markov order")
		}
		rule := "pass"
		if len(rules) > 0 {
			rule = "out: " + strings.Join(rules, ", ")
		}
		ct.Add(output.Key(c.Name), c.Name, gof, output.Num(float64(cs.F)), fp, pnp, output.Num(float64(cs.Sigma)), sp, output.Text(rule))
	}
	ct.Note("P_n(c) p: the smallest over the window lengths; structural rules: shape (the data's psi(++) and psi(--) differ while the model's ratio is constant in t) and Markov order (labels not first order while each of the model's labels sits on one directed edge)")
	r.Add(ct)

	level := float64(ev.Level)
	et := output.NewTable("evidence", "What the records say on their own", "quantity", output.Col("value", "value", ""), output.Col("p", "p", ""), output.Col("note", "note", ""))
	et.Add("F", "effective affinity F (k_BT)", output.Num(float64(ev.F)), output.Empty(), output.Text(fmt.Sprintf("%s interval [%.4g, %.4g]", pct(level), float64(ev.FLo), float64(ev.FHi))))
	if ev.HasShape {
		et.Add("shape", "shape test of the ++ and -- gaps (KS distance)", output.Num(float64(ev.ShapeD)), output.P(float64(ev.ShapeP)), output.Text(yesNo(ev.ShapeDiffers, "shapes differ: rings and every scheme without a driven cycle off the visible edge are ruled out", "shapes agree")))
	}
	et.Add("markov", "Markov-order test of the labels (G)", output.Num(float64(ev.MarkovStat)), output.P(float64(ev.MarkovP)), output.Text(yesNo(ev.NotMarkov, "not first-order Markov: schemes with one directed edge per label are ruled out", "first order not rejected")))
	if ev.HasBound {
		et.Add("sigma_bound", "largest valid lower bound on sigma: "+ev.BoundName+" ("+u.Entropy()+")", output.Num(float64(ev.Bound)), output.Empty(), output.Text(fmt.Sprintf("%s interval [%.4g, %.4g]", pct(level), float64(ev.BoundLo), float64(ev.BoundHi))))
	} else {
		why := ev.BoundsReason
		if why == "" {
			why = "not computed"
		}
		et.Add("sigma_bound", "lower bound on sigma", output.Undefined(why), output.Empty(), output.Empty())
	}
	r.Add(et)

	if len(v.Nested) > 0 {
		nt := output.NewTable("nested", "Nested pairs: likelihood-ratio tests (Holm over the pairs)", "pair",
			output.Col("LR", "2 ln LR", ""), output.Col("df", "df", ""), output.Col("boundary", "rates at 0", ""),
			output.Col("p", "p", ""), output.Col("p_holm", "Holm p", ""), output.Col("how", "nesting", ""))
		for _, t := range v.Nested {
			nt.Add(output.Key(t.Small+"_in_"+t.Large), t.Small+" in "+t.Large, output.Num(t.LR), output.Count(t.DF), output.Count(t.Boundary), output.P(t.P), output.P(t.Adjusted), output.Text(t.How))
		}
		r.Add(nt)
	}
	if v.Boot != nil {
		v.Boot.addTo(r)
	}
	for _, c := range v.Ranked {
		for _, why := range c.reasons() {
			r.Note("%s is ruled out: %s", c.Name, why)
		}
		if c.Status == candFailed {
			r.Note("%s: fit failed: %s", c.Name, c.Err)
		}
		if c.Status == candFitted && c.Err != "" {
			r.Note("%s: %s", c.Name, c.Err)
		}
		for _, s := range c.Ident {
			r.Note("%s: %s", c.Name, s)
		}
	}
	if v.Interrupted {
		r.Note("interrupted: only the candidates finished before the interrupt are shown")
	}
	r.Note("a candidate consistent with the records is not thereby true, nor the only one that is; the gap goodness-of-fit test is conservative with fitted parameters")
}

func yesNo(b bool, yes, no string) string {
	if b {
		return yes
	}
	return no
}

// roundTrip passes v through JSON, so that a single run sees exactly what
// a merge of part files sees.
func roundTrip[T any](v *T) (*T, error) {
	b, err := json.Marshal(v)
	if err != nil {
		return nil, err
	}
	var out T
	if err := json.Unmarshal(b, &out); err != nil {
		return nil, err
	}
	return &out, nil
}
