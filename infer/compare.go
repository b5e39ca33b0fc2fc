package infer

import (
	"context"
	"errors"
	"fmt"
	"math"
	"slices"
	"strings"

	"edgewise/likelihood"
	"edgewise/models"
)

// Candidate is one hidden-network scheme to fit and rank.
type Candidate struct {
	Name   string
	Source string // the spec file, or the family that generated it
	Model  *models.Model
}

// CompareOptions configures Compare.
type CompareOptions struct {
	// Fit configures each candidate's fit (instrument, starts, seed,
	// workers, context, progress).
	Fit FitOptions
	// Evidence configures the data's side (labels of the visible edge,
	// level, window lengths, instrument facts for the bounds).
	Evidence EvidenceOptions
	// KnownAffinity, when not nil, is a force the user knows (k_BT): every
	// cycle that crosses the visible edge once in the + direction is held
	// at it (tight coupling), and the likelihood ratio of that model
	// against the free one joins each candidate's checks.
	KnownAffinity *float64
	// KnownCycles are cycles whose affinities the user knows, by their
	// states: each candidate that has such a cycle is refitted with it
	// held at its value, and the likelihood ratio joins its checks
	// (candidates without any of the cycles are not tested). Used instead
	// of KnownAffinity when both are given.
	KnownCycles []KnownCycle
	// Shard selects a deterministic share of the candidates: those with
	// index i such that i mod Shard.Of == Shard.Index. Zero value: all.
	Shard Shard
	// Progress, when not nil, is called after each candidate.
	Progress func(done, total int, name string)
}

// Shard is a share i of N of a job list (0-based index).
type Shard struct{ Index, Of int }

// Selects reports whether job i belongs to the shard.
func (s Shard) Selects(i int) bool { return s.Of <= 1 || i%s.Of == s.Index }

// Ranked is one candidate's line of the ranking.
type Ranked struct {
	Candidate
	Index int        // position in the candidate list
	Fit   *FitResult // nil when the fit failed
	Err   string     // why the fit failed
	// Impossible is set when the records hold a label pair the scheme
	// cannot produce: it is ruled out without a fit.
	Impossible *ImpossibleError
	// Criteria with k = the effective number of parameters and n = the
	// number of gaps.
	AIC, AICc, BIC, DeltaBIC, Weight float64
	Consistency                      *Consistency
}

// Ranking is the outcome of Compare.
type Ranking struct {
	Evidence *Evidence
	Ranked   []Ranked // best BIC first; failed fits last
	Nested   []NestedTest
	Notes    []string
	// Interrupted is true when the context stopped the run; the finished
	// candidates are kept.
	Interrupted bool
}

// Compare fits every candidate to d, holds each against the data's
// evidence, and ranks them by BIC (AIC, AICc and Akaike weights beside).
// A candidate whose fit fails stays in the ranking, marked, and the others
// go on. The candidates are fitted one after the other, each fit using
// every worker, so the result does not depend on the number of workers.
func Compare(cands []Candidate, d *likelihood.Data, o CompareOptions) (*Ranking, error) {
	if len(cands) == 0 {
		return nil, fmt.Errorf("compare: no candidates")
	}
	if o.Evidence.Level == 0 {
		o.Evidence.Level = 0.95
	}
	if o.Fit.Context == nil {
		o.Fit.Context = context.Background()
	}
	ev, err := GatherEvidence(d, o.Evidence)
	if err != nil {
		return nil, fmt.Errorf("compare: %w", err)
	}
	cmp := &Ranking{Evidence: ev}
	var sel []int
	for i := range cands {
		if o.Shard.Selects(i) {
			sel = append(sel, i)
		}
	}
	for done, i := range sel {
		if o.Fit.Context.Err() != nil {
			cmp.Interrupted = true
			break
		}
		c := cands[i]
		r := Ranked{Candidate: c, Index: i}
		fit, err := Fit(c.Model, d, o.Fit)
		var imp *ImpossibleError
		switch {
		case errors.As(err, &imp):
			r.Impossible = imp
		case err != nil:
			r.Err = err.Error()
		case fit.Interrupted:
			cmp.Interrupted = true
			r.Err = "interrupted"
		default:
			r.Fit = fit
			var known *Check
			switch {
			case len(o.KnownCycles) > 0:
				known = knownCyclesCheck(c.Model, fit, d, ev.Plus, o.KnownCycles, o.Fit)
			case o.KnownAffinity != nil:
				known = knownCheck(c.Model, fit, d, ev.Plus, *o.KnownAffinity, o.Fit)
			}
			cons, err := CheckConsistency(fit, d, ev, ConsistencyOptions{Likelihood: o.Fit.Likelihood, Level: ev.Level, Seed: o.Fit.Seed, Known: known})
			if err != nil {
				r.Err = "consistency checks failed: " + err.Error()
			} else {
				r.Consistency = cons
			}
		}
		cmp.Ranked = append(cmp.Ranked, r)
		if o.Progress != nil {
			o.Progress(done+1, len(sel), c.Name)
		}
	}
	Rank(cmp)
	cmp.Nested = NestedTests(cmp.Ranked)
	return cmp, nil
}

// knownCheck fits the candidate with the known force imposed and returns
// the likelihood-ratio check; nil when the scheme has no cycle through
// the visible edge (the force then says nothing about it).
func knownCheck(m *models.Model, free *FitResult, d *likelihood.Data, plus string, value float64, fo FitOptions) *Check {
	mc, err := withKnownForce(m, plus, value, free)
	if err != nil || len(mc.Affinities) == len(m.Affinities) {
		return nil
	}
	fo.Starts = max(2, fo.Starts/2)
	fo.Profile = false
	con, err := Fit(mc, d, fo)
	if err != nil {
		ch := Check{Name: fmt.Sprintf("known force %.4g k_BT", value), P: math.NaN(), Adjusted: math.NaN(), Note: "the constrained fit failed: " + err.Error()}
		return &ch
	}
	ch := KnownForceTest(free, con, fmt.Sprintf("%.4g k_BT on every cycle through the visible edge (tight coupling)", value))
	return &ch
}

// knownCyclesCheck fits the candidate with the known cycles it has held at
// their values and returns the likelihood-ratio check; nil when it has
// none of them.
func knownCyclesCheck(m *models.Model, free *FitResult, d *likelihood.Data, plus string, known []KnownCycle, fo FitOptions) *Check {
	mc, n, err := WithKnownCycles(m, plus, known)
	var names []string
	for _, k := range known {
		names = append(names, k.String())
	}
	what := "known cycle affinities " + strings.Join(names, ", ")
	if err != nil {
		ch := Check{Name: what, P: math.NaN(), Adjusted: math.NaN(), Note: "cannot impose them: " + err.Error()}
		return &ch
	}
	if n == 0 {
		return nil
	}
	mc = modelAt(mc, free.Free, free.X)
	fo.Starts = max(2, fo.Starts/2)
	fo.Profile = false
	con, err := Fit(mc, d, fo)
	if err != nil {
		ch := Check{Name: what, P: math.NaN(), Adjusted: math.NaN(), Note: "the constrained fit failed: " + err.Error()}
		return &ch
	}
	ch := KnownForceTest(free, con, what)
	ch.Name = "known force " + strings.Join(names, ", ")
	return &ch
}

// Rank fills the criteria of the fitted candidates and sorts them: best
// (lowest) BIC first, ties by AIC then by candidate order; failed fits
// last in candidate order. Akaike weights are exp(-dAIC/2) normalised
// over the fitted candidates (Burnham and Anderson, Model Selection and
// Multimodel Inference, 2nd ed. (2002), section 2.9).
func Rank(c *Ranking) {
	minAIC, minBIC := math.Inf(1), math.Inf(1)
	for i := range c.Ranked {
		r := &c.Ranked[i]
		if r.Fit == nil {
			r.AIC, r.AICc, r.BIC = math.NaN(), math.NaN(), math.NaN()
			continue
		}
		r.AIC, r.AICc, r.BIC = r.Fit.AIC(), r.Fit.AICc(), r.Fit.BIC()
		minAIC = math.Min(minAIC, r.AIC)
		minBIC = math.Min(minBIC, r.BIC)
	}
	sumW := 0.0
	for i := range c.Ranked {
		r := &c.Ranked[i]
		if r.Fit == nil {
			r.DeltaBIC, r.Weight = math.NaN(), math.NaN()
			continue
		}
		r.DeltaBIC = r.BIC - minBIC
		r.Weight = math.Exp(-(r.AIC - minAIC) / 2)
		sumW += r.Weight
	}
	for i := range c.Ranked {
		if c.Ranked[i].Fit != nil {
			c.Ranked[i].Weight /= sumW
		}
	}
	slices.SortStableFunc(c.Ranked, func(a, b Ranked) int {
		switch {
		case a.Fit == nil && b.Fit == nil:
			return a.Index - b.Index
		case a.Fit == nil:
			return 1
		case b.Fit == nil:
			return -1
		case a.BIC != b.BIC:
			if a.BIC < b.BIC {
				return -1
			}
			return 1
		case a.AIC != b.AIC:
			if a.AIC < b.AIC {
				return -1
			}
			return 1
		}
		return a.Index - b.Index
	})
}

// RuledOut reports whether the candidate is ruled out: impossible records,
// or a reason of its consistency checks.
func (r *Ranked) RuledOut() bool {
	return r.Impossible != nil || (r.Consistency != nil && r.Consistency.RuledOut())
}

// Reasons lists why the candidate is ruled out.
func (r *Ranked) Reasons() []string {
	if r.Impossible != nil {
		return []string{r.Impossible.Error()}
	}
	if r.Consistency != nil {
		return r.Consistency.Reasons
	}
	return nil
}
