package infer

import (
	"fmt"
	"math"

	"edgewise/likelihood"

	"gonum.org/v1/gonum/stat"
)

// This file holds the one estimator of the current's diffusion coefficient
// D, used by Summarize (inspect) and by EntropyBounds (fluct --bounds), so
// that both report the same D with the same interval for the same data,
// replicate count and seed.
//
// With c(t) = n_+ - n_- counted over a window of duration t,
//
//	Var c(t) = a + 2 D t + o(1)   for t much longer than the correlation time of the labels,
//
// where the offset a comes from the boundaries of the window. A single
// window length gives Var c(t)/(2t) = D + a/(2t), biased by a/(2t); the
// slope of Var c(t) against t at long t is not. So D is the weighted
// least-squares slope/2 of the variance curve at the four longest window
// durations t_max, t_max/2, t_max/4, t_max/8, with
//
//	t_max = min( max(span/400, 32 mean gaps), longest record span ),
//
// span the summed observed time and a mean gap = span / (visible events
// after each record's first). The weights are W_j / t_j^2 (W_j windows of
// duration t_j): the inverse variance of a sample variance when
// Var c(t) grows like t. They do not depend on the sampled variances, whose
// noise would otherwise weigh down every high point and bias D low (the
// weights 1/(2 s_j^4) used before gave D about 0.1 SD low at a few
// thousand events). Windows are non-overlapping, laid from the start of
// blocks of duration t_max that cut each record.
//
// Intervals: the blocks are the units of a delete-one-block jackknife
// (Quenouille, Biometrika 43, 353 (1956); Tukey's variance; for dependent
// data by blocks, Kuensch, Ann. Stat. 17, 1217 (1989)), with a Student t
// quantile on blocks - 1 degrees of freedom: linear for J, on log scale
// for D and the activity, which are positive and skewed. This replaced a
// percentile block bootstrap that covered 91-93% for D at a nominal 95%:
// the bootstrap spread shrinks with the estimate, so low estimates got
// intervals too short on their upper side (measured, coverage_test.go).
// The jackknife needs no random numbers: the intervals of J, the activity
// and D are the same for every seed.

// DefaultDiffusionBoot is the default number of bootstrap replicates the
// commands ask for (the bootstrap of F and the fluctuation test's
// comparison of slope and F). The intervals of J, the activity and D no
// longer use it: they come from the jackknife (above).
const DefaultDiffusionBoot = 200

// boundBlock is a stretch of at most t_max of one record: its duration,
// current c (+1 per forward, -1 per backward event), activity n (+1 per
// either), pair counts of consecutive events (side 0 forward, 1 any other
// label) and, per window duration of the grid, the number of windows inside
// it and the sums of c and c^2 over them.
type boundBlock struct {
	dur, c, n float64
	pairs     [2][2]int64
	w, s, q   []float64
}

// boundTotals is a sum of blocks.
type boundTotals struct {
	dur, c, n float64
	pairs     [2][2]int64
	w, s, q   []float64
}

func (t *boundTotals) mean(j int) float64 { return t.s[j] / t.w[j] }

// variance is the unbiased variance of the window current at grid point j
// (NaN with fewer than two windows).
func (t *boundTotals) variance(j int) float64 {
	n := t.w[j]
	if n < 2 {
		return math.NaN()
	}
	m := t.s[j] / n
	return (t.q[j] - n*m*m) / (n - 1)
}

// diffusion fits Var c(t) = a + 2 D t by weighted least squares on the
// first len(ts) grid points and returns D (1/time); with one point it is
// Var c(t)/(2t).
func (t *boundTotals) diffusion(ts, w []float64) float64 {
	if len(ts) < 2 {
		if len(ts) == 1 {
			return t.variance(0) / (2 * ts[0])
		}
		return math.NaN()
	}
	y := make([]float64, len(ts))
	for j := range ts {
		y[j] = t.variance(j)
	}
	_, slope := stat.LinearRegression(ts, y, w, false)
	return slope / 2
}

func sumBoundBlocks(blocks []boundBlock, ng int) boundTotals {
	ptr := make([]*boundBlock, len(blocks))
	for i := range blocks {
		ptr[i] = &blocks[i]
	}
	return sumBoundBlockPtrs(ptr, ng)
}

func sumBoundBlockPtrs(blocks []*boundBlock, ng int) boundTotals {
	t := boundTotals{w: make([]float64, ng), s: make([]float64, ng), q: make([]float64, ng)}
	for _, b := range blocks {
		t.dur += b.dur
		t.c += b.c
		t.n += b.n
		addPairCounts(&t.pairs, b.pairs)
		for j := range ng {
			t.w[j] += b.w[j]
			t.s[j] += b.s[j]
			t.q[j] += b.q[j]
		}
	}
	return t
}

// currentFit is the variance curve of the current of one visible edge
// (forward label fw, backward bw; other labels count 0) over a set of
// records, cut into jackknife blocks.
type currentFit struct {
	span    float64 // summed record spans (time units)
	events  int     // forward and backward events after each record's first
	mgap    float64 // span / events
	tmax    float64 // longest window = block duration
	grid    []float64
	levels  int          // grid points held by the blocks: all, or the first nfit
	nfit    int          // grid points in the fit (the longest ones)
	weights []float64    // fit weights W_j / t_j^2 (see the top of this file)
	blocks  []boundBlock // jackknife units: blocks, or groups of consecutive blocks
	raw     int          // blocks before grouping
	tot     boundTotals
}

// newCurrentFit builds the variance curve of recs. It never fails: with
// too few events the grid is short or empty and the estimates say so.
// With fitOnly the blocks hold only the grid points of the fit (enough for
// D, J and the activity, and cheaper); their values are the same as with
// the whole grid.
func newCurrentFit(recs []likelihood.Record, fw, bw uint8, fitOnly bool) *currentFit {
	f := &currentFit{}
	longest := 0.0
	for r := range recs {
		rec := &recs[r]
		t0, t1 := fluctSpan(rec)
		f.span += t1 - t0
		longest = math.Max(longest, t1-t0)
		for _, l := range rec.Label[min(1, len(rec.Label)):] {
			if l == fw || l == bw {
				f.events++
			}
		}
	}
	f.mgap = f.span / float64(f.events)
	// The longest window: 1/400 of the observed time, but at least 32 mean
	// gaps so that small data sets still give a variance curve. Windows
	// never cross records: with short records the longest windows come
	// from the longest record only.
	f.tmax = math.Min(math.Max(f.span/400, 32*f.mgap), longest)
	if f.events > 0 && f.tmax > 0 {
		for t := f.tmax; t >= f.mgap/2 && len(f.grid) < 16; t /= 2 {
			f.grid = append(f.grid, t)
		}
	}
	f.nfit = min(4, len(f.grid))
	f.levels = len(f.grid)
	if fitOnly {
		f.levels = f.nfit
	}
	f.blocks, f.raw = currentBlocks(recs, fw, bw, f.tmax, f.grid[:f.levels], maxJackGroups)
	f.tot = sumBoundBlocks(f.blocks, f.levels)
	f.weights = make([]float64, f.nfit)
	for j := range f.weights {
		f.weights[j] = f.tot.w[j] / (f.grid[j] * f.grid[j])
	}
	return f
}

// currentBlocks cuts each record, from its first event, into blocks of
// duration tmax (the last one shorter, and at least one block per record)
// and fills their statistics. The windows of each grid duration are laid
// from the block start and kept when they end inside the block; an event
// at time t belongs to the window (start, end] holding it. The first event
// of a record marks its origin and is not counted.
//
// grid must be tmax, tmax/2, tmax/4, ... (each half the one before, so that
// window boundaries of one level are boundaries of the next): the current
// is counted once per window of the shortest duration and summed pairwise
// up the levels, which gives the same windows as counting each level on
// its own, at the cost of one pass over the events.
//
// With groups > 0 and more blocks than that, consecutive blocks are summed
// into groups blocks (block i of B into group i*groups/B), so that many
// short records cost one block of memory per group, not per record. It
// also returns B, the number of blocks before grouping.
func currentBlocks(recs []likelihood.Record, fw, bw uint8, tmax float64, grid []float64, groups int) ([]boundBlock, int) {
	var blocks []boundBlock
	ng := len(grid)
	raw := 0
	for r := range recs {
		raw += recordBlocks(&recs[r], tmax)
	}
	units := raw
	if groups > 0 && raw > groups {
		units = groups
	}
	blocks = make([]boundBlock, units)
	for i := range blocks {
		blocks[i] = boundBlock{w: make([]float64, ng), s: make([]float64, ng), q: make([]float64, ng)}
	}
	done := 0 // blocks made so far; block done adds to unit done*units/raw
	// Tables instead of branches on the label (random labels would
	// mispredict): current step, activity step and pair side.
	var step, act [256]float64
	var side [256]int
	for i := range side {
		side[i] = 1
	}
	step[bw], act[bw] = -1, 1
	step[fw], act[fw], side[fw] = 1, 1, 0
	var cw []float64 // window currents at the finest level, reused
	for r := range recs {
		rec := &recs[r]
		// An empty record still gets its one (empty) block: the
		// waiting-time jackknife of EntropyBounds counts blocks per record.
		times, labels := rec.Time, rec.Label[:len(rec.Time)]
		t0, t1 := fluctSpan(rec)
		nb := recordBlocks(rec, tmax)
		k := 1
		for bi := 0; bi < nb; bi++ {
			bs := t0 + float64(bi)*tmax
			be := math.Min(t0+float64(bi+1)*tmax, t1)
			last := bi == nb-1
			if last {
				be = t1
			}
			// Every statistic is added to its unit: a block, or the
			// group that holds it.
			b := &blocks[done*units/raw]
			done++
			b.dur += be - bs
			k0 := k
			k1 := len(times)
			if !last {
				k1 = searchAfter(times, k, len(times), be) // the first event after be
			}
			var c, n float64
			for i := max(k, 1); i < k1; i++ {
				l := labels[i]
				c += step[l]
				n += act[l]
				b.pairs[side[labels[i-1]]][side[l]]++
			}
			b.c += c
			b.n += n
			k = k1
			if ng > 0 {
				L := ng - 1
				t := grid[L]
				// The same count of windows per level as
				// int((be-bs)/grid[j]*(1+1e-12)): halving is exact in
				// floating point, so this count at level j is the finest
				// count shifted right by L-j.
				nw := int((be - bs) / t * (1 + 1e-12))
				if cap(cw) < nw {
					cw = make([]float64, nw)
				}
				cw = cw[:nw]
				clear(cw)
				// Event i goes to the window w with end(w-1) < t_i <=
				// end(w), end(w) = bs + (w+1) t, exactly as a sweep over
				// the windows puts it (window 0 also takes t_i <= bs).
				if k1-k0 >= 8*nw {
					// Long windows: find each end by search and sum the
					// steps of the events in between.
					i := k0
					for w := range nw {
						j := searchAfter(times, i, k1, bs+float64(w+1)*t)
						c := 0.0
						for _, l := range labels[i:j] {
							c += step[l]
						}
						cw[w], i = c, j
					}
				} else {
					// About one event per window: compute each event's
					// window; the product only guesses w, the comparisons
					// decide.
					inv := 1 / t
					for i := k0; i < k1; i++ {
						ti := times[i]
						w := int((ti - bs) * inv)
						if w < 0 {
							w = 0
						}
						for w > 0 && ti <= bs+float64(w)*t {
							w--
						}
						for ti > bs+float64(w+1)*t {
							w++
						}
						if w >= nw {
							break
						}
						cw[w] += step[labels[i]]
					}
				}
				for j := L; j >= 0; j-- {
					n := nw >> (L - j)
					s, q := 0.0, 0.0
					for _, c := range cw[:n] {
						s += c
						q += c * c
					}
					b.w[j] += float64(n)
					b.s[j] += s
					b.q[j] += q
					for h := 0; h < n/2; h++ {
						cw[h] = cw[2*h] + cw[2*h+1]
					}
				}
			}
		}
	}
	return blocks, raw
}

// recordBlocks is the number of blocks of duration tmax that cut a record
// from its first event (the last one shorter; at least one, also for an
// empty record).
func recordBlocks(rec *likelihood.Record, tmax float64) int {
	if !(tmax > 0) {
		return 1
	}
	t0, t1 := fluctSpan(rec)
	return max(1, int(math.Ceil((t1-t0)/tmax)))
}

// maxJackGroups is the most jackknife units of the variance curve and of
// the rates: beyond it consecutive blocks are grouped (a long record has
// about 400 blocks; 10^6 short records would otherwise make 10^6 units,
// with a fit per delete-one replicate).
const maxJackGroups = 1000

// searchAfter returns the first index i in [lo, hi) of the sorted x with
// x[i] > v, or hi when there is none: a galloping search from lo (cost
// O(log(i - lo))), for ends of windows that hold few events.
func searchAfter(x []float64, lo, hi int, v float64) int {
	if lo >= hi || x[lo] > v {
		return lo
	}
	a, s := lo, 1 // x[a] <= v
	b := a + s
	for b < hi && x[b] <= v {
		a, s = b, 2*s
		b = a + s
	}
	b = min(b, hi) // the answer lies in (a, b]
	for a+1 < b {
		m := int(uint(a+b) >> 1)
		if x[m] <= v {
			a = m
		} else {
			b = m
		}
	}
	return b
}

// diffusion is the fitted D of a sum of blocks.
func (f *currentFit) diffusion(t *boundTotals) float64 {
	return t.diffusion(f.grid[:f.nfit], f.weights)
}

// minJackBlocks is the least number of blocks for the jackknife intervals
// of J, the activity and D. With 11 blocks the intervals were measured to
// cover 94-97% at a nominal 95% on four shipped models (coverage_test.go);
// below 10 the Student t quantile and the jackknife variance both become
// rough, and J and D are not given ("too few events").
const minJackBlocks = 10

// jackknife calls each with the totals of all blocks but one, for every
// block in turn (delete-one-block jackknife), and returns the number of
// blocks; it calls nothing and returns 0 when there are fewer than
// minJackBlocks. The totals passed to each are reused between calls.
func (f *currentFit) jackknife(each func(t *boundTotals)) int {
	if len(f.blocks) < minJackBlocks {
		return 0
	}
	t := boundTotals{w: make([]float64, f.levels), s: make([]float64, f.levels), q: make([]float64, f.levels)}
	for i := range f.blocks {
		b := &f.blocks[i]
		t.dur, t.c, t.n = f.tot.dur-b.dur, f.tot.c-b.c, f.tot.n-b.n
		for a := range 2 {
			for c := range 2 {
				t.pairs[a][c] = f.tot.pairs[a][c] - b.pairs[a][c]
			}
		}
		for j := range f.levels {
			t.w[j] = f.tot.w[j] - b.w[j]
			t.s[j] = f.tot.s[j] - b.s[j]
			t.q[j] = f.tot.q[j] - b.q[j]
		}
		each(&t)
	}
	return len(f.blocks)
}

// method describes the jackknife.
func (f *currentFit) method(logScale bool) string {
	m := fmt.Sprintf("delete-one-block jackknife, %d blocks of %.4g time units, Student t on %d df", len(f.blocks), f.tmax, len(f.blocks)-1)
	if f.raw > len(f.blocks) {
		m = fmt.Sprintf("delete-one-group jackknife, %d groups of consecutive blocks (%d blocks of at most %.4g time units), Student t on %d df", len(f.blocks), f.raw, f.tmax, len(f.blocks)-1)
	}
	if logScale {
		m += ", log scale"
	}
	return m
}

// tooFewBlocks says why there is no jackknife interval.
func (f *currentFit) tooFewBlocks() string {
	return fmt.Sprintf("too few events: %d blocks of %.4g time units (32 mean gaps or more each), want at least %d (about %d events)", len(f.blocks), f.tmax, minJackBlocks, 32*minJackBlocks)
}

// diffusionEstimate is D with its jackknife replicates reps (one per
// block), on log scale: D > 0 and its law is skewed (a slope of
// variances), and the log-scale interval was measured to keep its level
// where the percentile bootstrap covered 91-93% (coverage_test.go).
func (f *currentFit) diffusionEstimate(d0 float64, reps []float64, level float64) Estimate {
	w0 := 0
	if len(f.grid) > 0 {
		w0 = int(f.tot.w[0])
	}
	switch {
	case len(reps) < minJackBlocks:
		return tooFew(f.tooFewBlocks())
	case f.nfit < 4 || f.tmax < 8*f.mgap || w0 < minJackBlocks:
		return tooFew(fmt.Sprintf("too few events for the variance curve: %d grid points, longest window %.3g mean gaps, %d such windows (want 4, >= 8 and >= %d)", f.nfit, f.tmax/f.mgap, w0, minJackBlocks))
	case !(d0 > 0):
		e := nanEstimate("", fmt.Sprintf("the fitted slope of Var c(t) is %.4g: D is not positive", d0))
		return e
	}
	e := jackEstimate(d0, reps, level, true, f.method(true))
	fit := fmt.Sprintf("slope/2 of Var c(t) = a + 2Dt over t = %.4g..%.4g; ", f.grid[f.nfit-1], f.grid[0])
	e.Method = fit + e.Method
	return e
}

// currentEstimate is J with its jackknife replicates (linear scale: J
// takes either sign).
func (f *currentFit) currentEstimate(j float64, reps []float64, level float64) Estimate {
	if len(reps) < minJackBlocks {
		return tooFew(f.tooFewBlocks())
	}
	return jackEstimate(j, reps, level, false, f.method(false))
}

// activityEstimate is the activity (n_+ + n_-)/duration with its
// jackknife replicates (log scale), or, with fewer than minJackBlocks
// blocks or fewer than minJackCount events, the Garwood interval, which
// assumes Poisson counting.
func (f *currentFit) activityEstimate(reps []float64, level float64) Estimate {
	return countRate(f.tot.n, f.tot.dur, reps, level, f.method(true))
}
