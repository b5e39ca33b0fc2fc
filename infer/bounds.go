package infer

import (
	"fmt"
	"math"
	"slices"

	"edgewise/likelihood"
)

// BoundOptions sets up EntropyBounds.
type BoundOptions struct {
	Labels EdgeLabels
	// Level is the confidence level of every interval, default 0.95.
	Level float64
	// Deprecated: Boot and Seed are ignored: every interval of
	// EntropyBounds is now a jackknife interval, which draws no random
	// numbers.
	Boot int
	Seed uint64
	// Conditions is what is known about the labels and the instrument
	// (BoundsValid). MultiEdge is the same as Conditions.MultiEdge (either
	// sets it).
	Conditions BoundConditions
	MultiEdge  bool
	// K is the number of neighbours of the kNN divergence, default 1
	// (knnK). Groups is the number of jackknife groups of the waiting-time
	// part, default 20.
	K, Groups int
}

func (o *BoundOptions) defaults() error {
	if o.Level == 0 {
		o.Level = 0.95
	}
	if !(o.Level > 0 && o.Level < 1) {
		return fmt.Errorf("confidence level %v is not in (0, 1)", o.Level)
	}
	if o.K == 0 {
		o.K = knnK
	}
	if o.Groups == 0 {
		o.Groups = 20
	}
	if o.K < 1 || o.Groups < 2 {
		return fmt.Errorf("bad options: k = %d, %d jackknife groups", o.K, o.Groups)
	}
	o.Conditions.MultiEdge = o.Conditions.MultiEdge || o.MultiEdge
	return nil
}

// Bounds are lower bounds on the entropy production rate sigma (k_B per
// unit time) from one visible edge, each with an interval, and the
// statistics they are made of.
type Bounds struct {
	// Validity is the decision of BoundsValid on these data: when it does
	// not hold, FJ, TUR, Sequence, WaitingTime and Transition are withheld
	// (Undefined, with the reason in their Note) and Reason says why.
	// Claimed is Validity.Hold, and Reason Validity.Reason().
	Validity BoundValidity
	Claimed  bool
	Reason   string

	Events   int     // events used
	Duration float64 // observed time (time units): sum over records of last - first event time, or End - first
	// J is the visible current (n_+ - n_-)/Duration in 1/time, F the
	// effective affinity (k_BT).
	J, F Estimate
	// FJ = F*J (k_B/time). sigma >= F J holds when each label sits on one
	// directed edge and the instrument treats both directions alike: the
	// same detection probability for + and -, and no dead time. (With
	// p_+ != p_- the labels coarse-grain a chain whose entropy production
	// is sigma + J ln(p_+/p_-); a dead time is blind after an event and
	// not before, which breaks time-reversal symmetry. Either can make an
	// undriven system show F J > 0.) Its interval is the range of F*J
	// over the joint ellipse of (F, J) (boundinterval.go), which keeps its
	// level at equilibrium where F*J = 0; with fewer than minFJPairs ++ or
	// -- pairs (or an infinite plug-in F) the conservative rectangle of
	// F's exact interval and J's (fjRectangle).
	FJ Estimate
	// D is the diffusion coefficient of the current, Var c(t) ~ a + 2 D t
	// at long t (1/time), fitted by weighted least squares to the
	// Variance points with T >= FitFrom: the same estimator and interval
	// as Summarize's Part.Diffusion (diffusion.go). TUR = J^2/D is the
	// bound of the thermodynamic uncertainty relation (Barato and Seifert,
	// PRL 114, 158101 (2015)): Var c(t)/<c(t)>^2 >= 2/(sigma t) for any
	// current. It is estimated as J_hat^2/D_hat - 2/T (T the observed
	// time), which removes the upward bias Var(J_hat)/D = 2/T of the
	// plug-in ratio; its interval is the range of J^2/D over the joint
	// ellipse of (J, ln D) (turEstimate).
	D, TUR           Estimate
	Variance         []VariancePoint
	FitFrom, FitTo   float64
	Sequence         Estimate // sum_l nu_l sum_l' P(l'|l) ln[P(l'|l)/P(rev l|rev l')] = F (N++ - N--)/Duration
	WaitingTime      Estimate // N++/Duration KL(f++||f--) + N--/Duration KL(f--||f++)
	Transition       Estimate // Sequence + WaitingTime
	KL               [2]float64
	Gaps             [2]int // N++ and N--: the gap samples of the two divergences
	JackknifeBlocks  int    // blocks of the jackknife of J, F, D, F*J and J^2/D
	JackknifeGroups  int    // groups of the jackknife of the waiting-time part
	WaitingTimeNotes []string
	// Deprecated: BootstrapBlocks is JackknifeBlocks.
	BootstrapBlocks int
}

// VariancePoint is one point of the curve Var c(t) against t.
type VariancePoint struct {
	T       float64 // window duration (time units)
	Windows int     // non-overlapping windows of duration T
	Mean    float64 // mean current per window
	Var     float64 // unbiased variance of the window current
}

// EntropyBounds estimates three lower bounds on the entropy production
// rate from the events of one visible edge (labels opt.Labels):
//
//  1. F*J, with F = ln[P(+|+)/P(-|-)] and J the visible current;
//  2. the TUR bound J^2/D, with D from Var c(t) ~ a + 2 D t over
//     non-overlapping windows of durations t = t_max 2^-j, t_max =
//     Duration/400 (at least 32 mean gaps, at most the longest record),
//     fitted on the four longest (t >= t_max/8) (diffusion.go);
//  3. the transition-based waiting-time bound (Harunari, Dutta, Polettini
//     and Roldan, PRX 12, 041026 (2022); van der Meer, Ertel and Seifert,
//     PRX 12, 031025 (2022))
//     sigma >= sum_l nu_l sum_l' int psi_{l->l'} ln[psi_{l->l'}/psi_{rev l'->rev l}] dt,
//     split with psi_{l->l'} = P(l'|l) f_{l->l'} into a sequence part (= F*J
//     up to one event per record) and a waiting-time part. For one edge
//     only the pairs ++ and -- contribute, each against the other:
//     N++/Duration KL(f++||f--) + N--/Duration KL(f--||f++),
//     with each KL from KLDivergenceKNN on log-gaps.
//
// Whether they are bounds at all is decided by BoundsValid (validity.go)
// from the data's Markov-order test and opt.Conditions: when it does not
// hold, the bounds are withheld with the reason (J, F and D are still
// estimated).
//
// Intervals: J, D, F*J and J^2/D from one delete-one-block jackknife
// (blocks of t_max of one record), so that their correlations are kept;
// J and D as in Summarize, F*J and J^2/D as ranges over joint ellipses
// (boundinterval.go). The waiting-time and transition parts from a
// delete-one-group jackknife over opt.Groups contiguous groups of blocks
// with a Student t quantile.
//
// How much data: the kNN divergence has an SD of about 0.2, 0.08 and 0.03
// nats with 10^2, 10^3 and 10^4 gaps of each kind (knnK), so the
// waiting-time part needs about 10^4 ++ and 10^4 -- gaps (more events when
// F is large, since N-- ~ N e^-F) to be resolved to a few hundredths of
// the pair rates; below 1000 of either kind it is reported with a warning.
//
// The TUR bound further assumes that c is a current: with a detection
// probability p < 1 it holds for the network in which the missed part of
// each visible edge is a parallel hidden edge, whose sigma equals the
// original one when p is the same for both directions. Stationarity is
// assumed throughout.
func EntropyBounds(d *likelihood.Data, opt BoundOptions) (*Bounds, error) {
	if err := opt.defaults(); err != nil {
		return nil, fmt.Errorf("entropy bounds: %w", err)
	}
	fw, bw, err := opt.Labels.resolve(d)
	if err != nil {
		return nil, fmt.Errorf("entropy bounds: %w", err)
	}
	if err := CheckTimes(d); err != nil {
		return nil, fmt.Errorf("entropy bounds: %w", err)
	}
	span, events := fluctObserved(d)
	if !(span > 0) || events < 2 {
		return nil, fmt.Errorf("entropy bounds: %d events over time %g: too few", events, span)
	}
	b := &Bounds{Events: events, Duration: span}
	b.Validity = CheckBounds(d, opt.Conditions)
	b.Claimed, b.Reason = b.Validity.Hold, b.Validity.Reason()
	b.F = EffectiveAffinity(d, fw, bw, AffinityOptions{Level: opt.Level})
	cf := newCurrentFit(d.Records, fw, bw, false)
	grid := cf.grid
	b.JackknifeBlocks = len(cf.blocks)
	b.BootstrapBlocks = b.JackknifeBlocks
	for j, t := range grid {
		b.Variance = append(b.Variance, VariancePoint{T: t, Windows: int(cf.tot.w[j]), Mean: cf.tot.mean(j), Var: cf.tot.variance(j)})
	}
	b.FitTo = cf.tmax
	if cf.nfit > 0 {
		b.FitFrom = grid[cf.nfit-1]
	}
	j0 := cf.tot.c / cf.tot.dur
	f0, _ := fluctAffinity(cf.tot.pairs)
	d0 := cf.diffusion(&cf.tot)
	// E[J_hat^2] = J^2 + Var(J_hat) = J^2 + 2 D / T, so J_hat^2/D
	// overstates J^2/D by about 2/T; subtract it (it matters near
	// equilibrium, where it would otherwise report a positive bound).
	tur0 := j0*j0/d0 - 2/cf.tot.dur
	var bj, bf, bd []float64
	cf.jackknife(func(t *boundTotals) {
		f, _ := fluctAffinity(t.pairs)
		bj = append(bj, t.c/t.dur)
		bf = append(bf, f)
		bd = append(bd, cf.diffusion(t))
	})
	b.J = cf.currentEstimate(j0, bj, opt.Level)
	b.D = cf.diffusionEstimate(d0, bd, opt.Level)
	b.FJ = fjEstimate(f0, j0, bf, bj, cf.tot.pairs, opt.Level)
	switch {
	case b.D.Undefined:
		b.TUR = nanEstimate("", "no D: "+b.D.Note)
	case b.J.Undefined:
		b.TUR = nanEstimate("", "no J: "+b.J.Note)
	default:
		b.TUR = turEstimate(tur0, j0, d0, bj, bd, opt.Level)
	}
	b.waitingTime(d, fw, cf.raw, cf.tmax, opt)
	if !b.Validity.Hold {
		why := "withheld: " + b.Reason
		for _, e := range []*Estimate{&b.FJ, &b.TUR, &b.Sequence, &b.WaitingTime, &b.Transition} {
			*e = nanEstimate(e.Method, why)
		}
	}
	return b, nil
}

// waitingTime fills the sequence, waiting-time and transition parts and
// their jackknife intervals.
func (b *Bounds) waitingTime(d *likelihood.Data, fw uint8, raw int, tmax float64, opt BoundOptions) {
	type gap struct {
		v float64 // ln(gap)
		g int32   // jackknife group
	}
	var gaps [2][]gap // ++ and --
	G := min(opt.Groups, raw)
	var dur = make([]float64, G)
	var cnt = make([][2][2]int64, G)
	bi := 0
	ties := 0
	for r := range d.Records {
		rec := &d.Records[r]
		t0, t1 := fluctSpan(rec)
		nb := recordBlocks(rec, tmax)
		for k := 1; k < len(rec.Time); k++ {
			// The block that boundBlocks puts event k in (times on a
			// boundary belong to the earlier block).
			blk := bi + max(0, min(nb-1, int(math.Ceil((rec.Time[k]-t0)/tmax))-1))
			g := int32(blk * G / raw)
			a, c := fluctSide(rec.Label[k-1], fw), fluctSide(rec.Label[k], fw)
			cnt[g][a][c]++
			if a != c {
				continue
			}
			dt := rec.Time[k] - rec.Time[k-1]
			if !(dt > 0) {
				ties++
				continue
			}
			gaps[a] = append(gaps[a], gap{math.Log(dt), g})
		}
		for j := 0; j < nb; j++ {
			// Block j's duration, as currentBlocks makes it.
			be := math.Min(t0+float64(j+1)*tmax, t1)
			if j == nb-1 {
				be = t1
			}
			dur[(bi+j)*G/raw] += be - (t0 + float64(j)*tmax)
		}
		bi += nb
	}
	for a := range gaps {
		slices.SortFunc(gaps[a], func(x, y gap) int {
			switch {
			case x.v < y.v:
				return -1
			case x.v > y.v:
				return 1
			}
			return 0
		})
	}
	b.Gaps = [2]int{len(gaps[0]), len(gaps[1])}
	b.JackknifeGroups = G
	if ties > 0 {
		b.WaitingTimeNotes = append(b.WaitingTimeNotes, fmt.Sprintf("%d zero gaps (tied times) left out of the divergences", ties))
	}
	// estimate computes the three parts leaving out group skip (-1: none).
	estimate := func(skip int) (seq, wt float64, kl [2]float64, err error) {
		var T float64
		var n [2][2]int64
		for g := 0; g < G; g++ {
			if g != skip {
				T += dur[g]
				addPairCounts(&n, cnt[g])
			}
		}
		f, _ := fluctAffinity(n)
		seq = f * float64(n[0][0]-n[1][1]) / T
		var xs [2][]float64
		for a := range gaps {
			xs[a] = make([]float64, 0, len(gaps[a]))
			for _, v := range gaps[a] {
				if int(v.g) != skip {
					xs[a] = append(xs[a], v.v)
				}
			}
		}
		for a := range 2 {
			if len(xs[a]) < opt.K+1 || len(xs[1-a]) < opt.K {
				// Leaving a group out can empty a small sample.
				err = fmt.Errorf("too few gaps without group %d (%d ++ and %d --)", skip, len(xs[0]), len(xs[1]))
				return
			}
			kl[a], err = klSorted(xs[a], xs[1-a], opt.K)
			if err != nil {
				return
			}
		}
		wt = float64(n[0][0])/T*kl[0] + float64(n[1][1])/T*kl[1]
		return
	}
	jm := "delete-one-group jackknife"
	if min(b.Gaps[0], b.Gaps[1]) < opt.K+2 || G < 2 {
		note := fmt.Sprintf("too few gaps for the waiting-time part (%d ++ and %d --; the kNN divergence needs at least %d of each)", b.Gaps[0], b.Gaps[1], opt.K+2)
		b.Sequence, b.WaitingTime, b.Transition = nanEstimate(jm, note), nanEstimate(jm, note), nanEstimate(jm, note)
		return
	}
	seq, wt, kl, err := estimate(-1)
	if err != nil {
		note := "waiting-time part not computed: " + err.Error()
		b.WaitingTime, b.Transition = nanEstimate(jm, note), nanEstimate(jm, note)
		b.Sequence = Estimate{Value: seq, SE: math.NaN(), Lo: math.NaN(), Hi: math.NaN()}
		return
	}
	b.KL = kl
	var js, jw, jt []float64
	dropped := 0
	for g := 0; g < G; g++ {
		s, w, _, err := estimate(g)
		if err != nil || math.IsNaN(s) || math.IsInf(s, 0) {
			dropped++
			continue
		}
		js, jw, jt = append(js, s), append(jw, w), append(jt, s+w)
	}
	b.Sequence = jackknife(seq, js, opt.Level, jm)
	b.WaitingTime = jackknife(wt, jw, opt.Level, jm)
	b.Transition = jackknife(seq+wt, jt, opt.Level, jm)
	if dropped > 0 {
		note := fmt.Sprintf("%d of %d jackknife groups left out (too few gaps or no finite F without them): the interval is rough", dropped, G)
		b.WaitingTime.Note = joinNote(b.WaitingTime.Note, note)
		b.Transition.Note = joinNote(b.Transition.Note, note)
		b.Sequence.Note = joinNote(b.Sequence.Note, note)
	}
	if m := min(b.Gaps[0], b.Gaps[1]); m < 1000 {
		note := fmt.Sprintf("only %d gaps of the rarer pair: the kNN divergence has an SD of about 0.1-0.2 nats and a bias up to 0.07 nats at this size; about 10^4 of each give a few hundredths", m)
		b.WaitingTime.Note = joinNote(b.WaitingTime.Note, note)
		b.Transition.Note = joinNote(b.Transition.Note, note)
	}
}

// jackknife is a value with the delete-one-group jackknife SE
// sqrt((G-1)/G sum (v_g - mean)^2) and a Student t interval on G-1
// degrees of freedom.
func jackknife(v float64, reps []float64, level float64, method string) Estimate {
	if len(reps) < 2 {
		return Estimate{Value: v, SE: math.NaN(), Lo: math.NaN(), Hi: math.NaN(), Method: method, Note: "too few groups for a jackknife"}
	}
	e := jackEstimate(v, reps, level, false, fmt.Sprintf("%s, %d groups", method, len(reps)))
	return e
}
