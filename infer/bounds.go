package infer

import (
	"fmt"
	"math"
	"slices"

	"edgewise/likelihood"

	"gonum.org/v1/gonum/stat"
	"gonum.org/v1/gonum/stat/distuv"
)

// BoundOptions sets up EntropyBounds.
type BoundOptions struct {
	Labels EdgeLabels
	// Level is the confidence level of every interval, default 0.95.
	Level float64
	// Boot is the number of block-bootstrap replicates, default 200; Seed
	// fixes them.
	Boot int
	Seed uint64
	// MultiEdge says that a label may sit on several directed edges. The
	// bounds are then not claimed (see EntropyBounds); J and D are still
	// estimated.
	MultiEdge bool
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
	if o.Boot == 0 {
		o.Boot = 200
	}
	if o.K == 0 {
		o.K = knnK
	}
	if o.Groups == 0 {
		o.Groups = 20
	}
	if o.Boot < 0 || o.K < 1 || o.Groups < 2 {
		return fmt.Errorf("bad options: %d bootstrap replicates, k = %d, %d jackknife groups", o.Boot, o.K, o.Groups)
	}
	return nil
}

// Bounds are lower bounds on the entropy production rate sigma (k_B per
// unit time) from one visible edge, each with an interval, and the
// statistics they are made of.
type Bounds struct {
	// Claimed is false when the labels may sit on several directed edges;
	// Reason then says why no bound is given.
	Claimed bool
	Reason  string

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
	// undriven system show F J > 0.)
	// When the plug-in F is infinite (a ++ or -- pair never seen) FJ is
	// the one-sided bound F_lo*J (Value +Inf, Lo the bound; see oneSidedFJ).
	FJ Estimate
	// D is the diffusion coefficient of the current, Var c(t) ~ a + 2 D t
	// at long t (1/time), fitted by weighted least squares to the
	// Variance points with T >= FitFrom: the same estimator, interval and
	// seed as Summarize's Part.Diffusion (diffusion.go). TUR = J^2/D is the bound of the
	// thermodynamic uncertainty relation (Barato and Seifert, PRL 114,
	// 158101 (2015)): Var c(t)/<c(t)>^2 >= 2/(sigma t) for any current.
	// It is estimated as J_hat^2/D_hat - 2/T (T the observed time), which
	// removes the upward bias Var(J_hat)/D = 2/T of the plug-in ratio.
	D, TUR           Estimate
	Variance         []VariancePoint
	FitFrom, FitTo   float64
	Sequence         Estimate // sum_l nu_l sum_l' P(l'|l) ln[P(l'|l)/P(rev l|rev l')] = F (N++ - N--)/Duration
	WaitingTime      Estimate // N++/Duration KL(f++||f--) + N--/Duration KL(f--||f++)
	Transition       Estimate // Sequence + WaitingTime
	KL               [2]float64
	Gaps             [2]int // N++ and N--: the gap samples of the two divergences
	BootstrapBlocks  int
	JackknifeGroups  int
	WaitingTimeNotes []string
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
// Intervals: J, F*J, D and the TUR bound from one block bootstrap (blocks
// of t_max of one record, drawn with replacement, seed opt.Seed;
// percentile intervals), so that their correlations are kept. The waiting-time and transition parts from a delete-one-group
// jackknife over opt.Groups contiguous groups of blocks with a Student t
// quantile: a bootstrap draw repeats gaps, and the repeats are zero
// nearest-neighbour distances, which the kNN estimator cannot take.
//
// How much data: the kNN divergence has an SD of about 0.2, 0.08 and 0.03
// nats with 10^2, 10^3 and 10^4 gaps of each kind (knnK), so the
// waiting-time part needs about 10^4 ++ and 10^4 -- gaps (more events when
// F is large, since N-- ~ N e^-F) to be resolved to a few hundredths of
// the pair rates; below 1000 of either kind it is reported with a warning.
//
// The bounds hold when each label sits on one directed edge and both
// directions are detected alike (equal detection probabilities, no dead
// time); the data cannot tell, so callers must say so. When
// opt.MultiEdge is set they are not claimed: a label on several edges does
// not say which transition happened, so the reverse of an event is not
// known, c need not be a current of the network and the label sequence is
// not a time-reversal-consistent coarse graining; F*J can then exceed sigma
// (design section 8). The TUR bound further assumes that c is a current:
// with a detection probability p < 1 it holds for the network in which the
// missed part of each visible edge is a parallel hidden edge, whose sigma
// equals the original one when p is the same for both directions.
// Stationarity is assumed throughout.
func EntropyBounds(d *likelihood.Data, opt BoundOptions) (*Bounds, error) {
	if err := opt.defaults(); err != nil {
		return nil, fmt.Errorf("entropy bounds: %w", err)
	}
	fw, bw, err := opt.Labels.resolve(d)
	if err != nil {
		return nil, fmt.Errorf("entropy bounds: %w", err)
	}
	span, events := fluctObserved(d)
	if !(span > 0) || events < 2 {
		return nil, fmt.Errorf("entropy bounds: %d events over time %g: too few", events, span)
	}
	b := &Bounds{Claimed: !opt.MultiEdge, Events: events, Duration: span}
	b.F = EffectiveAffinity(d, fw, bw, AffinityOptions{Level: opt.Level})
	cf := newCurrentFit(d.Records, fw, bw, false)
	grid := cf.grid
	b.BootstrapBlocks = len(cf.blocks)
	for j, t := range grid {
		b.Variance = append(b.Variance, VariancePoint{T: t, Windows: int(cf.tot.w[j]), Mean: cf.tot.mean(j), Var: cf.tot.variance(j)})
	}
	b.FitTo = cf.tmax
	if cf.nfit > 0 {
		b.FitFrom = grid[cf.nfit-1]
	}
	stats := func(t *boundTotals) (j, f, fj, dd, tur float64) {
		j = t.c / t.dur
		f, _ = fluctAffinity(t.pairs)
		dd = cf.diffusion(t)
		// E[J_hat^2] = J^2 + Var(J_hat) = J^2 + 2 D / T, so J_hat^2/D
		// overstates J^2/D by about 2/T; subtract it (it matters near
		// equilibrium, where it would otherwise report a positive bound).
		return j, f, f * j, dd, j*j/dd - 2/t.dur
	}
	j0, f0, fj0, d0, tur0 := stats(&cf.tot)
	var bj, bfj, bd, btur []float64
	cf.bootstrap(opt.Boot, opt.Seed, func(t *boundTotals) {
		j, f, fj, dd, tur := stats(t)
		bj = append(bj, j)
		if !math.IsInf(f, 0) && !math.IsNaN(f) {
			bfj = append(bfj, fj)
		}
		if dd > 0 {
			bd = append(bd, dd)
			btur = append(btur, tur)
		}
	})
	method := cf.method()
	b.J = cf.currentEstimate(j0, d0, bj, opt.Level)
	b.FJ = bootEstimate(fj0, bfj, opt.Level, method)
	b.D = cf.diffusionEstimate(d0, bd, opt.Level)
	b.TUR = bootEstimate(tur0, btur, opt.Level, method)
	if b.D.Note != "" {
		b.TUR.Note = joinNote(b.TUR.Note, "from D: "+b.D.Note)
	}
	if !(d0 > 0) {
		b.TUR = nanEstimate(b.TUR.Method, "D is not positive: no TUR bound")
	}
	if math.IsInf(f0, 0) || math.IsNaN(f0) {
		b.FJ = oneSidedFJ(b.F, j0, b.J)
	}
	b.waitingTime(d, fw, cf.blocks, cf.tmax, opt)
	if opt.MultiEdge {
		why := "not claimed: a label may sit on several directed edges, so the reverse of an event is not known and F*J, J^2/D and the waiting-time sum can exceed sigma (design section 8)"
		b.Reason = why
		for _, e := range []*Estimate{&b.FJ, &b.TUR, &b.Sequence, &b.WaitingTime, &b.Transition} {
			*e = nanEstimate(e.Method, why)
		}
	}
	return b, nil
}

// oneSidedFJ is the F*J bound when the plug-in F is infinite: F carries
// the one-sided Clopper-Pearson bound of EffectiveAffinity (F >= Lo when
// F = +Inf, F <= Hi when F = -Inf), so
//
//	F = +Inf, J > 0:  F J >= Lo J,
//	F = -Inf, J < 0:  F J >= Hi J   (multiplying F <= Hi by J < 0),
//
// at the level of F's bound, with J at its point value. The result has
// Value +Inf (the plug-in product), Lo the bound and Hi +Inf. When J has
// the other sign (or is zero) the data give no such bound: NaN.
func oneSidedFJ(F Estimate, j float64, J Estimate) Estimate {
	const method = "one-sided: F bound (Clopper-Pearson) times J"
	var lo float64
	switch {
	case math.IsInf(F.Value, 1) && j > 0 && !math.IsNaN(F.Lo) && !math.IsInf(F.Lo, 0):
		lo = F.Lo * j
	case math.IsInf(F.Value, -1) && j < 0 && !math.IsNaN(F.Hi) && !math.IsInf(F.Hi, 0):
		lo = F.Hi * j
	default:
		return nanEstimate("", fmt.Sprintf("F is infinite or undefined and J = %.4g gives no one-sided bound: %s", j, F.Note))
	}
	note := fmt.Sprintf("F is infinite in the plug-in estimate; one-sided bound F*J >= %.4g (F's one-sided Clopper-Pearson limit times J = %.4g; the uncertainty of J, SE %.2g, is not included)", lo, j, J.SE)
	return Estimate{Value: math.Inf(1), SE: math.NaN(), Lo: lo, Hi: math.Inf(1), Method: method, Note: note}
}

// bootEstimate is a point value with the SD and percentile interval of its
// bootstrap replicates.
func bootEstimate(v float64, reps []float64, level float64, method string) Estimate {
	e := Estimate{Value: v, SE: math.NaN(), Lo: math.NaN(), Hi: math.NaN(), Method: method}
	if len(reps) < 2 {
		e.Method = ""
		e.Note = "too few blocks for a bootstrap interval"
		return e
	}
	s := slices.Clone(reps)
	slices.Sort(s)
	e.SE = stat.StdDev(s, nil)
	e.Lo = quantileSorted(s, (1-level)/2)
	e.Hi = quantileSorted(s, 1-(1-level)/2)
	return e
}

// waitingTime fills the sequence, waiting-time and transition parts and
// their jackknife intervals.
func (b *Bounds) waitingTime(d *likelihood.Data, fw uint8, blocks []boundBlock, tmax float64, opt BoundOptions) {
	type gap struct {
		v float64 // ln(gap)
		g int32   // jackknife group
	}
	var gaps [2][]gap // ++ and --
	G := min(opt.Groups, len(blocks))
	var dur = make([]float64, G)
	var cnt = make([][2][2]int64, G)
	bi := 0
	ties := 0
	for r := range d.Records {
		rec := &d.Records[r]
		t0, t1 := fluctSpan(rec)
		nb := max(1, int(math.Ceil((t1-t0)/tmax)))
		for k := 1; k < len(rec.Time); k++ {
			// The block that boundBlocks puts event k in (times on a
			// boundary belong to the earlier block).
			blk := bi + max(0, min(nb-1, int(math.Ceil((rec.Time[k]-t0)/tmax))-1))
			g := int32(blk * G / len(blocks))
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
			dur[(bi+j)*G/len(blocks)] += blocks[bi+j].dur
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
	for g := 0; g < G; g++ {
		s, w, _, err := estimate(g)
		if err != nil || math.IsNaN(s) || math.IsInf(s, 0) {
			continue
		}
		js, jw, jt = append(js, s), append(jw, w), append(jt, s+w)
	}
	b.Sequence = jackknife(seq, js, opt.Level, jm)
	b.WaitingTime = jackknife(wt, jw, opt.Level, jm)
	b.Transition = jackknife(seq+wt, jt, opt.Level, jm)
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
	g := float64(len(reps))
	if len(reps) < 2 {
		return Estimate{Value: v, SE: math.NaN(), Lo: math.NaN(), Hi: math.NaN(), Method: method, Note: "too few groups for a jackknife"}
	}
	m := stat.Mean(reps, nil)
	ss := 0.0
	for _, r := range reps {
		ss += (r - m) * (r - m)
	}
	se := math.Sqrt((g - 1) / g * ss)
	tq := distuv.StudentsT{Mu: 0, Sigma: 1, Nu: g - 1}.Quantile(0.5 + level/2)
	return Estimate{Value: v, SE: se, Lo: v - tq*se, Hi: v + tq*se, Method: fmt.Sprintf("%s, %d groups", method, len(reps))}
}
