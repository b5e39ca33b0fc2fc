package infer

import (
	"fmt"
	"math"
	"slices"

	"edgewise/likelihood"
)

// SummaryOptions tune Summarize. The zero value gives 95% intervals, labels
// "+" and "-" as the forward and backward crossings of the visible edge,
// delta-method intervals for F, delete-one-block jackknife intervals for
// the rates, J, the activity and D (Garwood intervals for rates of few
// events), and windows of 50 events on average for the Fano factor.
type SummaryOptions struct {
	Plus, Minus string  // forward and backward label names; "" means "+" and "-"
	Level       float64 // confidence level; 0 means 0.95
	// Bootstrap is passed to EffectiveAffinity (pooled estimate; a
	// per-record estimate resamples blocks of its own record).
	Bootstrap int
	// Seed fixes the bootstrap of F.
	Seed uint64
	// Deprecated: DiffusionBoot is ignored. J, the activity and D take
	// delete-one-block jackknife intervals, which need no replicates
	// (diffusion.go).
	DiffusionBoot int
	// WindowEvents is the mean number of visible events per window of the
	// Fano factor; 0 means 50.
	WindowEvents float64
	PerRecord    bool // also summarise each record on its own
}

// Summary holds model-free statistics of a data set: pooled over records
// and, when asked for, per record.
type Summary struct {
	Labels      []string
	Plus, Minus int // label indices of the visible edge, -1 when absent
	Level       float64
	Pooled      Part
	Records     []Part   // per record, when SummaryOptions.PerRecord
	Notes       []string // what could not be computed, and why
}

// Part is the summary of one record or of the pooled records.
//
// Durations run from each record's first event to its known end, or to its
// last event when the end is unknown, and rates count the events after each
// record's first one (the first event opens the observation), so that
// rate = (events in (t_1, end]) / (end - t_1). Units: time as in the file,
// rates in 1/time.
type Part struct {
	ID       string // record ID; "" for the pooled part
	Records  int
	Events   int
	Duration float64 // summed over records
	Ends     int     // records whose end is known
	Counts   []int   // events per label, all events
	// Rates of each label (1/time): delete-one-block jackknife intervals
	// on log scale (Student t), or the Garwood interval of the count
	// (exact for Poisson counting, stated in the Note) with fewer than
	// minJackBlocks blocks or minJackCount events (see countRate).
	Rates []Estimate
	// Current J = (n_+ - n_-)/duration and activity (n_+ + n_-)/duration
	// (1/time), counted like Rates, with delete-one-block jackknife
	// intervals over the blocks of Diffusion (J linear, the activity on
	// log scale). With fewer than minJackBlocks blocks J is withheld (too
	// few events) and the activity takes the Garwood interval.
	Current, Activity Estimate
	Pairs             [][]int      // N[l][l'] consecutive pairs
	Next              [][]Estimate // P(l'|l) = N[l][l']/N[l][.], Clopper-Pearson interval
	Affinity          Estimate     // F = ln[P(+|+)/P(-|-)]
	Gaps              [][]GapStats // inter-transition times per pair (l, l')
	// Diffusion is the current's diffusion coefficient D (1/time), half
	// the long-time slope of Var c(t) = a + 2 D t (see diffusion.go), with
	// a log-scale jackknife interval: the same estimator and interval as
	// EntropyBounds' D. Withheld (too few events) without the variance
	// curve or enough blocks.
	Diffusion Estimate
	// Fano is Var c(t)/|mean c(t)| at the one window length Window (time
	// units; WindowEvents events on average) over Windows complete
	// windows. It includes the boundary offset a/(|J| t), so it reaches
	// the long-time randomness parameter 2D/|J| only for windows much
	// longer than the correlation time of the labels.
	Window  float64
	Windows int
	Fano    Estimate
}

// GapStats summarises the inter-transition times of one pair (l, l'): the
// times from an l event to the next event when that event is l'.
type GapStats struct {
	N      int
	Mean   float64 // time
	Median float64 // time
	CV     float64 // standard deviation / mean (1 for exponential gaps)
}

// Summarize computes the statistics of d. It fails only on an empty data
// set or data that CheckTimes refuses; quantities that cannot be computed
// are NaN and explained in Notes or in the Estimate's Note.
func Summarize(d *likelihood.Data, opt SummaryOptions) (*Summary, error) {
	if d == nil || d.Events() == 0 {
		return nil, fmt.Errorf("summary: no events")
	}
	if err := CheckTimes(d); err != nil {
		return nil, fmt.Errorf("summary: %w", err)
	}
	if opt.Plus == "" {
		opt.Plus = "+"
	}
	if opt.Minus == "" {
		opt.Minus = "-"
	}
	if !(opt.Level > 0 && opt.Level < 1) {
		opt.Level = 0.95
	}
	if !(opt.WindowEvents > 0) {
		opt.WindowEvents = 50
	}
	s := &Summary{Labels: d.Labels, Plus: slices.Index(d.Labels, opt.Plus), Minus: slices.Index(d.Labels, opt.Minus), Level: opt.Level}
	if opt.Plus == opt.Minus {
		s.Plus, s.Minus = -1, -1
		s.Notes = append(s.Notes, fmt.Sprintf("forward and backward labels are both %q: single-edge quantities skipped", opt.Plus))
	} else if s.Plus < 0 || s.Minus < 0 {
		s.Notes = append(s.Notes, fmt.Sprintf("labels %q and %q are not both in the data (labels: %v): current, F and fluctuations skipped", opt.Plus, opt.Minus, d.Labels))
	}
	if s.Plus >= 0 && s.Minus >= 0 && len(d.Labels) > 2 {
		s.Notes = append(s.Notes, fmt.Sprintf("the data have %d labels: F, current and fluctuations use only %q and %q", len(d.Labels), opt.Plus, opt.Minus))
	}
	s.Pooled = s.part(d, d.Records, opt)
	if opt.PerRecord {
		for i := range d.Records {
			p := s.part(d, d.Records[i:i+1], opt)
			p.ID = d.Records[i].ID
			s.Records = append(s.Records, p)
		}
	}
	return s, nil
}

func (s *Summary) part(d *likelihood.Data, recs []likelihood.Record, opt SummaryOptions) Part {
	k := len(d.Labels)
	sub := &likelihood.Data{Labels: d.Labels, Records: recs}
	p := Part{Records: len(recs), Counts: make([]int, k), Pairs: TransitionCounts(sub)}
	after := make([]int, k) // events after each record's first
	for i := range recs {
		r := &recs[i]
		p.Events += r.Len()
		for j, l := range r.Label {
			p.Counts[l]++
			if j > 0 {
				after[l]++
			}
		}
		p.Duration += recordDuration(r)
		if !math.IsNaN(r.End) {
			p.Ends++
		}
	}
	z := zFor(opt.Level)
	p.Rates = labelRates(recs, k, p.Duration, after, opt.Level)
	// P(l'|l).
	p.Next = make([][]Estimate, k)
	for a := 0; a < k; a++ {
		row := 0
		for _, n := range p.Pairs[a] {
			row += n
		}
		p.Next[a] = make([]Estimate, k)
		for b := 0; b < k; b++ {
			if row == 0 {
				p.Next[a][b] = nanEstimate("Clopper-Pearson", "no event follows a "+d.Labels[a]+" event")
				continue
			}
			n := p.Pairs[a][b]
			lo, hi := ClopperPearson(n, row, opt.Level)
			v := float64(n) / float64(row)
			p.Next[a][b] = Estimate{Value: v, SE: math.Sqrt(v * (1 - v) / float64(row)), Lo: lo, Hi: hi, Method: "Clopper-Pearson"}
		}
	}
	p.Gaps = gapStats(recs, k)
	if s.Plus < 0 || s.Minus < 0 {
		nan := nanEstimate("", "no single visible edge")
		p.Current, p.Activity, p.Affinity, p.Diffusion, p.Fano = nan, nan, nan, nan, nan
		p.Window = math.NaN()
		return p
	}
	plus, minus := uint8(s.Plus), uint8(s.Minus)
	if !(p.Duration > 0) {
		nan := nanEstimate("", "zero observed time (every record is a single instant)")
		p.Current, p.Activity, p.Diffusion, p.Fano = nan, nan, nan, nan
		p.Window = math.NaN()
		p.Affinity = EffectiveAffinity(sub, plus, minus, AffinityOptions{Level: opt.Level})
		return p
	}
	ao := AffinityOptions{Level: opt.Level, Bootstrap: opt.Bootstrap, Seed: opt.Seed}
	p.Affinity = EffectiveAffinity(sub, plus, minus, ao)
	// J, activity and D: the long-time estimator shared with EntropyBounds
	// (its sums, so that J is the same number to the last bit), with
	// delete-one-block jackknife intervals.
	cf := newCurrentFit(recs, plus, minus, true)
	j := cf.tot.c / cf.tot.dur
	act := cf.tot.n / cf.tot.dur
	d0 := cf.diffusion(&cf.tot)
	var bj, bn, bd []float64
	cf.jackknife(func(t *boundTotals) {
		bj = append(bj, t.c/t.dur)
		bn = append(bn, t.n/t.dur)
		bd = append(bd, cf.diffusion(t))
	})
	p.Diffusion = cf.diffusionEstimate(d0, bd, opt.Level)
	p.Current = cf.currentEstimate(j, bj, opt.Level)
	p.Activity = cf.activityEstimate(bn, opt.Level)

	// Fano factor at one stated window length.
	p.Window = opt.WindowEvents / act
	if math.IsInf(p.Window, 0) || math.IsNaN(p.Window) {
		p.Window = math.NaN()
	}
	c := windowCurrents(recs, plus, minus, p.Window)
	p.Windows = len(c)
	if p.Windows >= 10 {
		mc, vc := meanVar(c)
		m := float64(p.Windows)
		// Var of a sample variance ~ 2 s^4/(m-1) (Gaussian windows).
		relVar := math.Sqrt(2 / (m - 1))
		fano := vc / math.Abs(mc)
		seMean := math.Sqrt(vc/m) / math.Abs(mc)
		p.Fano = Estimate{Value: fano, SE: fano * math.Sqrt(relVar*relVar+seMean*seMean), Method: fmt.Sprintf("Var c(t)/|mean c(t)| over %d windows of t = %.4g (%g events on average)", p.Windows, p.Window, opt.WindowEvents)}
		p.Fano.Lo, p.Fano.Hi = fano-z*p.Fano.SE, fano+z*p.Fano.SE
		if mc == 0 || seMean > 0.5 {
			p.Fano.Note = "the mean current per window is not resolved from zero: the Fano factor is not meaningful"
		}
	} else {
		p.Fano = tooFew(fmt.Sprintf("too few events: only %d complete windows of %g events (want 10)", p.Windows, opt.WindowEvents))
	}
	return p
}

// recordDuration is the observed span of r (time units): from its first
// event to its end, or to its last event when the end is unknown (the
// span fluctSpan gives, which the fluctuation statistics use too).
func recordDuration(r *likelihood.Record) float64 {
	t0, t1 := fluctSpan(r)
	return t1 - t0
}

// labelRates returns the rate of each of the k labels (events after each
// record's first, counts in after, over the summed duration) with
// countRate's interval: jackknife over blocks cut like the current's
// (t_max = min(max(span/400, 32 mean gaps), longest record), mean gaps
// of all events), or Garwood with few events.
func labelRates(recs []likelihood.Record, k int, duration float64, after []int, level float64) []Estimate {
	out := make([]Estimate, k)
	if !(duration > 0) {
		for l := range out {
			out[l] = nanEstimate("", "zero observed duration")
		}
		return out
	}
	events, longest := 0, 0.0
	for i := range recs {
		events += max(0, recs[i].Len()-1)
		longest = math.Max(longest, recordDuration(&recs[i]))
	}
	tmax := math.Min(math.Max(duration/400, 32*duration/float64(max(events, 1))), longest)
	type block struct {
		dur float64
		n   []float64
	}
	// Blocks as currentBlocks cuts them; beyond maxJackGroups, consecutive
	// blocks are summed into that many groups (block i of B into group
	// i*G/B), so many short records do not make one unit each.
	raw := 0
	for i := range recs {
		raw += recordBlocks(&recs[i], tmax)
	}
	G := min(raw, maxJackGroups)
	blocks := make([]block, G)
	for g := range blocks {
		blocks[g].n = make([]float64, k)
	}
	bi := 0
	for i := range recs {
		r := &recs[i]
		t0, t1 := fluctSpan(r)
		nb := recordBlocks(r, tmax)
		k0 := 1
		for b := 0; b < nb; b++ {
			be := math.Min(t0+float64(b+1)*tmax, t1)
			if b == nb-1 {
				be = t1
			}
			blk := &blocks[bi*G/raw]
			blk.dur += be - (t0 + float64(b)*tmax)
			k1 := len(r.Time)
			if b < nb-1 {
				k1 = searchAfter(r.Time, k0, len(r.Time), be)
			}
			for _, l := range r.Label[k0:k1] {
				blk.n[l]++
			}
			k0 = k1
			bi++
		}
	}
	method := fmt.Sprintf("delete-one-block jackknife, %d blocks of %.4g time units, Student t on %d df, log scale", len(blocks), tmax, len(blocks)-1)
	if raw > G {
		method = fmt.Sprintf("delete-one-group jackknife, %d groups of consecutive blocks (%d blocks of at most %.4g time units), Student t on %d df, log scale", G, raw, tmax, G-1)
	}
	for l := range out {
		n := float64(after[l])
		var reps []float64
		if len(blocks) >= minJackBlocks {
			reps = make([]float64, len(blocks))
			for i, b := range blocks {
				reps[i] = (n - b.n[l]) / (duration - b.dur)
			}
		}
		out[l] = countRate(n, duration, reps, level, method)
	}
	return out
}

// windowCurrents cuts each record's span (t_1, end] into complete windows
// (t_1 + i w, t_1 + (i+1) w] and returns, per window, the current
// c = n_+ - n_-.
func windowCurrents(recs []likelihood.Record, plus, minus uint8, w float64) []float64 {
	if !(w > 0) {
		return nil
	}
	var step [256]float64
	step[plus], step[minus] = 1, -1
	var c []float64
	for i := range recs {
		r := &recs[i]
		m := int(math.Floor(recordDuration(r) / w))
		if m <= 0 {
			continue
		}
		t0 := r.Time[0]
		k := searchAfter(r.Time, 1, len(r.Time), t0) // events at t_1 itself are not in (t_1, ...]
		for j := range m {
			e := searchAfter(r.Time, k, len(r.Time), t0+float64(j+1)*w)
			s := 0.0
			for _, l := range r.Label[k:e] {
				s += step[l]
			}
			c = append(c, s)
			k = e
		}
	}
	return c
}

// gapStats returns the inter-transition time statistics per pair: count,
// mean, median and CV = sqrt(unbiased variance)/mean, the same numbers as
// meanVar and median of each PairGaps slice (gapStatsStored), without
// storing every gap. Two passes over the events: the first counts and sums
// the gaps and histograms the top 16 bits of their bit patterns (exponent
// and 4 mantissa bits: buckets 1/16 of a binade wide, monotone in the value
// for gaps >= 0); the second sums the squared deviations from the mean
// (two-pass variance, as meanVar) and keeps only the gaps in the bucket(s)
// holding the middle order statistics, among which the median is then
// selected. Negative or NaN gaps (times out of order) and more than 8
// labels fall back to gapStatsStored.
func gapStats(recs []likelihood.Record, k int) [][]GapStats {
	const shift = 48 // 64 bits - sign - 11 exponent bits - 4 mantissa bits
	const buckets = 1 << (64 - shift - 1)
	kk := k * k
	if k == 0 || k > 8 {
		return gapStatsStored(recs, k)
	}
	cnt := make([]int, kk)
	sum := make([]float64, kk)
	hist := make([]int32, kk*buckets)
	for i := range recs {
		r := &recs[i]
		tm, lab := r.Time, r.Label[:len(r.Time)]
		for j := 1; j < len(tm); j++ {
			g := tm[j] - tm[j-1]
			if !(g >= 0) {
				return gapStatsStored(recs, k)
			}
			p := int(lab[j-1])*k + int(lab[j])
			cnt[p]++
			sum[p] += g
			// g + 0 is +0 for g = -0 too, so zero has one bucket.
			hist[p*buckets+int(math.Float64bits(g+0)>>shift)]++
		}
	}
	mean := make([]float64, kk)
	// The buckets bl..bh that hold the order statistics (n-1)/2 and n/2,
	// and how many gaps lie below bucket bl.
	bl, bh, below := make([]int, kk), make([]int, kk), make([]int, kk)
	for p := range kk {
		n := cnt[p]
		mean[p] = math.NaN()
		bl[p], bh[p] = buckets, -1
		if n == 0 {
			continue
		}
		mean[p] = sum[p] / float64(n)
		acc := 0
		for b, c := range hist[p*buckets : (p+1)*buckets] {
			if bl[p] == buckets && acc+int(c) > (n-1)/2 {
				bl[p], below[p] = b, acc
			}
			if acc+int(c) > n/2 {
				bh[p] = b
				break
			}
			acc += int(c)
		}
	}
	ss := make([]float64, kk)
	keep := make([][]float64, kk)
	for i := range recs {
		r := &recs[i]
		tm, lab := r.Time, r.Label[:len(r.Time)]
		for j := 1; j < len(tm); j++ {
			g := tm[j] - tm[j-1]
			p := int(lab[j-1])*k + int(lab[j])
			d := g - mean[p]
			ss[p] += d * d
			if b := int(math.Float64bits(g+0) >> shift); b >= bl[p] && b <= bh[p] {
				keep[p] = append(keep[p], g)
			}
		}
	}
	out := make([][]GapStats, k)
	for a := 0; a < k; a++ {
		out[a] = make([]GapStats, k)
		for b := 0; b < k; b++ {
			p := a*k + b
			n := cnt[p]
			gs := GapStats{N: n, Mean: mean[p], Median: math.NaN(), CV: math.NaN()}
			if n > 0 {
				x := keep[p]
				m := selectK(x, n/2-below[p])
				if n%2 == 0 {
					// The lower middle: the largest kept value left of it.
					l := (n/2 - 1) - below[p]
					m = (selectK(x[:l+1], l) + m) / 2
				}
				gs.Median = m
			}
			if n > 1 {
				gs.CV = math.Sqrt(ss[p]/float64(n-1)) / mean[p]
			}
			out[a][b] = gs
		}
	}
	return out
}

// gapStatsStored is gapStats from the stored gaps of every pair.
func gapStatsStored(recs []likelihood.Record, k int) [][]GapStats {
	pairs := PairGaps(recs, k)
	out := make([][]GapStats, k)
	for a := 0; a < k; a++ {
		out[a] = make([]GapStats, k)
		for b := 0; b < k; b++ {
			g := pairs[a*k+b]
			m, v := meanVar(g)
			out[a][b] = GapStats{N: len(g), Mean: m, Median: median(g), CV: math.Sqrt(v) / m}
		}
	}
	return out
}

// PairGaps returns the inter-transition times of every pair: element
// a*k+b holds, in record and time order, the gaps t_j - t_{j-1} with
// label[j-1] = a and label[j] = b. The slices share one backing array.
func PairGaps(recs []likelihood.Record, k int) [][]float64 {
	cnt := make([]int, k*k)
	total := 0
	for i := range recs {
		lab := recs[i].Label
		for j := 1; j < len(lab); j++ {
			cnt[int(lab[j-1])*k+int(lab[j])]++
			total++
		}
	}
	flat := make([]float64, total)
	out := make([][]float64, k*k)
	off := 0
	for i, c := range cnt {
		out[i] = flat[off : off : off+c]
		off += c
	}
	for i := range recs {
		r := &recs[i]
		for j := 1; j < r.Len(); j++ {
			p := int(r.Label[j-1])*k + int(r.Label[j])
			out[p] = append(out[p], r.Time[j]-r.Time[j-1])
		}
	}
	return out
}
