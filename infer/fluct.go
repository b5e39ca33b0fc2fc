package infer

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"

	"edgewise/likelihood"

	"gonum.org/v1/gonum/stat"
)

// EdgeLabels names the two labels of one visible edge: Forward is counted
// +1 in the current c = n_+ - n_-, Backward (the reverse transition of the
// same edge) -1. The zero value means "+" and "-".
type EdgeLabels struct {
	Forward  string
	Backward string
}

// resolve finds the label indices of e in d and checks that every event of
// d carries one of them: the fluctuation test and the bounds are statements
// about a single visible edge.
func (e EdgeLabels) resolve(d *likelihood.Data) (fw, bw uint8, err error) {
	if d == nil || len(d.Records) == 0 {
		return 0, 0, errors.New("no records")
	}
	f, b := e.Forward, e.Backward
	if f == "" && b == "" {
		f, b = "+", "-"
	}
	if f == b {
		return 0, 0, fmt.Errorf("forward and backward labels are both %q", f)
	}
	fi, bi := -1, -1
	for i, l := range d.Labels {
		switch l {
		case f:
			fi = i
		case b:
			bi = i
		}
	}
	if fi < 0 || bi < 0 || fi > math.MaxUint8 || bi > math.MaxUint8 {
		return 0, 0, fmt.Errorf("labels %q and %q of one visible edge are not both in the data's labels %q", f, b, d.Labels)
	}
	fw, bw = uint8(fi), uint8(bi)
	total := 0
	for r := range d.Records {
		rec := &d.Records[r]
		if len(rec.Label) != len(rec.Time) {
			return 0, 0, fmt.Errorf("record %d (%q): %d labels for %d times", r+1, rec.ID, len(rec.Label), len(rec.Time))
		}
		for k, l := range rec.Label {
			if l != fw && l != bw {
				name := "?"
				if int(l) < len(d.Labels) {
					name = d.Labels[l]
				}
				return 0, 0, fmt.Errorf("record %d (%q), event %d: label %q is neither %q nor %q; this test needs one visible edge", r+1, rec.ID, k+1, name, f, b)
			}
		}
		total += len(rec.Time)
	}
	if total == 0 {
		return 0, 0, errors.New("no events")
	}
	return fw, bw, nil
}

// FluctOptions sets up FluctuationTest.
type FluctOptions struct {
	Labels EdgeLabels
	// Level is the confidence level of every interval, default 0.95.
	Level float64
	// Boot is the number of block-bootstrap replicates for the z-score of
	// slope - F, default 200.
	Boot int
	// Seed fixes the bootstrap: the same data, options and seed give the
	// same numbers.
	Seed uint64
	// FixedTime adds the contrast at a fixed clock time: windows of
	// duration T = n * (observed time) / (number of events).
	FixedTime bool
	// BlockEvents is the least number of events in a bootstrap block,
	// default 100. Blocks are whole windows of one record.
	BlockEvents int
}

func (o *FluctOptions) defaults() error {
	if o.Level == 0 {
		o.Level = 0.95
	}
	if !(o.Level > 0 && o.Level < 1) {
		return fmt.Errorf("confidence level %v is not in (0, 1)", o.Level)
	}
	if o.Boot == 0 {
		o.Boot = 200
	}
	if o.Boot < 0 {
		return fmt.Errorf("bootstrap replicates %d < 0", o.Boot)
	}
	if o.BlockEvents == 0 {
		o.BlockEvents = 100
	}
	if o.BlockEvents < 1 {
		return fmt.Errorf("block length %d < 1", o.BlockEvents)
	}
	return nil
}

// maxBlocks caps the number of bootstrap blocks, so that a replicate costs
// at most maxBlocks*(2n+1) additions whatever the data size.
const maxBlocks = 1000

// minBootBlocks is the least number of blocks for a block bootstrap; with
// fewer the z-score falls back to both standard errors taken as
// independent (conservative, see Comparison). With 16 blocks the
// bootstrap z of slope - F was measured over-dispersed (|z| > 1.96 in 8%
// of valid data sets), with 80 blocks close to nominal (5.9%).
const minBootBlocks = 50

// Fluctuation is the result of the count-stopped fluctuation test for one
// window length n (visible transitions per window).
type Fluctuation struct {
	N int // events per window
	// F is the data's effective affinity ln[P(+|+)/P(-|-)] (k_BT) from the
	// pair counts of consecutive events within records (EffectiveAffinity).
	F Estimate
	// Raw uses every window; PostSelected only those whose first label is
	// the reverse of the last, for which ln[P_n(c)/P_n(-c)] = F c exactly
	// (single visible edge, first-order Markov labels).
	Raw, PostSelected Symmetry
	// FixedTime is the contrast with windows of a fixed duration, nil unless
	// asked for.
	FixedTime *Symmetry
}

// Symmetry is one fluctuation plot: the histogram of the window current c
// and the fit ln[P(c)/P(-c)] = s c.
type Symmetry struct {
	Kind     string  // "count-stopped", "post-selected" or "fixed-time"
	Windows  int     // windows in the histogram
	Duration float64 // window duration T for fixed-time windows (time units), else 0
	// Count[c+Offset] is the number of windows with current c.
	Count  []int64
	Offset int
	// Points are the log-ratios for c > 0 with N(c) > 0 and N(-c) > 0.
	Points []RatioPoint
	// Skipped counts the c > 0 with N(c) + N(-c) > 0 but one of the two
	// zero: their log-ratio is infinite, so they are not plotted, but they
	// do enter the binomial fit of the slope. Used is the number of c > 0
	// in the fit (every c with N(c) + N(-c) > 0).
	Skipped int
	Used    int
	// Slope s of ln[P(c)/P(-c)] = s c, fitted by binomial maximum
	// likelihood through the origin: given the N(c) + N(-c) windows at
	// |c|, N(c) ~ Binomial(N(c) + N(-c), 1/(1 + e^{-s c})), over every
	// c > 0 with windows (one-sided ones included, so small counts do not
	// bias the slope); SE from the observed information.
	Slope Estimate
	// Chi2 is the binomial deviance of that fit on DF = Used - 1 degrees
	// of freedom, and LinearP its upper-tail chi-square probability: a
	// small LinearP says the log-ratio is not linear in c. (The deviance
	// keeps its nominal size far better than a delta-method chi-square at
	// the small counts of the rare sign.)
	Chi2    float64
	DF      int
	LinearP float64
	// Versus is the comparison of the slope with the data's F.
	Versus Comparison
}

// RatioPoint is one log-ratio of a fluctuation plot.
type RatioPoint struct {
	C           int     // current c > 0
	Plus, Minus int64   // windows with current c and -c
	LogRatio    float64 // y = ln(Plus/Minus)
	SE          float64 // delta method: sqrt(1/Plus + 1/Minus)
	// Lo, Hi: exact Clopper-Pearson interval of p = Plus/(Plus+Minus)
	// mapped through the logit ln(p/(1-p)).
	Lo, Hi float64
}

// Comparison is a slope set against F.
type Comparison struct {
	// Diff is slope - F with its SE and interval from a block bootstrap:
	// slope and F come from the same events and are positively
	// correlated, so their SEs do not add in quadrature.
	Diff Estimate
	// Corr is the bootstrap correlation of slope and F (NaN without a
	// bootstrap).
	Corr float64
	// Z = Diff.Value / Diff.SE, and P its two-sided normal p-value (NaN
	// when there is no verdict).
	Z, P float64
	// Agrees reports |Z| <= the normal quantile of the confidence level;
	// it is meaningful only when Decided (a verdict was given: F finite,
	// a slope, and enough windows of the rarer sign).
	Agrees  bool
	Decided bool
	// Blocks is the number of bootstrap blocks, Failed the replicates with
	// an undefined slope or F (dropped).
	Blocks, Replicates, Failed int
	Verdict                    string
}

// FluctuationTest runs the count-stopped fluctuation test for each window
// length in ns on a data set of one visible edge.
//
// Each record is cut into non-overlapping windows of n consecutive visible
// transitions (never across records; the tail shorter than n is unused).
// Non-overlapping windows share at most one boundary pair of events, so for
// a Markov label sequence their currents are nearly independent, and the
// counts N(c) are close to multinomial: given N(c) + N(-c) = m, N(c) is
// binomial, which gives the exact interval of each log-ratio.
//
// The test assumes stationarity: a drifting record mixes windows with
// different laws. A slope consistent with F does not prove a model.
func FluctuationTest(d *likelihood.Data, ns []int, opt FluctOptions) ([]Fluctuation, error) {
	if err := opt.defaults(); err != nil {
		return nil, fmt.Errorf("fluctuation test: %w", err)
	}
	fw, bw, err := opt.Labels.resolve(d)
	if err != nil {
		return nil, fmt.Errorf("fluctuation test: %w", err)
	}
	if len(ns) == 0 {
		return nil, errors.New("fluctuation test: no window length")
	}
	if err := CheckTimes(d); err != nil {
		return nil, fmt.Errorf("fluctuation test: %w", err)
	}
	longest := 0
	for r := range d.Records {
		longest = max(longest, d.Records[r].Len())
	}
	for _, n := range ns {
		if n < 1 {
			return nil, fmt.Errorf("fluctuation test: window length %d < 1", n)
		}
		if n > longest {
			return nil, fmt.Errorf("fluctuation test: no record has %d events (the longest has %d)", n, longest)
		}
	}
	fhat := EffectiveAffinity(d, fw, bw, AffinityOptions{Level: opt.Level})
	out := make([]Fluctuation, 0, len(ns))
	for _, n := range ns {
		raw, post := fluctCountBlocks(d, fw, n, opt.BlockEvents)
		res := Fluctuation{N: n, F: fhat}
		res.Raw = fluctSymmetry("count-stopped", raw, n, 0, opt, 1)
		res.PostSelected = fluctSymmetry("post-selected", post, n, 0, opt, 2)
		if res.Raw.Windows == 0 {
			return nil, fmt.Errorf("fluctuation test: no record has %d events", n)
		}
		if opt.FixedTime {
			blocks, dur, cmax := fluctTimeBlocks(d, fw, n, opt.BlockEvents)
			ft := fluctSymmetry("fixed-time", blocks, cmax, dur, opt, 3)
			res.FixedTime = &ft
		}
		out = append(out, res)
	}
	return out, nil
}

// fluctSide is 0 for the forward label, 1 otherwise.
func fluctSide(l, fw uint8) int {
	if l == fw {
		return 0
	}
	return 1
}

// fluctAffinity returns F = ln[(N++/N+.)/(N--/N-.)] and the delta
// method variance 1/N++ - 1/N+. + 1/N-- - 1/N-. (design section 7). F is
// +Inf (-Inf) when N-- (N++) is zero and NaN when both are.
func fluctAffinity(n [2][2]int64) (f, variance float64) {
	pp, mm := float64(n[0][0]), float64(n[1][1])
	p, m := pp+float64(n[0][1]), mm+float64(n[1][0])
	if pp == 0 || mm == 0 {
		switch {
		case pp == 0 && mm == 0:
			return math.NaN(), math.NaN()
		case mm == 0:
			return math.Inf(1), math.NaN()
		}
		return math.Inf(-1), math.NaN()
	}
	return math.Log(pp/p) - math.Log(mm/m), 1/pp - 1/p + 1/mm - 1/m
}

// fluctBlock is a stretch of one record used as a bootstrap unit: the
// histogram of window currents of the windows inside it and the pair
// counts of consecutive events whose first event lies inside it.
type fluctBlock struct {
	count []int64 // count[c+offset]
	pairs [2][2]int64
}

// fluctCountBlocks cuts each record into windows of n events and groups them into
// blocks of at least minEvents events (at most maxBlocks blocks overall),
// returning the raw and post-selected blocks. The two share pair counts.
func fluctCountBlocks(d *likelihood.Data, fw uint8, n, minEvents int) (raw, post []fluctBlock) {
	total := 0
	for r := range d.Records {
		total += len(d.Records[r].Label) / n
	}
	per := max(1, (minEvents+n-1)/n, (total+maxBlocks-1)/maxBlocks) // windows per block
	width := 2*n + 1
	step, side := fluctTables(fw)
	for r := range d.Records {
		lab := d.Records[r].Label
		nw := len(lab) / n
		nb := max(1, (nw+per-1)/per)
		for b := 0; b < nb; b++ {
			// A block without windows (a record shorter than n) keeps
			// only its pairs: no count slice of 2n+1 entries.
			var rb, pb fluctBlock
			w0, w1 := b*per, min(nw, (b+1)*per)
			if w1 > w0 {
				rb.count, pb.count = make([]int64, width), make([]int64, width)
			}
			for w := w0; w < w1; w++ {
				win := lab[w*n : (w+1)*n]
				c := 0
				for _, l := range win {
					c += int(step[l])
				}
				rb.count[c+n]++
				if side[win[0]] != side[win[n-1]] {
					pb.count[c+n]++
				}
			}
			// Pairs (k-1, k) with k in this block's events; the last block
			// of a record takes the tail too.
			k0, k1 := w0*n, w1*n
			if b == nb-1 {
				k1 = len(lab)
			}
			for k := max(k0, 1); k < k1; k++ {
				rb.pairs[side[lab[k-1]]][side[lab[k]]]++
			}
			pb.pairs = rb.pairs
			raw = append(raw, rb)
			post = append(post, pb)
		}
	}
	return raw, post
}

// fluctTables returns, per label, the step of the current (+1 for fw, -1
// for any other label: the data hold one visible edge) and the pair side
// (fluctSide), as tables: branching on random labels mispredicts.
func fluctTables(fw uint8) (step [256]int32, side [256]uint8) {
	for i := range step {
		step[i], side[i] = -1, 1
	}
	step[fw], side[fw] = 1, 0
	return step, side
}

// fluctSpan returns the observed span of a record: from its first event to
// its End when known, else to its last event.
func fluctSpan(rec *likelihood.Record) (t0, t1 float64) {
	if len(rec.Time) == 0 {
		return 0, 0
	}
	t0, t1 = rec.Time[0], rec.Time[len(rec.Time)-1]
	if !math.IsNaN(rec.End) && rec.End > t1 {
		t1 = rec.End
	}
	return t0, t1
}

// fluctObserved returns the summed span of all records and the number of
// events after the first of each record (the events that fall inside the
// spans).
func fluctObserved(d *likelihood.Data) (span float64, events int) {
	for r := range d.Records {
		rec := &d.Records[r]
		t0, t1 := fluctSpan(rec)
		span += t1 - t0
		events += max(0, len(rec.Time)-1)
	}
	return span, events
}

// fluctTimeBlocks cuts each record's span, from its first event, into windows of
// duration T = n * span / events (so that a window holds n events on
// average; the first event of each record only marks the origin) and
// groups them into blocks of at least minEvents expected events. It returns
// the blocks, T and the largest |c| seen.
func fluctTimeBlocks(d *likelihood.Data, fw uint8, n, minEvents int) ([]fluctBlock, float64, int) {
	span, events := fluctObserved(d)
	if events == 0 || !(span > 0) {
		return nil, 0, 0
	}
	T := float64(n) * span / float64(events)
	total := 0
	for r := range d.Records {
		t0, t1 := fluctSpan(&d.Records[r])
		total += int((t1 - t0) / T)
	}
	per := max(1, (minEvents+n-1)/n, (total+maxBlocks-1)/maxBlocks)
	step, side := fluctTables(fw)
	cs := make([]int32, total) // window currents, record after record
	type recWindows struct{ off, nw, base int }
	rw := make([]recWindows, len(d.Records))
	var pairsBy [][2][2]int64
	off := 0
	inv := 1 / T
	for r := range d.Records {
		rec := &d.Records[r]
		t0, t1 := fluctSpan(rec)
		nw := int((t1 - t0) / T)
		nb := max(1, (nw+per-1)/per)
		base := len(pairsBy)
		rw[r] = recWindows{off, nw, base}
		for range nb {
			pairsBy = append(pairsBy, [2][2]int64{})
		}
		cw := cs[off : off+nw]
		off += nw
		bt := T * float64(per)
		times, labels := rec.Time, rec.Label[:len(rec.Time)]
		inWindows := true
		for k := 1; k < len(times); k++ {
			b := min(nb-1, int((times[k-1]-t0)/bt))
			pairsBy[base+b][side[labels[k-1]]][side[labels[k]]]++
			if !inWindows {
				continue
			}
			// Event k goes to the window w with end(w-1) < t <= end(w),
			// end(w) = t0 + (w+1) T, as a sweep over the windows would
			// put it (window 0 also takes t <= t0); the product only
			// guesses w, the comparisons decide.
			t := times[k]
			w := max(0, int((t-t0)*inv))
			for w > 0 && t <= t0+float64(w)*T {
				w--
			}
			for t > t0+float64(w+1)*T {
				w++
			}
			if w >= nw {
				inWindows = false // times are sorted: no later event is in a window
				continue
			}
			cw[w] += step[labels[k]]
		}
	}
	cmax := 0
	for _, c := range cs {
		cmax = max(cmax, int(c), -int(c))
	}
	blocks := make([]fluctBlock, len(pairsBy))
	for i := range blocks {
		blocks[i] = fluctBlock{count: make([]int64, 2*cmax+1), pairs: pairsBy[i]}
	}
	for _, x := range rw {
		for w, c := range cs[x.off : x.off+x.nw] {
			blocks[x.base+w/per].count[int(c)+cmax]++
		}
	}
	return blocks, T, cmax
}

// fluctSymmetry sums the blocks, fits the fluctuation line and
// compares it with F by a block bootstrap seeded by opt.Seed and stream.
func fluctSymmetry(kind string, blocks []fluctBlock, offset int, dur float64, opt FluctOptions, stream uint64) Symmetry {
	s := Symmetry{Kind: kind, Duration: dur, Offset: offset, Count: make([]int64, 2*offset+1)}
	var pairs [2][2]int64
	for _, b := range blocks {
		for i, v := range b.count {
			s.Count[i] += v
		}
		addPairCounts(&pairs, b.pairs)
	}
	for _, v := range s.Count {
		s.Windows += int(v)
	}
	s.Points, s.Skipped = fluctLogRatios(s.Count, offset, opt.Level)
	fit := fluctFitBinomial(s.Count, offset)
	slope, se := fit.slope, fit.se
	s.Used = fit.used
	z := zFor(opt.Level)
	s.Slope = Estimate{Value: slope, SE: se, Lo: slope - z*se, Hi: slope + z*se, Method: "binomial maximum likelihood through the origin"}
	if s.Skipped > 0 {
		s.Slope.Note = fmt.Sprintf("%d values of c have windows on one side only (infinite log-ratio, not plotted; in the fit)", s.Skipped)
	}
	if math.IsNaN(slope) {
		s.Slope.Note = "no c > 0 with both N(c) and N(-c) > 0: slope undefined"
	}
	s.Chi2, s.DF = fit.deviance, fit.used-1
	s.LinearP = math.NaN()
	if s.DF > 0 && !math.IsNaN(slope) {
		s.LinearP = chiSquareSF(s.Chi2, s.DF)
	}
	var rare int64 // windows of the rarer sign, over all c (one-sided c add 0)
	for _, pt := range s.Points {
		rare += min(pt.Plus, pt.Minus)
	}
	s.Versus = fluctCompare(blocks, slope, se, pairs, opt, stream, offset)
	if rare < minRareWindows && !math.IsNaN(s.Versus.Z) {
		s.Versus.Agrees, s.Versus.Decided = false, false
		s.Versus.P = math.NaN()
		s.Versus.Verdict = fmt.Sprintf("no verdict: only %d windows of the rarer sign in the fitted pairs (need %d); use shorter windows or more data", rare, minRareWindows)
	}
	return s
}

func addPairCounts(dst *[2][2]int64, p [2][2]int64) {
	for a := 0; a < 2; a++ {
		for b := 0; b < 2; b++ {
			dst[a][b] += p[a][b]
		}
	}
}

// fluctLogRatios returns the log-ratio points of a histogram and the number of
// c > 0 left out because one side has no window.
func fluctLogRatios(count []int64, offset int, level float64) ([]RatioPoint, int) {
	var pts []RatioPoint
	skipped := 0
	for c := 1; c <= offset; c++ {
		k, j := count[offset+c], count[offset-c]
		if k == 0 || j == 0 {
			if k+j > 0 {
				skipped++
			}
			continue
		}
		kf, jf := float64(k), float64(j)
		lo, hi := ClopperPearson(int(k), int(k+j), level)
		pts = append(pts, RatioPoint{
			C: c, Plus: k, Minus: j,
			LogRatio: math.Log(kf / jf),
			SE:       math.Sqrt(1/kf + 1/jf),
			Lo:       math.Log(lo / (1 - lo)),
			Hi:       math.Log(hi / (1 - hi)),
		})
	}
	return pts, skipped
}

// binomialFit is the result of fluctFitBinomial.
type binomialFit struct {
	slope, se, deviance float64
	used                int // c > 0 with N(c) + N(-c) > 0
}

// fluctFitBinomial fits ln[P(c)/P(-c)] = s c by maximum likelihood, with
// N(c) ~ Binomial(m_c = N(c) + N(-c), p_c = 1/(1 + e^{-s c})) independent
// over c > 0: likelihood.SymmetrySlope, the one definition of the slope
// that a model's exact law gives too (CountDist.SlopeEstimand). The MLE is
// infinite when every c has windows on one side only; slope and SE are
// then NaN. The deviance is that of the binomial fit.
func fluctFitBinomial(count []int64, offset int) binomialFit {
	var pts []likelihood.SlopePoint
	for c := 1; c <= offset; c++ {
		k, j := count[offset+c], count[offset-c]
		if k+j == 0 {
			continue
		}
		pts = append(pts, likelihood.SlopePoint{C: float64(c), Pos: float64(k), Neg: float64(j)})
	}
	fit := binomialFit{slope: math.NaN(), se: math.NaN(), deviance: math.NaN(), used: len(pts)}
	s, info, ok := likelihood.SymmetrySlope(pts)
	if !ok {
		return fit
	}
	dev := 0.0
	for _, p := range pts {
		pr := 1 / (1 + math.Exp(-s*p.C))
		m := p.Pos + p.Neg
		if p.Pos > 0 {
			dev += 2 * p.Pos * math.Log(p.Pos/(m*pr))
		}
		if p.Neg > 0 {
			dev += 2 * p.Neg * math.Log(p.Neg/(m*(1-pr)))
		}
	}
	fit.slope, fit.se, fit.deviance = s, 1/math.Sqrt(info), math.Max(dev, 0)
	return fit
}

// fluctSlopeOfCounts is the binomial slope of a histogram (bootstrap).
func fluctSlopeOfCounts(count []int64, offset int) float64 {
	return fluctFitBinomial(count, offset).slope
}

// minRareWindows is the least number of windows of the rarer sign, summed
// over the fitted pairs (c, -c), for which a verdict is given: below it the
// log-ratios rest on a handful of windows, their delta-method variances
// are unreliable and the bootstrap mostly draws empty pairs.
const minRareWindows = 10

// maxFailedShare is the largest share of bootstrap replicates with an
// undefined slope or F for which the bootstrap SE is used; above it the
// surviving replicates are a biased selection and the conservative
// quadrature SE is used instead.
const maxFailedShare = 0.05

// fluctCompare sets the slope against F. With at least minBootBlocks blocks and
// opt.Boot > 0 the SE of slope - F comes from a block bootstrap (blocks
// drawn with replacement, both statistics recomputed from the same draw),
// which keeps their correlation; otherwise the two SEs are added in
// quadrature as if independent, which overstates the SE of the difference
// because the correlation is positive, so |z| is then conservative.
func fluctCompare(blocks []fluctBlock, slope, seSlope float64, pairs [2][2]int64, opt FluctOptions, stream uint64, offset int) Comparison {
	f, vf := fluctAffinity(pairs)
	cmp := Comparison{Blocks: len(blocks), Corr: math.NaN(), P: math.NaN()}
	d := slope - f
	zq := zFor(opt.Level)
	cmp.Diff = Estimate{Value: d, SE: math.NaN(), Lo: math.NaN(), Hi: math.NaN()}
	if math.IsNaN(d) || math.IsInf(d, 0) {
		cmp.Z = math.NaN()
		cmp.Verdict = "no verdict: F is infinite or undefined"
		if math.IsNaN(slope) {
			cmp.Verdict = "no verdict: no c > 0 has windows at both c and -c (windows too long for this F and amount of data)"
		}
		cmp.Diff.Note = cmp.Verdict
		return cmp
	}
	if len(blocks) >= minBootBlocks && opt.Boot > 0 {
		rng := rand.New(rand.NewPCG(opt.Seed, 0x5eed0f1c7+stream))
		sum := make([]int64, 2*offset+1)
		var ds, ss, fs []float64
		for range opt.Boot {
			clear(sum)
			var p [2][2]int64
			for range blocks {
				b := &blocks[rng.IntN(len(blocks))]
				for i, v := range b.count {
					sum[i] += v
				}
				addPairCounts(&p, b.pairs)
			}
			s := fluctSlopeOfCounts(sum, offset)
			fb, _ := fluctAffinity(p)
			if math.IsNaN(s) || math.IsNaN(fb) || math.IsInf(fb, 0) {
				cmp.Failed++
				continue
			}
			ds = append(ds, s-fb)
			ss = append(ss, s)
			fs = append(fs, fb)
		}
		cmp.Replicates = opt.Boot
		if len(ds) >= 2 && float64(cmp.Failed) <= maxFailedShare*float64(opt.Boot) {
			cmp.Diff.SE = stat.StdDev(ds, nil)
			cmp.Corr = stat.Correlation(ss, fs, nil)
			cmp.Diff.Method = fmt.Sprintf("block bootstrap, %d blocks, %d replicates", len(blocks), len(ds))
		}
	}
	if math.IsNaN(cmp.Diff.SE) {
		cmp.Diff.SE = math.Sqrt(seSlope*seSlope + vf)
		cmp.Diff.Method = "both SEs in quadrature (too few blocks for a bootstrap; conservative)"
		if cmp.Failed > 0 {
			cmp.Diff.Method = "both SEs in quadrature (too many bootstrap replicates with an undefined slope; conservative)"
		}
	}
	if cmp.Failed > 0 {
		cmp.Diff.Note = fmt.Sprintf("%d of %d bootstrap replicates had an undefined slope or F and were dropped", cmp.Failed, cmp.Replicates)
	}
	cmp.Diff.Lo, cmp.Diff.Hi = d-zq*cmp.Diff.SE, d+zq*cmp.Diff.SE
	cmp.Z = d / cmp.Diff.SE
	cmp.P = normalSF2(cmp.Z)
	pct := fmt.Sprintf("%g%%", 100*opt.Level)
	cmp.Agrees = math.Abs(cmp.Z) <= zq
	cmp.Decided = true
	if cmp.Agrees {
		cmp.Verdict = "slope agrees with F at " + pct
	} else {
		cmp.Verdict = fmt.Sprintf("slope differs from F at %s (z = %.2f)", pct, cmp.Z)
	}
	return cmp
}

// FluctChecks returns the tests of a fluctuation report as one family,
// Holm-adjusted at the family-wise level: for each window length, the
// post-selected slope against F (Comparison.P) and the linearity of the
// post-selected log-ratio (the binomial deviance, LinearP). Both hold
// when the labels form a stationary first-order Markov chain; windows of
// all kinds and of a fixed time carry a boundary term and are not tests.
// A comparison without a verdict enters with a NaN p (not in the family).
func FluctChecks(res []Fluctuation, level float64) []Check {
	var cs []Check
	for _, r := range res {
		v := r.PostSelected.Versus
		c := Check{Name: fmt.Sprintf("post-selected slope against F, n = %d", r.N),
			Null:        "the post-selected slope equals F, as for a first-order Markov label sequence",
			Alternative: "the labels are not a first-order Markov chain (spurious events, labels on several edges, or hidden memory)",
			Stat:        v.Z, P: v.P, N: r.PostSelected.Windows}
		if !v.Decided {
			c.P, c.Note = math.NaN(), v.Verdict
		}
		cs = append(cs, c)
		ps := r.PostSelected
		cs = append(cs, Check{Name: fmt.Sprintf("linearity of the post-selected ln[P(c)/P(-c)], n = %d", r.N),
			Null:        "ln[P(c)/P(-c)] is linear in c for post-selected windows",
			Alternative: "the labels are not a first-order Markov chain",
			Stat:        ps.Chi2, DF: ps.DF, N: ps.Windows, P: ps.LinearP})
	}
	AdjustChecks(cs, level)
	return cs
}
