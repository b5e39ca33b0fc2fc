package infer

import (
	"errors"
	"fmt"
	"math"
	"slices"

	"gonum.org/v1/gonum/mat"
)

// One-sample tests of uniformity on (0, 1), for probability integral
// transforms (see Goodness).

// UniformTest is the outcome of the one-sample Kolmogorov-Smirnov and
// Anderson-Darling tests of a sample against the uniform law on (0, 1),
// a fully specified null (no parameter estimated from the sample itself).
type UniformTest struct {
	N int // sample size
	// KS is D_n = sup_x |F_n(x) - x|, KSP its p-value P(D_n >= KS), exact
	// when KSExact (see KSUniformPValue).
	KS, KSP float64
	KSExact bool
	// AD is A^2_n, ADP its p-value (see ADUniformPValue).
	AD, ADP float64
}

// UniformityTest sorts a copy of u and returns both tests. Values must lie
// in [0, 1]; at least 2 are needed.
func UniformityTest(u []float64) (UniformTest, error) {
	if len(u) < 2 {
		return UniformTest{}, fmt.Errorf("uniformity test: %d values; at least 2 are needed", len(u))
	}
	s := slices.Clone(u)
	slices.Sort(s)
	if !(s[0] >= 0 && s[len(s)-1] <= 1) {
		return UniformTest{}, errors.New("uniformity test: values outside [0, 1] (or NaN)")
	}
	n := len(s)
	t := UniformTest{N: n, KS: ksUniformDistance(s), AD: adUniformStatistic(s)}
	t.KSP, t.KSExact = KSUniformPValue(t.KS, n)
	t.ADP = ADUniformPValue(t.AD, n)
	return t, nil
}

// ksUniformDistance is D_n = max_i max(i/n - u_(i), u_(i) - (i-1)/n) for
// u sorted ascending.
func ksUniformDistance(u []float64) float64 {
	n := float64(len(u))
	d := 0.0
	for i, v := range u {
		d = math.Max(d, math.Max(float64(i+1)/n-v, v-float64(i)/n))
	}
	return d
}

// adClamp keeps ln u and ln(1 - u) finite: values within 2^-53 (about
// 1.1e-16) of 0 or 1 are moved to that distance, the size of the
// transforms' own rounding.
const adClamp = 0x1p-53

// adUniformStatistic is A^2_n = -n - (1/n) sum_{i=1}^n (2i - 1)
// [ln u_(i) + ln(1 - u_(n+1-i))] for u sorted ascending (Anderson and
// Darling, J. Am. Stat. Assoc. 49, 765 (1954)), with u clamped to
// [2^-53, 1 - 2^-53].
func adUniformStatistic(u []float64) float64 {
	n := len(u)
	s := 0.0
	for i := 0; i < n; i++ {
		a := math.Min(math.Max(u[i], adClamp), 1-adClamp)
		b := math.Min(math.Max(u[n-1-i], adClamp), 1-adClamp)
		s += float64(2*i+1) * (math.Log(a) + math.Log1p(-b))
	}
	return -float64(n) - s/float64(n)
}

// ksExactMaxK bounds the exact route of KSUniformPValue: the matrix of
// Marsaglia, Tsang and Wang has order 2k - 1 with k = floor(n d) + 1.
const ksExactMaxK = 50

// KSUniformPValue returns P(D_n >= d) for the one-sample Kolmogorov-Smirnov
// distance of n uniform values, and whether it is exact.
//
// Exact when floor(n d) < 50 (under the null n d ~ 0.9 sqrt(n), so for
// samples up to about 2500 values): Durbin's matrix formula as evaluated
// by Marsaglia, Tsang and Wang (J. Stat. Softw. 8(18), 2003), P(D_n < d) =
// (n!/n^n) [H^n]_{kk}, with k = floor(n d) + 1, h = k - n d and H the (2k-1)
// x (2k-1) matrix H_ij = 1/(i-j+1)! for i - j + 1 >= 0 (0 otherwise),
// except H_i1 = (1 - h^i)/i!, H_mj = (1 - h^(m-j+1))/(m-j+1)! and H_m1 =
// (1 - 2h^m + max(0, 2h - 1)^m)/m!; powers by repeated squaring with the
// decimal exponent carried apart. An exact value below 1e-10, where
// 1 - P(D_n < d) has lost its digits, is replaced by the asymptotic one.
// Otherwise it is Kolmogorov's limit law with Stephens' correction (J. R.
// Stat. Soc. B 32, 115 (1970)): Q((sqrt(n) + 0.12 + 0.11/sqrt(n)) d),
// Q(x) = 2 sum_{k>=1} (-1)^{k-1} exp(-2 k^2 x^2), accurate to about 1% of p
// at these sizes.
func KSUniformPValue(d float64, n int) (p float64, exact bool) {
	switch {
	case n <= 0 || math.IsNaN(d):
		return math.NaN(), false
	case d <= 0:
		return 1, true
	case d >= 1:
		return 0, true
	}
	if float64(n)*d < ksExactMaxK {
		if p := 1 - ksOneSampleCDF(d, n); p >= 1e-10 {
			return math.Max(p, 0), true
		}
	}
	s := math.Sqrt(float64(n))
	return kolmogorovQ((s + 0.12 + 0.11/s) * d), false
}

// ksOneSampleCDF is P(D_n < d) by the matrix method (see KSUniformPValue).
func ksOneSampleCDF(d float64, n int) float64 {
	nd := float64(n) * d
	k := int(nd) + 1
	m := 2*k - 1
	h := float64(k) - nd
	hm := mat.NewDense(m, m, nil)
	for i := 0; i < m; i++ {
		for j := 0; j < m; j++ {
			if i-j+1 >= 0 {
				hm.Set(i, j, 1)
			}
		}
	}
	for i := 0; i < m; i++ {
		hm.Set(i, 0, hm.At(i, 0)-math.Pow(h, float64(i+1)))
		hm.Set(m-1, i, hm.At(m-1, i)-math.Pow(h, float64(m-i)))
	}
	if 2*h-1 > 0 {
		hm.Set(m-1, 0, hm.At(m-1, 0)+math.Pow(2*h-1, float64(m)))
	}
	for i := 0; i < m; i++ {
		for j := 0; j <= i+1 && j < m; j++ {
			for g := 2; g <= i-j+1; g++ {
				hm.Set(i, j, hm.At(i, j)/float64(g))
			}
		}
	}
	q, e := ksMatPow(hm, n)
	s := q.At(k-1, k-1)
	for i := 1; i <= n; i++ {
		s = s * float64(i) / float64(n)
		if s < 1e-140 {
			s *= 1e140
			e -= 140
		}
	}
	return s * math.Pow(10, float64(e))
}

// ksMatPow returns A^p as a matrix and a decimal exponent: A^p = M 10^e.
func ksMatPow(a *mat.Dense, p int) (*mat.Dense, int) {
	if p == 1 {
		return mat.DenseCopyOf(a), 0
	}
	v, e := ksMatPow(a, p/2)
	var b mat.Dense
	b.Mul(v, v)
	e *= 2
	if p%2 == 1 {
		var c mat.Dense
		c.Mul(a, &b)
		b = c
	}
	m, _ := b.Dims()
	if b.At(m/2, m/2) > 1e140 {
		b.Scale(1e-140, &b)
		e += 140
	}
	return &b, e
}

// ADUniformPValue returns P(A^2_n >= a2) for n uniform values by the
// approximation of Marsaglia and Marsaglia (J. Stat. Softw. 9(2), 2004):
// the limit distribution G(z) from their short formula (absolute error
// below 2e-6) plus their finite-n correction errfix(n, G), accurate to
// about the fifth decimal of the p-value. Two extensions of ours for small
// p-values (no source; relative errors of a few per cent at most):
//   - for G(z) > 0.99 an absolute correction of size ~1e-4/n would swamp
//     the p-value, so there p = (1 - G(z)) (1 + c_n), 1 - G computed without
//     cancellation and c_n = -errfix(n, 0.99)/0.01 (about 0.047/n) the
//     relative correction at the switch, so that p is continuous;
//   - the short formula for 1 - G falls off too fast beyond z ~ 7.5 (its
//     polynomial exponent), so from z = 7 on 1 - G is the leading term of
//     the tail of A^2 = sum_j Z_j^2/(j(j+1)) (Anderson and Darling, Ann.
//     Math. Stat. 23, 193 (1952)): a weighted sum of chi-square variables
//     has the tail of its largest term, P(Z^2/2 > z) = erfc(sqrt z), times
//     prod_{j>=2} (1 - 2/(j(j+1)))^{-1/2} = sqrt 3 (Zolotarev's theorem;
//     the product telescopes), with a factor 1 + a/z whose a makes 1 - G
//     continuous at z = 7 (a ~ 0.32; the same factor matches the short
//     formula within 1% on [5, 7]).
func ADUniformPValue(a2 float64, n int) float64 {
	switch {
	case n <= 0 || math.IsNaN(a2):
		return math.NaN()
	case a2 <= 0:
		return 1
	}
	g, tail := adInf(a2)
	if g > 0.99 {
		return tail * (1 - adErrFix(n, 0.99)/0.01)
	}
	return math.Min(1, math.Max(0, 1-g-adErrFix(n, g)))
}

// adTailFrom is where adInf switches to the asymptotic tail.
const adTailFrom = 7

// adTailAsymptotic is sqrt(3) erfc(sqrt z), the leading term of P(A^2 > z).
func adTailAsymptotic(z float64) float64 { return math.Sqrt(3) * math.Erfc(math.Sqrt(z)) }

// adInf returns the limit distribution function G(z) of A^2 and 1 - G(z)
// (see ADUniformPValue).
func adInf(z float64) (g, tail float64) {
	if z >= adTailFrom {
		_, t7 := adInfShort(adTailFrom)
		a := adTailFrom * (t7/adTailAsymptotic(adTailFrom) - 1)
		tail = adTailAsymptotic(z) * (1 + a/z)
		return 1 - tail, tail
	}
	return adInfShort(z)
}

// adInfShort is the short formula of Marsaglia and Marsaglia (2004).
func adInfShort(z float64) (g, tail float64) {
	if z < 2 {
		g = math.Exp(-1.2337141/z) / math.Sqrt(z) *
			(2.00012 + (0.247105-(0.0649821-(0.0347962-(0.011672-0.00168691*z)*z)*z)*z)*z)
		return g, 1 - g
	}
	x := math.Exp(1.0776 - (2.30695-(0.43424-(0.082433-(0.008056-0.0003146*z)*z)*z)*z)*z)
	return math.Exp(-x), -math.Expm1(-x)
}

// adErrFix is the finite-n correction of Marsaglia and Marsaglia (2004):
// P(A^2_n < z) ~ G + errfix(n, G), G = adInf(z).
func adErrFix(n int, x float64) float64 {
	fn := float64(n)
	if x > 0.8 {
		return (-130.2137 + (745.2337-(1705.091-(1950.646-(1116.360-255.7844*x)*x)*x)*x)*x) / fn
	}
	c := 0.01265 + 0.1757/fn
	if x < c {
		t := x / c
		t = math.Sqrt(t) * (1 - t) * (49*t - 102)
		return t * (0.0037/(fn*fn) + 0.00078/fn + 0.00006) / fn
	}
	t := (x - c) / (0.8 - c)
	t = -0.00022633 + (6.54034-(14.6538-(14.458-(8.259-1.91864*t)*t)*t)*t)*t
	return t * (0.04213 + 0.01365/fn) / fn
}
