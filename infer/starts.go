package infer

import (
	"math"
	"math/rand/v2"

	"edgewise/likelihood"
	"edgewise/models"
)

// StartKind says where a start of a fit came from.
type StartKind int

const (
	// StartSpec is the spec's own start values.
	StartSpec StartKind = iota
	// StartScaled is the spec's start with every free rate scaled by one
	// factor so that the model's mean gap between visible events equals
	// the data's (ratios of rates, and so P(l'|l) without dead time, are
	// unchanged).
	StartScaled
	// StartInformed is the best of a batch of random candidates around the
	// scaled start, each scaled to the data's mean gap, ranked by the
	// distance between the model's P(l'|l) and the data's (chi-square
	// weighted by the data's counts).
	StartInformed
	// StartRandom is log-normal around the scaled start: every free rate
	// multiplied by exp(1.5 Z), Z standard normal, every fitted detection
	// probability uniform on its range.
	StartRandom
)

func (k StartKind) String() string {
	switch k {
	case StartSpec:
		return "spec"
	case StartScaled:
		return "scaled"
	case StartInformed:
		return "data-informed"
	case StartRandom:
		return "random"
	}
	return "unknown"
}

// randomSpread is the standard deviation of a random start's natural log
// of each rate around the scaled start (a factor 4.5 at one SD).
const randomSpread = 1.5

// informedCandidates is the number of random candidates a data-informed
// start is chosen from.
const informedCandidates = 48

// dataTargets are the data's visible statistics that starts are matched to.
type dataTargets struct {
	meanGap float64     // time per gap
	counts  [][]float64 // N_{l l'}: consecutive pairs
}

func targetsOf(d *likelihood.Data) dataTargets {
	nl := len(d.Labels)
	t := dataTargets{counts: make([][]float64, nl)}
	for i := range t.counts {
		t.counts[i] = make([]float64, nl)
	}
	var span float64
	gaps := 0
	for r := range d.Records {
		rec := &d.Records[r]
		n := rec.Len()
		if n < 2 {
			continue
		}
		span += rec.Time[n-1] - rec.Time[0]
		gaps += n - 1
		for k := 1; k < n; k++ {
			t.counts[rec.Label[k-1]][rec.Label[k]]++
		}
	}
	if gaps > 0 && span > 0 {
		t.meanGap = span / float64(gaps)
	}
	return t
}

// startPoint is one start of a fit.
type startPoint struct {
	Kind StartKind
	X    []float64
}

// makeStarts returns the starts of a fit, in a fixed order: the spec's
// start, the scaled start, one data-informed start (two when total >= 6),
// then random starts, total in all (at least 1). The random stream is PCG
// seeded by seed, so the starts depend on the data and the seed only.
func makeStarts(m *models.Model, d *likelihood.Data, in likelihood.Instrument, total int, seed uint64) []startPoint {
	if total < 1 {
		total = 1
	}
	x0 := m.Start()
	starts := []startPoint{{Kind: StartSpec, X: x0}}
	if total == 1 || len(x0) == 0 {
		return starts
	}
	tg := targetsOf(d)
	lo, hi := m.Bounds()
	kinds := paramKinds(m)
	scaled := scaleToGap(m, x0, kinds, lo, hi, in, tg.meanGap)
	starts = append(starts, startPoint{Kind: StartScaled, X: scaled})
	rng := rand.New(rand.NewPCG(seed, 0x5eed1e55))
	draw := func() []float64 {
		x := make([]float64, len(scaled))
		for j := range x {
			if kinds[j] == models.DetectParam {
				h := math.Min(hi[j], 1)
				x[j] = lo[j] + (h-lo[j])*(0.05+0.9*rng.Float64())
				continue
			}
			x[j] = clampInside(scaled[j]*math.Exp(randomSpread*rng.NormFloat64()), lo[j], hi[j])
		}
		return scaleToGap(m, x, kinds, lo, hi, in, tg.meanGap)
	}
	nInformed := 1
	if total >= 6 {
		nInformed = 2
	}
	for i := 0; i < nInformed && len(starts) < total; i++ {
		best, bestD := []float64(nil), math.Inf(1)
		for c := 0; c < informedCandidates; c++ {
			x := draw()
			if dist := transitionDistance(m, x, in, tg); dist < bestD {
				best, bestD = x, dist
			}
		}
		if best == nil {
			best = draw()
		}
		starts = append(starts, startPoint{Kind: StartInformed, X: best})
	}
	for len(starts) < total {
		starts = append(starts, startPoint{Kind: StartRandom, X: draw()})
	}
	return starts
}

func paramKinds(m *models.Model) []models.ParamKind {
	var k []models.ParamKind
	for _, p := range m.Params {
		if !p.Fixed {
			k = append(k, p.Kind)
		}
	}
	return k
}

// clampInside keeps x strictly inside (lo, hi), a few percent from a
// finite bound.
func clampInside(x, lo, hi float64) float64 {
	if !math.IsInf(hi, 1) {
		w := hi - lo
		return math.Max(lo+0.02*w, math.Min(hi-0.02*w, x))
	}
	if x <= lo {
		return lo + 0.02*math.Max(lo, 1e-3)
	}
	return x
}

// scaleToGap multiplies every free rate by one factor, found by a few
// fixed-point steps, so that the model's mean gap equals gap; fixed rates
// keep their values (so the match is approximate when some are fixed, or
// with dead time). Returns x unchanged when the model cannot be evaluated.
func scaleToGap(m *models.Model, x []float64, kinds []models.ParamKind, lo, hi []float64, in likelihood.Instrument, gap float64) []float64 {
	out := append([]float64(nil), x...)
	if !(gap > 0) {
		return out
	}
	for it := 0; it < 6; it++ {
		mg, ok := modelMeanGap(m, out, in)
		if !ok {
			return append([]float64(nil), x...)
		}
		s := mg / gap
		if math.Abs(math.Log(s)) < 1e-3 {
			break
		}
		for j := range out {
			if kinds[j] == models.RateParam {
				out[j] = clampInside(out[j]*s, lo[j], hi[j])
			}
		}
	}
	return out
}

func predictorAt(m *models.Model, x []float64, in likelihood.Instrument) (*likelihood.Predictor, bool) {
	net, err := m.Network(x)
	if err != nil {
		return nil, false
	}
	k, err := likelihood.NewKernels(net)
	if err != nil {
		return nil, false
	}
	p, err := likelihood.NewPredictor(k, in)
	if err != nil {
		return nil, false
	}
	return p, true
}

func modelMeanGap(m *models.Model, x []float64, in likelihood.Instrument) (float64, bool) {
	p, ok := predictorAt(m, x, in)
	if !ok {
		return 0, false
	}
	g := p.MeanGap()
	return g, g > 0 && !math.IsInf(g, 0)
}

// transitionDistance is sum over l, l' of (N_{ll'} - N_l P(l'|l))^2 /
// max(N_l P(l'|l), 1): a Pearson-type distance between the data's pair
// counts and the model's P(l'|l). Data labels index the model's labels.
func transitionDistance(m *models.Model, x []float64, in likelihood.Instrument, tg dataTargets) float64 {
	p, ok := predictorAt(m, x, in)
	if !ok {
		return math.Inf(1)
	}
	tr := p.Transition()
	var dist float64
	for l, row := range tg.counts {
		var nl float64
		for _, c := range row {
			nl += c
		}
		if l >= len(tr) {
			continue
		}
		for l2, c := range row {
			e := nl * tr[l][l2]
			dd := c - e
			dist += dd * dd / math.Max(e, 1)
		}
	}
	return dist
}
