package likelihood

import (
	"errors"
	"fmt"
	"iter"
	"math"
	"runtime"
	"sync"
	"sync/atomic"

	"edgewise/models"

	"gonum.org/v1/gonum/mat"
)

// LogLik returns the log-likelihood of d (natural log; densities in
// 1/time for exact timestamps, probabilities for frame intervals).
func (e *Evaluator) LogLik(d *Data) (float64, error) {
	acc, err := e.run(d, false, nil)
	if err != nil {
		return math.NaN(), err
	}
	return acc.ll, nil
}

// RecordLogLiks returns each record's contribution to ln L, in the order
// of d.Records (for per-record comparisons and bootstraps over records).
// Their sum equals LogLik up to summation order.
func (e *Evaluator) RecordLogLiks(d *Data) ([]float64, error) {
	if d == nil {
		return nil, errors.New("likelihood: no records")
	}
	out := make([]float64, len(d.Records))
	if _, err := e.run(d, false, out); err != nil {
		return nil, err
	}
	return out, nil
}

// LogLik is a convenience: the log-likelihood of d under net.
func LogLik(net *models.Network, d *Data, opt Options) (float64, error) {
	e, err := NewNetworkEvaluator(net, opt)
	if err != nil {
		return math.NaN(), err
	}
	return e.LogLik(d)
}

// dataLabels maps data label indices to kernel label indices.
func (e *Evaluator) dataLabels(d *Data) ([256]int16, error) {
	var lm [256]int16
	for i := range lm {
		lm[i] = -1
	}
	if len(d.Labels) > 256 {
		return lm, fmt.Errorf("likelihood: %d labels; at most 256", len(d.Labels))
	}
	for i, name := range d.Labels {
		j := -1
		for l, kn := range e.k.Labels {
			if kn == name {
				j = l
			}
		}
		if j < 0 {
			return lm, fmt.Errorf("likelihood: data label %q is not a label of the model (model labels %q)", name, e.k.Labels)
		}
		lm[i] = int16(j)
	}
	return lm, nil
}

// item is one unit of work: whole records r0..r1-1, or (fast path) the
// range of events piece of one long record. Items depend on the data only,
// and hold no list per record, so that many short records cost no memory
// beyond the data.
type item struct {
	r0, r1 int     // whole records, when piece.k1 == 0
	piece  segment // a part of one record, when piece.k1 > 0
	acc    *accum
	err    error
	parts  []float64 // ln L of each segment, when per-record values are wanted
}

// segments yields the item's segments in order: its whole records, or its
// piece of one record.
func (it *item) segments(d *Data) iter.Seq[segment] {
	return func(yield func(segment) bool) {
		if it.piece.k1 > 0 {
			yield(it.piece)
			return
		}
		for r := it.r0; r < it.r1; r++ {
			if !yield(segment{r, 0, d.Records[r].Len()}) {
				return
			}
		}
	}
}

// record returns the record of the item's j-th segment.
func (it *item) record(j int) int {
	if it.piece.k1 > 0 {
		return it.piece.r
	}
	return it.r0 + j
}

type segment struct {
	r      int
	k0, k1 int // events [k0, k1)
}

// itemEvents is the target number of events per work item.
const itemEvents = 1 << 15

func (e *Evaluator) items(d *Data) []item {
	var its []item
	r0, count := 0, 0 // whole records r0.. not yet in an item, their events
	flush := func(r1 int) {
		if r1 > r0 {
			its = append(its, item{r0: r0, r1: r1})
		}
		r0, count = r1, 0
	}
	for r := range d.Records {
		n := d.Records[r].Len()
		if e.fast && n > itemEvents {
			flush(r)
			for k0 := 0; k0 < n; k0 += itemEvents {
				its = append(its, item{piece: segment{r, k0, min(k0+itemEvents, n)}})
			}
			r0 = r + 1
			continue
		}
		count += n
		if count >= itemEvents {
			flush(r + 1)
		}
	}
	flush(len(d.Records))
	return its
}

// run evaluates d, with the gradient accumulators when grad is true, and
// adds each record's ln L to perRecord[r] when perRecord is not nil.
func (e *Evaluator) run(d *Data, grad bool, perRecord []float64) (*accum, error) {
	if d == nil || len(d.Records) == 0 {
		return nil, errors.New("likelihood: no records")
	}
	lm, err := e.dataLabels(d)
	if err != nil {
		return nil, err
	}
	for r := range d.Records {
		rec := &d.Records[r]
		if rec.Len() == 0 {
			return nil, fmt.Errorf("likelihood: record %q is empty", rec.ID)
		}
		if len(rec.Label) != len(rec.Time) {
			return nil, fmt.Errorf("likelihood: record %q has %d times and %d labels", rec.ID, len(rec.Time), len(rec.Label))
		}
		if t := rec.Time[0]; math.IsNaN(t) || math.IsInf(t, 0) {
			return nil, fmt.Errorf("likelihood: record %q event 1: time %v is not finite", rec.ID, t)
		}
	}
	its := e.items(d)
	workers := e.opt.Workers
	if workers <= 0 {
		workers = runtime.GOMAXPROCS(0)
	}
	workers = min(workers, len(its))
	var next atomic.Int64
	var wg sync.WaitGroup
	for w := 0; w < workers; w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			ws := e.newWork(grad)
			for {
				i := int(next.Add(1)) - 1
				if i >= len(its) {
					return
				}
				it := &its[i]
				it.acc = e.newAccum(grad)
				ws.acc = it.acc
				for sg := range it.segments(d) {
					var err error
					var ll0, lm0 float64
					if perRecord != nil {
						// Evaluate the segment from zero, so that its value is exact.
						ll0, lm0 = it.acc.ll, it.acc.lmant
						it.acc.ll, it.acc.lmant = 0, 0
					}
					if e.fast {
						err = e.fastSegment(ws, d, &lm, sg)
					} else {
						err = e.generalRecord(ws, d, &lm, sg.r)
					}
					if err != nil {
						it.err = err
						break
					}
					if perRecord != nil {
						it.parts = append(it.parts, it.acc.ll+it.acc.lmant)
						it.acc.ll, it.acc.lmant = ll0+it.acc.ll, lm0+it.acc.lmant
					}
				}
			}
		}()
	}
	wg.Wait()
	total := e.newAccum(grad)
	for i := range its {
		if its[i].err != nil {
			return nil, its[i].err
		}
		total.add(its[i].acc)
		for j, v := range its[i].parts {
			perRecord[its[i].record(j)] += v
		}
	}
	total.ll += total.lmant
	if math.IsNaN(total.ll) || math.IsInf(total.ll, 0) {
		return nil, fmt.Errorf("likelihood: log-likelihood is %v", total.ll)
	}
	return total, nil
}

// accum holds the log-likelihood and the gradient accumulators of a
// work item. All gradient accumulators are sensitivities of ln L:
// sd0 to the entries of D0 (direct), sg to exp(L delta), sd[l][e] to the
// e-th entry of D_l, gw to the start law w0, gpi to pi; p, q, dg are the
// eigen-coordinate sums whose combination gives the sensitivity to D0
// through exp(D0 t) (see gradient.go); sz, szd, cnt are the fast-path
// per-pair sums.
type accum struct {
	ll    float64
	lmant float64 // the fast path's ln L (mantissa, power of two and shifts)
	grad  bool
	sd0   []float64
	sg    []float64
	sd    [][]float64
	gw    []float64
	gpi   []float64
	p, q  []complex128
	dg    []complex128
	sz    [][]float64
	szd   [][]float64
	cnt   []float64
}

func (e *Evaluator) newAccum(grad bool) *accum {
	a := &accum{grad: grad}
	if !grad {
		return a
	}
	n := e.n
	a.sd0 = make([]float64, n*n)
	a.sg = make([]float64, n*n)
	a.sd = make([][]float64, e.nl)
	for l := range a.sd {
		a.sd[l] = make([]float64, len(e.dsp[l]))
	}
	a.gw = make([]float64, n)
	a.gpi = make([]float64, n)
	if e.sp != nil {
		a.p = make([]complex128, n*n)
		a.q = make([]complex128, n*n)
		a.dg = make([]complex128, n)
	}
	if e.fast {
		np := (e.nl + 1) * (e.nl + 1)
		a.sz = make([][]float64, np)
		a.szd = make([][]float64, np)
		for i := range a.sz {
			a.sz[i] = make([]float64, n)
			a.szd[i] = make([]float64, n)
		}
		a.cnt = make([]float64, e.nl)
	}
	return a
}

func addTo[T float64 | complex128](dst, src []T) {
	for i := range src {
		dst[i] += src[i]
	}
}

func (a *accum) add(b *accum) {
	a.ll += b.ll
	a.lmant += b.lmant
	if !a.grad {
		return
	}
	addTo(a.sd0, b.sd0)
	addTo(a.sg, b.sg)
	for l := range a.sd {
		addTo(a.sd[l], b.sd[l])
	}
	addTo(a.gw, b.gw)
	addTo(a.gpi, b.gpi)
	addTo(a.p, b.p)
	addTo(a.q, b.q)
	addTo(a.dg, b.dg)
	for i := range a.sz {
		addTo(a.sz[i], b.sz[i])
		addTo(a.szd[i], b.szd[i])
	}
	addTo(a.cnt, b.cnt)
}

// interval returns the range [lo, hi] of the time spent under D0 for a
// reported gap g, and whether that range is possible:
//
//   - exact timestamps: lo = hi = g - delta (requires g >= delta);
//   - frames of length F: the gap lies in [max(g - F/2, 0), g + F/2],
//     shifted by the dead time and clipped at 0 (requires g + F/2 > delta).
func (e *Evaluator) interval(g float64, dead bool) (lo, hi float64, ok bool) {
	dt := 0.0
	if dead {
		dt = e.delta
	}
	if e.frame == 0 {
		t := g - dt
		return t, t, t >= 0 && !math.IsInf(t, 0) && g != 0
	}
	if !(g >= 0) || math.IsInf(g, 0) {
		return 0, 0, false
	}
	lo = math.Max(g-e.frame/2, 0) - dt
	hi = g + e.frame/2 - dt
	return math.Max(lo, 0), hi, hi > 0
}

// firstInterval is interval for the first event of a stationary start
// (time t1 after the clock origin 0, no dead time running): exact
// timestamps give [t1, t1]; frames give [t1, t1 + F], since the record
// starts at 0, a frame start, and t1 is the start of the frame holding
// the event.
func (e *Evaluator) firstInterval(t1 float64) (lo, hi float64, ok bool) {
	if !(t1 >= 0) || math.IsInf(t1, 0) {
		return 0, 0, false
	}
	return t1, t1 + e.frame, true
}

// endTime is the time under D0 of the censored end: End - t_n - delta,
// and with frames End - t_n - F/2 - delta (t_n a frame start: the last
// event lies in [t_n, t_n + F), taken at the frame's centre; End is exact).
func (e *Evaluator) endTime(end, tn float64) float64 {
	return end - tn - e.frame/2 - e.delta
}

// ZeroGapError is an event at the same time as the previous event of its
// record while timestamps are exact (see the package doc, Zero gaps).
type ZeroGapError struct {
	ID    string  // record ID
	Event int     // 1-based index of the event in its record
	Time  float64 // the shared time
}

func (e *ZeroGapError) Error() string {
	return fmt.Sprintf("likelihood: record %q event %d: zero gap (time %v, the same as the previous event): with exact timestamps a zero gap has no density; the gaps are finer than the times' resolution, so give that resolution as the frame length (or record shorter spans, since float64 resolution is relative to the time)", e.ID, e.Event, e.Time)
}

// gapError describes an impossible or invalid gap.
func gapError(rec *Record, k int, g float64, delta float64) error {
	t := rec.Time[k]
	switch {
	case math.IsNaN(t) || math.IsInf(t, 0):
		return fmt.Errorf("likelihood: record %q event %d: time %v is not finite", rec.ID, k+1, t)
	case k > 0 && (math.IsNaN(rec.Time[k-1]) || math.IsInf(rec.Time[k-1], 0)):
		return fmt.Errorf("likelihood: record %q event %d: time %v is not finite", rec.ID, k, rec.Time[k-1])
	case g < 0:
		return fmt.Errorf("likelihood: record %q event %d: time %v is before the previous event (%v)", rec.ID, k+1, t, t-g)
	case g == 0 && k > 0:
		return &ZeroGapError{ID: rec.ID, Event: k + 1, Time: t}
	}
	return fmt.Errorf("likelihood: record %q event %d: gap %v is shorter than the dead time %v: impossible under the instrument", rec.ID, k+1, g, delta)
}

func impossible(rec *Record, k int, what string, v float64) error {
	if k >= len(rec.Time) {
		return fmt.Errorf("likelihood: record %q: censored end at %v: %s %v: impossible under the model", rec.ID, rec.End, what, v)
	}
	return fmt.Errorf("likelihood: record %q event %d (time %v): %s %v: impossible under the model", rec.ID, k+1, rec.Time[k], what, v)
}

// work holds per-goroutine scratch space.
type work struct {
	acc                 *accum
	z, dz               []float64
	u, u0, x, y, b, v   []float64
	alpha, alpha2, beta []float64
	ah, bh, zh, dh      []complex128
	ck, buf             []float64 // checkpoints and segment buffer of backward vectors
	emat                *mat.Dense
	cache               map[[2]float64][]float64 // dense route: interval -> matrix
	ccache              map[[2]float64][]float64 // spectral route, frames: interval -> z, dz, shift
	vl                  map[[2]float64][]float64 // dense route: interval -> sum a b^T / c
	ucache              map[[2]float64][]float64 // spectral route: accurate fallback matrices
	mag                 []float64                // scratch for colCancels
}

func (e *Evaluator) newWork(grad bool) *work {
	n := e.n
	f := func() []float64 { return make([]float64, n) }
	w := &work{z: f(), dz: f(), u: f(), u0: f(), x: f(), y: f(), b: f(), v: f(), mag: f(),
		alpha: f(), alpha2: f(), beta: f(),
		ah: make([]complex128, n), bh: make([]complex128, n), zh: make([]complex128, n), dh: make([]complex128, n)}
	if e.sp != nil && e.frame > 0 {
		w.ccache = map[[2]float64][]float64{}
	}
	w.emat = mat.NewDense(n, n, nil)
	if e.sp == nil {
		w.cache = map[[2]float64][]float64{}
		if grad {
			w.vl = map[[2]float64][]float64{}
		}
	}
	return w
}

func sum(v []float64) float64 {
	s := 0.0
	for _, x := range v {
		s += x
	}
	return s
}

func dot(a, b []float64) float64 {
	s := 0.0
	for i, x := range a {
		s += x * b[i]
	}
	return s
}
