package infer

import (
	"fmt"
	"math"
	"slices"

	"edgewise/likelihood"
)

// ShapeResult is the outcome of ShapeTest.
type ShapeResult struct {
	NPlus, NMinus       int     // numbers of ++ and -- gaps
	MeanPlus, MeanMinus float64 // their mean gaps (time)
	D                   float64 // Kolmogorov-Smirnov distance of the normalised gaps
	P                   float64 // p-value of D
	Exact               bool    // P is exact rather than asymptotic
	Ties                int     // normalised values shared by the two samples or repeated
	Method              string
	Note                string
}

// ShapeTest compares the shapes of the ++ and -- inter-transition time
// distributions of a single visible edge: each ++ gap is divided by the
// mean ++ gap and each -- gap by the mean -- gap, and the two samples of
// normalised gaps are compared by the two-sample Kolmogorov-Smirnov test
// (KSPValue).
//
// Why: if every driven cycle of the hidden network passes through the
// visible edge and detection is perfect, psi_{+->+}(t)/psi_{-->-}(t) is the
// constant e^F for all t, so the two normalised densities are identical. A
// significant difference therefore rules out every such scheme; missed
// events act as a hidden copy of the visible edge (a cycle that avoids the
// seen crossings) and make the shapes differ too.
//
// Caveat: each sample is scaled by its own estimated mean, which makes the
// null distribution of D slightly narrower than Kolmogorov's, so the
// p-value is conservative (it errs towards not rejecting).
func ShapeTest(d *likelihood.Data, plus, minus uint8) (ShapeResult, error) {
	k := len(d.Labels)
	if int(plus) >= k || int(minus) >= k || plus == minus {
		return ShapeResult{}, fmt.Errorf("shape test: bad label pair %d, %d for %d labels", plus, minus, k)
	}
	gaps := PairGaps(d.Records, k)
	x := slices.Clone(gaps[int(plus)*k+int(plus)])
	y := slices.Clone(gaps[int(minus)*k+int(minus)])
	r := ShapeResult{NPlus: len(x), NMinus: len(y), Method: "two-sample Kolmogorov-Smirnov on gaps divided by their pair's mean"}
	if len(x) < 2 || len(y) < 2 {
		r.D, r.P = math.NaN(), math.NaN()
		r.MeanPlus, _ = meanVar(x)
		r.MeanMinus, _ = meanVar(y)
		return r, fmt.Errorf("shape test: need at least 2 ++ and 2 -- gaps, have %d and %d", len(x), len(y))
	}
	r.MeanPlus, _ = meanVar(x)
	r.MeanMinus, _ = meanVar(y)
	if !(r.MeanPlus > 0) || !(r.MeanMinus > 0) {
		r.D, r.P = math.NaN(), math.NaN()
		return r, fmt.Errorf("shape test: a mean gap is zero (all timestamps equal?)")
	}
	for i := range x {
		x[i] /= r.MeanPlus
	}
	for i := range y {
		y[i] /= r.MeanMinus
	}
	slices.Sort(x)
	slices.Sort(y)
	r.Ties = countTies(x, y)
	r.D = ksDistance(x, y)
	r.P, r.Exact = KSPValue(r.D, len(x), len(y))
	if r.Exact {
		r.Method += " (exact p-value)"
	} else {
		r.Method += " (asymptotic Kolmogorov p-value)"
	}
	if r.Ties > 0 {
		r.Note = fmt.Sprintf("%d tied values (rounded or duplicate timestamps): the p-value assumes continuous times", r.Ties)
	}
	if min(r.NPlus, r.NMinus) < 20 {
		r.Note = joinNote(r.Note, "few gaps: the test has little power")
	}
	return r, nil
}

// countTies counts values of the sorted samples that equal their
// predecessor in the merged order.
func countTies(x, y []float64) int {
	n := 0
	i, j := 0, 0
	prev := math.NaN()
	for i < len(x) || j < len(y) {
		var v float64
		if j >= len(y) || (i < len(x) && x[i] <= y[j]) {
			v = x[i]
			i++
		} else {
			v = y[j]
			j++
		}
		if v == prev {
			n++
		}
		prev = v
	}
	return n
}
