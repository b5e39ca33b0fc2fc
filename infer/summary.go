package infer

import (
	"fmt"
	"math"
	"slices"

	"edgewise/likelihood"
)

// SummaryOptions tune Summarize. The zero value gives 95% intervals, labels
// "+" and "-" as the forward and backward crossings of the visible edge,
// delta-method intervals for F and windows of 50 events on average for the
// current's fluctuations.
type SummaryOptions struct {
	Plus, Minus string  // forward and backward label names; "" means "+" and "-"
	Level       float64 // confidence level; 0 means 0.95
	// Bootstrap and Seed are passed to EffectiveAffinity (pooled estimate;
	// a per-record estimate resamples blocks of its own record).
	Bootstrap int
	Seed      uint64
	// WindowEvents is the mean number of visible events per window used to
	// estimate the current's diffusion coefficient and Fano factor; 0
	// means 50.
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
	Rates    []Estimate
	// Current J = (n_+ - n_-)/duration and activity (n_+ + n_-)/duration,
	// counted like Rates. Their SE is sqrt(2 D / duration) with D from the
	// window estimate (Var c(t) ~ 2 D t), the Poisson SE when there are too
	// few windows.
	Current, Activity Estimate
	Pairs             [][]int      // N[l][l'] consecutive pairs
	Next              [][]Estimate // P(l'|l) = N[l][l']/N[l][.], Clopper-Pearson interval
	Affinity          Estimate     // F = ln[P(+|+)/P(-|-)]
	Gaps              [][]GapStats // inter-transition times per pair (l, l')
	// Window is the window length used for Diffusion and Fano, Windows the
	// number of complete windows. Diffusion D = s^2/(2 Window) with s^2 the
	// sample variance of the current c over windows; Fano = s^2/|mean c|,
	// which for unit steps is the randomness parameter 2D/|J| (windows
	// much longer than the correlation time of the labels are needed for
	// these to reach their long-time limits).
	Window    float64
	Windows   int
	Diffusion Estimate
	Fano      Estimate
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
// set; quantities that cannot be computed are NaN and explained in Notes or
// in the Estimate's Note.
func Summarize(d *likelihood.Data, opt SummaryOptions) (*Summary, error) {
	if d.Events() == 0 {
		return nil, fmt.Errorf("summary: no events")
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
	s.Pooled = s.part(d, d.Records, opt, true)
	if opt.PerRecord {
		for i := range d.Records {
			p := s.part(d, d.Records[i:i+1], opt, false)
			p.ID = d.Records[i].ID
			s.Records = append(s.Records, p)
		}
	}
	return s, nil
}

func (s *Summary) part(d *likelihood.Data, recs []likelihood.Record, opt SummaryOptions, pooled bool) Part {
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
	for l := 0; l < k; l++ {
		p.Rates = append(p.Rates, poissonRate(after[l], p.Duration, z))
	}
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
	np, nm := after[plus], after[minus]
	act := float64(np+nm) / p.Duration
	p.Window = opt.WindowEvents / act
	if math.IsInf(p.Window, 0) || math.IsNaN(p.Window) {
		p.Window = math.NaN()
	}
	c, n := windowCounts(recs, plus, minus, p.Window)
	p.Windows = len(c)
	j := float64(np-nm) / p.Duration
	if p.Windows >= 10 {
		mc, vc := meanVar(c)
		_, vn := meanVar(n)
		m := float64(p.Windows)
		dc := vc / (2 * p.Window)
		// Var of a sample variance ~ 2 s^4/(m-1) (Gaussian windows).
		relVar := math.Sqrt(2 / (m - 1))
		p.Diffusion = Estimate{Value: dc, SE: dc * relVar, Method: fmt.Sprintf("variance over %d windows of length %.4g", p.Windows, p.Window)}
		p.Diffusion.Lo, p.Diffusion.Hi = dc-z*p.Diffusion.SE, dc+z*p.Diffusion.SE
		fano := vc / math.Abs(mc)
		seMean := math.Sqrt(vc/m) / math.Abs(mc)
		p.Fano = Estimate{Value: fano, SE: fano * math.Sqrt(relVar*relVar+seMean*seMean), Method: p.Diffusion.Method}
		p.Fano.Lo, p.Fano.Hi = fano-z*p.Fano.SE, fano+z*p.Fano.SE
		if mc == 0 || seMean > 0.5 {
			p.Fano.Note = "the mean current per window is not resolved from zero: the Fano factor is not meaningful"
		}
		seJ := math.Sqrt(2 * dc / p.Duration)
		p.Current = Estimate{Value: j, SE: seJ, Lo: j - z*seJ, Hi: j + z*seJ, Method: "window variance, SE = sqrt(2D/duration)"}
		seA := math.Sqrt(vn / p.Window / p.Duration)
		p.Activity = Estimate{Value: act, SE: seA, Lo: act - z*seA, Hi: act + z*seA, Method: "window variance, SE = sqrt(Var n(t)/t / duration)"}
	} else {
		note := fmt.Sprintf("only %d complete windows of %g events: fluctuations not estimated", p.Windows, opt.WindowEvents)
		p.Diffusion = nanEstimate("", note)
		p.Fano = nanEstimate("", note)
		p.Current = poissonRate(np-nm, p.Duration, z)
		p.Current.SE = math.Sqrt(float64(np+nm)) / p.Duration
		p.Current.Lo, p.Current.Hi = j-z*p.Current.SE, j+z*p.Current.SE
		p.Current.Note = "Poisson standard error (too few windows for the window estimate)"
		p.Activity = poissonRate(np+nm, p.Duration, z)
	}
	return p
}

// recordDuration is the observed span of r: from its first event to its
// end, or to its last event when the end is unknown.
func recordDuration(r *likelihood.Record) float64 {
	if r.Len() == 0 {
		return 0
	}
	end := r.Time[r.Len()-1]
	if !math.IsNaN(r.End) {
		end = r.End
	}
	return end - r.Time[0]
}

// poissonRate is n/t with the Poisson standard error sqrt(n)/t.
func poissonRate(n int, t, z float64) Estimate {
	v := float64(n) / t
	se := math.Sqrt(math.Abs(float64(n))) / t
	if !(t > 0) {
		return nanEstimate("Poisson", "zero observed duration")
	}
	return Estimate{Value: v, SE: se, Lo: v - z*se, Hi: v + z*se, Method: "Poisson"}
}

// windowCounts cuts each record's span (t_1, end] into complete windows
// (t_1 + i w, t_1 + (i+1) w] and returns, per window, the current
// c = n_+ - n_- and the activity n = n_+ + n_-.
func windowCounts(recs []likelihood.Record, plus, minus uint8, w float64) (c, n []float64) {
	if !(w > 0) {
		return nil, nil
	}
	for i := range recs {
		r := &recs[i]
		span := recordDuration(r)
		m := int(math.Floor(span / w))
		if m <= 0 {
			continue
		}
		t0 := r.Time[0]
		cw := make([]float64, m)
		nw := make([]float64, m)
		for k := 1; k < r.Len(); k++ {
			x := (r.Time[k] - t0) / w
			idx := int(math.Ceil(x)) - 1
			if idx < 0 {
				continue // an event at t_1 itself
			}
			if idx >= m {
				break
			}
			switch r.Label[k] {
			case plus:
				cw[idx]++
				nw[idx]++
			case minus:
				cw[idx]--
				nw[idx]++
			}
		}
		c = append(c, cw...)
		n = append(n, nw...)
	}
	return c, n
}

// gapStats returns the inter-transition time statistics per pair.
func gapStats(recs []likelihood.Record, k int) [][]GapStats {
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
