package infer

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/mathext"
	"gonum.org/v1/gonum/stat/distuv"
)

// This file holds the tests and intervals that stay finite and keep their
// level with small counts: the exact (Garwood) Poisson interval, the exact
// binomial test of a count against a model's probability, the exact test
// of an effective affinity against a model's, and the normal score that
// turns a two-sided p-value into a finite z.

// PoissonInterval returns the exact two-sided interval at the given level
// for the mean mu of a Poisson count n (Garwood, Biometrika 28, 437
// (1936)):
//
//	lo = G^{-1}(a/2; n),  hi = G^{-1}(1 - a/2; n + 1),  a = 1 - level,
//
// G^{-1}(p; k) the p-quantile of the Gamma(k, 1) law (half the chi-square
// quantile on 2k degrees of freedom), and lo = 0 for n = 0. Equivalently
// P(N >= n | lo) = a/2 and P(N <= n | hi) = a/2. The interval is never
// negative and never of zero width.
func PoissonInterval(n int, level float64) (lo, hi float64) {
	a := 1 - level
	if n > 0 {
		lo = mathext.GammaIncRegInv(float64(n), a/2)
	}
	hi = mathext.GammaIncRegInv(float64(n+1), 1-a/2)
	return lo, hi
}

// CountTest is a test of an observed count against a model's law.
type CountTest struct {
	K, N     int     // observed count and number of trials (binomial), or -1 when not a single count
	Model    float64 // the model's probability (or value) under test
	Expected float64 // its expected count N * Model, or NaN
	// P is the two-sided p-value; Z its normal score, the signed z with
	// 2 P(Z > |z|) = P, positive when the data lie above the model. Z is
	// finite whenever P > 0 (it is computed from the log of P, so a
	// p-value below the smallest float64 still gives a finite z); it is
	// +-Inf only when the data are impossible under the model (P = 0).
	P, Z   float64
	Method string
	Note   string
}

// BinomialTest is the exact two-sided binomial test of k successes in n
// trials against the model's success probability p0: the p-value doubles
// the smaller tail,
//
//	P = min(1, 2 min(P(X <= k), P(X >= k))),  X ~ Binomial(n, p0),
//
// so that it rejects at level a exactly when p0 lies outside the
// Clopper-Pearson interval of k/n at level 1 - a (the same tail areas).
// Its size never exceeds a for any n and p0 (it is conservative, as every
// exact test of a discrete count). Z is the normal score of P with the
// sign of k - n p0. With n = 0 there is no information: P = 1, Z = 0.
func BinomialTest(k, n int, p0 float64) CountTest {
	t := CountTest{K: k, N: n, Model: p0, Expected: float64(n) * p0, Method: "exact binomial test (two-sided, doubled smaller tail)"}
	switch {
	case n < 0 || k < 0 || k > n || !(p0 >= 0 && p0 <= 1):
		t.P, t.Z = math.NaN(), math.NaN()
		t.Note = fmt.Sprintf("bad input: %d of %d with probability %v", k, n, p0)
		return t
	case n == 0:
		t.P, t.Z = 1, 0
		t.Note = "no trials: no information"
		return t
	case (p0 == 0 && k > 0) || (p0 == 1 && k < n):
		t.P = 0
		t.Z = math.Inf(1)
		if p0 == 1 {
			t.Z = math.Inf(-1)
		}
		t.Note = fmt.Sprintf("%d of %d is impossible under the model's probability %g", k, n, p0)
		return t
	}
	lower := logBinomLower(k, n, p0) // ln P(X <= k)
	upper := logBinomUpper(k, n, p0) // ln P(X >= k)
	lp := math.Min(0, math.Ln2+math.Min(lower, upper))
	t.P = math.Exp(lp)
	t.Z = normalScore(lp)
	if float64(k) < t.Expected {
		t.Z = -t.Z
	}
	return t
}

// logBinomLower returns ln P(X <= k) for X ~ Binomial(n, p), 0 < p < 1
// (p = 0 or 1 handled by the caller or exactly here).
func logBinomLower(k, n int, p float64) float64 {
	if k >= n || p == 0 {
		return 0
	}
	if p == 1 {
		return math.Inf(-1)
	}
	// P(X <= k) = I_{1-p}(n - k, k + 1).
	if v := mathext.RegIncBeta(float64(n-k), float64(k+1), 1-p); v > 1e-280 {
		return math.Log(v)
	}
	// Far in the lower tail: sum the terms from k down, in ratio form
	// (pmf(j-1)/pmf(j) = j (1-p) / ((n-j+1) p), < 1 below the mean).
	return logBinomTail(k, n, p, -1)
}

// logBinomUpper returns ln P(X >= k).
func logBinomUpper(k, n int, p float64) float64 {
	if k <= 0 || p == 1 {
		return 0
	}
	if p == 0 {
		return math.Inf(-1)
	}
	// P(X >= k) = I_p(k, n - k + 1).
	if v := mathext.RegIncBeta(float64(k), float64(n-k+1), p); v > 1e-280 {
		return math.Log(v)
	}
	return logBinomTail(k, n, p, +1)
}

// logBinomTail sums the binomial terms from k outwards (dir = -1: j = k,
// k-1, ..., 0; dir = +1: j = k, ..., n) in log space. It is used only far
// in a tail, where the terms fall geometrically, so few are needed.
func logBinomTail(k, n int, p float64, dir int) float64 {
	b := distuv.Binomial{N: float64(n), P: p}
	lk := b.LogProb(float64(k))
	s, term := 1.0, 1.0
	for j := k; ; {
		var r float64
		if dir < 0 {
			if j == 0 {
				break
			}
			r = float64(j) * (1 - p) / (float64(n-j+1) * p)
			j--
		} else {
			if j == n {
				break
			}
			r = float64(n-j) * p / (float64(j+1) * (1 - p))
			j++
		}
		term *= r
		s += term
		if term < 1e-17*s {
			break
		}
	}
	return lk + math.Log(s)
}

// normalScore returns z >= 0 with 2 P(Z > z) = exp(lp) for a standard
// normal Z (lp = ln of a two-sided p-value, <= 0). It is finite for every
// finite lp: below the range of float64 quantiles it inverts the
// asymptotic tail ln P(Z > z) = -z^2/2 - ln(z sqrt(2 pi)) + ln(1 - 1/z^2 +
// 3/z^4) by Newton steps (relative error of the series below 1e-6 for
// z > 37, where it is used).
func normalScore(lp float64) float64 {
	if math.IsNaN(lp) {
		return math.NaN()
	}
	if lp >= 0 {
		return 0
	}
	if math.IsInf(lp, -1) {
		return math.Inf(1)
	}
	lq := lp - math.Ln2 // one tail
	if lq > -700 {
		return -distuv.UnitNormal.Quantile(math.Exp(lq))
	}
	z := math.Sqrt(-2 * lq)
	for range 50 {
		z2 := z * z
		f := -z2/2 - math.Log(z) - 0.5*math.Log(2*math.Pi) + math.Log1p(-1/z2+3/(z2*z2)) - lq
		df := -z - 1/z
		step := f / df
		z -= step
		if math.Abs(step) < 1e-14*z {
			break
		}
	}
	return z
}

// ZFromP returns the signed normal score of a two-sided p-value: the z
// with 2 P(Z > |z|) = p and the sign of sign (0 gives 0 when p = 1 and a
// positive z otherwise). It is finite for every p > 0.
func ZFromP(p float64, sign float64) float64 {
	z := normalScore(math.Log(p))
	if sign < 0 {
		return -z
	}
	return z
}

// AffinityTest tests the data's effective affinity against a model's,
// from the pair counts: pp of the np pairs after a + event are ++, mm of
// the nm pairs after a - event are --, and the model has P(+|+) = p1 and
// P(-|-) = p2, so F_m = ln(p1/p2). The statistic is the likelihood ratio
// of H0: ln P(+|+) - ln P(-|-) = F_m against free probabilities, with pp
// and mm independent binomial given np and nm (the conditional law of a
// Markov chain's transition counts given the visits, as in Anderson and
// Goodman, Ann. Math. Stat. 28, 89 (1957)). Under H0, with a = e^{F_m},
// the profile maximum is at P(-|-) = q, P(+|+) = a q, q the smaller root
// of
//
//	a (np + nm) q^2 - [ (pp + mm)(1 + a) + (np - pp) a + (nm - mm) ] q + (pp + mm) = 0,
//
// so G = 2 [ln L(free) - ln L(H0)] is finite even when a pair was never
// seen (then the plug-in F is infinite and a delta-method z would be too).
//
// The p-value P(G >= G_obs) is exact under the model's (p1, p2): the two
// binomial laws are enumerated over the counts that carry all but 1e-13
// of their mass (the mass left out is added to P, so P never falls below
// its exact value), when that is at most affinityExactCells cells and P is
// at least 1e-9; otherwise (large counts, or a P so small that the tails
// left out would dominate it) G is referred to chi-square with one degree
// of freedom, whose normal score is sqrt(G). Z is the normal score of P
// with the sign of F_hat - F_m (0 when F_hat is undefined).
func AffinityTest(pp, np, mm, nm int, p1, p2 float64) CountTest {
	t := CountTest{K: -1, N: -1, Model: math.Log(p1) - math.Log(p2), Expected: math.NaN()}
	if pp < 0 || mm < 0 || pp > np || mm > nm || !(p1 > 0 && p1 < 1 && p2 > 0 && p2 < 1) {
		t.P, t.Z = math.NaN(), math.NaN()
		t.Note = fmt.Sprintf("no test: counts %d/%d and %d/%d, model probabilities %v and %v (need both strictly between 0 and 1)", pp, np, mm, nm, p1, p2)
		return t
	}
	a := p1 / p2
	g := func(y1, y2 int) float64 { return affinityG(y1, np, y2, nm, a) }
	gObs := g(pp, mm)
	sign := 0.0
	switch {
	case np == 0 || nm == 0 || (pp == 0 && mm == 0):
	default:
		// F_hat - F_m = ln(pp nm / (np mm)) - ln a, with F_hat = +-Inf
		// for mm = 0 or pp = 0.
		switch {
		case mm == 0:
			sign = 1
		case pp == 0:
			sign = -1
		default:
			sign = math.Log(float64(pp)*float64(nm)/(float64(np)*float64(mm))) - math.Log(a)
		}
	}
	lo1, hi1 := binomRange(np, p1)
	lo2, hi2 := binomRange(nm, p2)
	cells := float64(hi1-lo1+1) * float64(hi2-lo2+1)
	exact := false
	if cells <= affinityExactCells {
		b1 := binomPMF(np, p1, lo1, hi1)
		b2 := binomPMF(nm, p2, lo2, hi2)
		var p, m1, m2 float64
		cut := gObs*(1-1e-9) - 1e-12
		for i, w1 := range b1 {
			m1 += w1
			for j, w2 := range b2 {
				if g(lo1+i, lo2+j) >= cut {
					p += w1 * w2
				}
			}
		}
		for _, w2 := range b2 {
			m2 += w2
		}
		p += math.Max(0, 1-m1*m2) // the enumerated ranges leave out at most this
		// Below 1e-9 the left-out tails (up to 2e-13) would dominate: the
		// p-value is then taken from chi-square, where it is accurate.
		if p >= 1e-9 {
			t.P = math.Min(1, p)
			t.Method = "exact likelihood-ratio test under the model's P(+|+), P(-|-)"
			t.Z = ZFromP(t.P, sign)
			exact = true
		}
	}
	if !exact {
		// Chi-square with 1 df: P = 2 P(Z > sqrt G), so the normal score
		// is sqrt(G) itself, finite even where P underflows.
		t.P = chiSquareSF(gObs, 1)
		t.Method = "likelihood-ratio test, chi-square with 1 df"
		t.Z = math.Sqrt(gObs)
		if sign < 0 {
			t.Z = -t.Z
		}
	}
	if sign == 0 {
		t.Z = 0 // F_hat undefined: no direction
	}
	return t
}

// affinityExactCells caps the pairs of counts AffinityTest enumerates.
const affinityExactCells = 4e6

// affinityG is the likelihood-ratio statistic of AffinityTest for counts
// y1 of n1 and y2 of n2 and the model's ratio a = e^{F_m}.
func affinityG(y1, n1, y2, n2 int, a float64) float64 {
	s := float64(y1 + y2)
	u := float64(n1 - y1)
	v := float64(n2 - y2)
	free := xlogx(float64(y1)) + xlogx(u) - xlogx(float64(n1)) + xlogx(float64(y2)) + xlogx(v) - xlogx(float64(n2))
	if s == 0 {
		return math.Max(0, 2*free) // H0's supremum is at q -> 0: ln L = 0
	}
	A := a * float64(n1+n2)
	B := s*(1+a) + u*a + v
	// Smaller root of A q^2 - B q + s, in the stable form 2s/(B + sqrt(B^2 - 4As)).
	q := 2 * s / (B + math.Sqrt(math.Max(0, B*B-4*A*s)))
	h0 := 0.0
	if y1 > 0 {
		h0 += float64(y1) * math.Log(a*q)
	}
	if u > 0 {
		h0 += u * math.Log1p(-a*q)
	}
	if y2 > 0 {
		h0 += float64(y2) * math.Log(q)
	}
	if v > 0 {
		h0 += v * math.Log1p(-q)
	}
	return math.Max(0, 2*(free-h0))
}

// binomRange returns the counts [lo, hi] outside which a Binomial(n, p)
// law has mass below 1e-13 on each side.
func binomRange(n int, p float64) (lo, hi int) {
	const tail = 1e-13
	b := distuv.Binomial{N: float64(n), P: p}
	m := int(b.Mean())
	lo, hi = m, m
	for lo > 0 && logBinomLower(lo-1, n, p) > math.Log(tail) {
		lo = max(0, lo-max(1, int(b.StdDev()/4)))
	}
	for hi < n && logBinomUpper(hi+1, n, p) > math.Log(tail) {
		hi = min(n, hi+max(1, int(b.StdDev()/4)))
	}
	return lo, hi
}

// binomPMF returns the Binomial(n, p) probabilities of the counts lo..hi.
func binomPMF(n int, p float64, lo, hi int) []float64 {
	b := distuv.Binomial{N: float64(n), P: p}
	out := make([]float64, hi-lo+1)
	for k := lo; k <= hi; k++ {
		out[k-lo] = math.Exp(b.LogProb(float64(k)))
	}
	return out
}
