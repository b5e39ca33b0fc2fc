package infer

import (
	"math"

	"gonum.org/v1/gonum/stat/distuv"
)

// Estimate is a point estimate with its uncertainty.
//
// Lo and Hi bound a confidence interval at the level asked for (95% by
// default); either may be infinite for a one-sided bound. SE is the standard
// error when one is meaningful, else NaN. Method names how the interval was
// made; Note explains an infinite or undefined value.
//
// Undefined is set when the statistic is not given at all (Value, SE, Lo
// and Hi are NaN): the data hold too few events for it (Note then starts
// with "too few events"), or it is not defined for these data; Note says
// why. A renderer should print the reason, never a number.
type Estimate struct {
	Value, SE, Lo, Hi float64
	Method            string
	Note              string
	Undefined         bool
}

func nanEstimate(method, note string) Estimate {
	n := math.NaN()
	return Estimate{Value: n, SE: n, Lo: n, Hi: n, Method: method, Note: note, Undefined: true}
}

// tooFew is the Estimate of a statistic withheld for want of events; why
// must start with "too few events".
func tooFew(why string) Estimate {
	return nanEstimate("", why)
}

// ClopperPearson returns the exact (Clopper-Pearson) two-sided confidence
// interval at the given level for a binomial probability after k successes
// in n trials:
//
//	lo = B^{-1}(a/2; k, n-k+1),  hi = B^{-1}(1-a/2; k+1, n-k),  a = 1-level,
//
// with B^{-1} the Beta quantile (lo = 0 when k = 0, hi = 1 when k = n).
// Equivalently P(X >= k | lo) = a/2 and P(X <= k | hi) = a/2 for
// X ~ Binomial(n, p). With n = 0 it returns (0, 1).
func ClopperPearson(k, n int, level float64) (lo, hi float64) {
	a := 1 - level
	return cpLower(k, n, a/2), cpUpper(k, n, a/2)
}

// cpLower is the one-sided lower limit with tail probability a.
func cpLower(k, n int, a float64) float64 {
	if k <= 0 || n <= 0 {
		return 0
	}
	return distuv.Beta{Alpha: float64(k), Beta: float64(n - k + 1)}.Quantile(a)
}

// cpUpper is the one-sided upper limit with tail probability a.
func cpUpper(k, n int, a float64) float64 {
	if k >= n {
		return 1
	}
	return distuv.Beta{Alpha: float64(k + 1), Beta: float64(n - k)}.Quantile(1 - a)
}

// normalQuantile returns the standard normal quantile at p.
func normalQuantile(p float64) float64 {
	return distuv.UnitNormal.Quantile(p)
}

// zFor returns the two-sided normal multiplier for a confidence level.
func zFor(level float64) float64 { return normalQuantile(1 - (1-level)/2) }

// chiSquareSF returns P(X >= x) for X ~ chi-square with df degrees of
// freedom; 1 when df <= 0.
func chiSquareSF(x float64, df int) float64 {
	if df <= 0 {
		return 1
	}
	if x <= 0 {
		return 1
	}
	return distuv.ChiSquared{K: float64(df)}.Survival(x)
}

// normalSF2 returns the two-sided normal tail 2 P(Z >= |z|).
func normalSF2(z float64) float64 {
	return 2 * distuv.UnitNormal.Survival(math.Abs(z))
}

// xlogx returns x ln x with 0 ln 0 = 0.
func xlogx(x float64) float64 {
	if x <= 0 {
		return 0
	}
	return x * math.Log(x)
}

// meanVar returns the mean and the unbiased variance of x (NaN variance for
// fewer than two values).
func meanVar(x []float64) (mean, variance float64) {
	if len(x) == 0 {
		return math.NaN(), math.NaN()
	}
	s := 0.0
	for _, v := range x {
		s += v
	}
	mean = s / float64(len(x))
	if len(x) < 2 {
		return mean, math.NaN()
	}
	ss := 0.0
	for _, v := range x {
		d := v - mean
		ss += d * d
	}
	return mean, ss / float64(len(x)-1)
}

// moments accumulates a mean and a variance in one pass (Welford's update,
// stable for long runs of similar values).
type moments struct {
	n        int
	mean, m2 float64
}

func (m *moments) add(x float64) {
	m.n++
	d := x - m.mean
	m.mean += d / float64(m.n)
	m.m2 += d * (x - m.mean)
}

// meanVar returns the mean and the unbiased variance (NaN when undefined).
func (m *moments) meanVar() (mean, variance float64) {
	switch m.n {
	case 0:
		return math.NaN(), math.NaN()
	case 1:
		return m.mean, math.NaN()
	}
	return m.mean, m.m2 / float64(m.n-1)
}

// median returns the median of x, reordering x (quickselect, expected O(n)).
func median(x []float64) float64 {
	n := len(x)
	if n == 0 {
		return math.NaN()
	}
	hi := selectK(x, n/2)
	if n%2 == 1 {
		return hi
	}
	// The lower middle is the largest value left of position n/2.
	lo := x[0]
	for _, v := range x[1 : n/2] {
		if v > lo {
			lo = v
		}
	}
	return (lo + hi) / 2
}

// selectK reorders x so that x[k] is the k-th smallest (0-based), every
// element before it is <= x[k] and every one after is >= x[k], and returns
// x[k]. Hoare partition with a median-of-three pivot.
func selectK(x []float64, k int) float64 {
	lo, hi := 0, len(x)-1
	for lo < hi {
		mid := lo + (hi-lo)/2
		if x[mid] < x[lo] {
			x[mid], x[lo] = x[lo], x[mid]
		}
		if x[hi] < x[lo] {
			x[hi], x[lo] = x[lo], x[hi]
		}
		if x[hi] < x[mid] {
			x[hi], x[mid] = x[mid], x[hi]
		}
		pivot := x[mid]
		i, j := lo, hi
		for i <= j {
			for x[i] < pivot {
				i++
			}
			for x[j] > pivot {
				j--
			}
			if i <= j {
				x[i], x[j] = x[j], x[i]
				i++
				j--
			}
		}
		switch {
		case k <= j:
			hi = j
		case k >= i:
			lo = i
		default:
			return x[k]
		}
	}
	return x[k]
}

// ksDistance returns the two-sample Kolmogorov-Smirnov distance
// D = sup_t |F_x(t) - F_y(t)| of the empirical distribution functions of
// x and y, both sorted ascending. Tied values are stepped over together.
func ksDistance(x, y []float64) float64 {
	n, m := float64(len(x)), float64(len(y))
	i, j := 0, 0
	d := 0.0
	for i < len(x) && j < len(y) {
		t := min(x[i], y[j])
		for i < len(x) && x[i] == t {
			i++
		}
		for j < len(y) && y[j] == t {
			j++
		}
		if g := math.Abs(float64(i)/n - float64(j)/m); g > d {
			d = g
		}
	}
	return d
}

// KSPValue returns the p-value P(D >= d) of the two-sample
// Kolmogorov-Smirnov distance d for samples of sizes n and m from one
// continuous distribution, and whether it is exact.
//
// When n m <= 10^6 it is exact: the probability that a random
// interleaving of the two samples (a lattice path from (0,0) to (m,n))
// keeps |i/m - j/n| < d at every step, counted by dynamic programming with
// each path weighted 1/C(n+m, n) (the lattice-path count of Hodges, Ark.
// Mat. 3, 469 (1958); reference from memory), except that an exact value
// below 1e-10, where 1 - P(D < d) has lost its digits to rounding, is
// replaced by the asymptotic one. Otherwise it is the limiting Kolmogorov
// distribution
//
//	P(D >= d) ~ Q(lambda) = 2 sum_{k>=1} (-1)^{k-1} exp(-2 k^2 lambda^2),
//	lambda = (sqrt(ne) + 0.12 + 0.11/sqrt(ne)) d,  ne = n m/(n + m),
//
// with Stephens' small-sample correction (J. R. Stat. Soc. B 32, 115 (1970)).
func KSPValue(d float64, n, m int) (p float64, exact bool) {
	if n <= 0 || m <= 0 {
		return math.NaN(), false
	}
	if d <= 0 {
		return 1, true
	}
	if d > 1 {
		return 0, true
	}
	if int64(n)*int64(m) <= 1_000_000 {
		if p := 1 - ksExactCDF(d, n, m); p >= 1e-10 {
			return p, true
		}
	}
	ne := float64(n) * float64(m) / float64(n+m)
	s := math.Sqrt(ne)
	return kolmogorovQ((s + 0.12 + 0.11/s) * d), false
}

// ksExactCDF returns P(D < d) for sample sizes n and m.
func ksExactCDF(d float64, n, m int) float64 {
	if m > n {
		n, m = m, n
	}
	md, nd := float64(m), float64(n)
	// D takes values k/(m n); q sits half a step below d so that
	// "|i/m - j/n| <= q" means "< d" robustly to rounding.
	q := (0.5 + math.Floor(d*md*nd-1e-7)) / (md * nd)
	u := make([]float64, n+1)
	for j := 0; j <= n; j++ {
		if float64(j)/nd > q {
			u[j] = 0
		} else {
			u[j] = 1
		}
	}
	for i := 1; i <= m; i++ {
		w := float64(i) / float64(i+n)
		if float64(i)/md > q {
			u[0] = 0
		} else {
			u[0] = w * u[0]
		}
		for j := 1; j <= n; j++ {
			if math.Abs(float64(i)/md-float64(j)/nd) > q {
				u[j] = 0
			} else {
				u[j] = w*u[j] + u[j-1]
			}
		}
	}
	return u[n]
}

// kolmogorovQ returns Q(lambda) = 2 sum_{k>=1} (-1)^{k-1} exp(-2 k^2 lambda^2),
// the survival function of the Kolmogorov distribution. Below lambda = 0.2
// the alternating series converges slowly, and there 1 - Q < 1e-20
// (1 - Q = (sqrt(2 pi)/lambda) sum exp(-(2k-1)^2 pi^2 / (8 lambda^2))), so
// it returns 1.
func kolmogorovQ(lambda float64) float64 {
	if lambda < 0.2 {
		return 1
	}
	s, sign := 0.0, 1.0
	a := -2 * lambda * lambda
	for k := 1; k <= 200; k++ {
		term := sign * math.Exp(a*float64(k*k))
		s += term
		if math.Abs(term) < 1e-17*math.Abs(s) {
			break
		}
		sign = -sign
	}
	return math.Min(1, math.Max(0, 2*s))
}

// ADResult is the outcome of the two-sample Anderson-Darling test.
type ADResult struct {
	A2 float64 // A^2_{kN}
	T  float64 // (A^2 - (k-1)) / sigma_N, k = 2
	P  float64 // p-value interpolated in the asymptotic table of T
	// PBound is "" when P is interpolated, "<" or ">" when T lies beyond
	// the table and P is the table's end value (the true p-value is
	// smaller or larger).
	PBound string
}

// ADTest is the two-sample Anderson-Darling rank test of Scholz and
// Stephens (J. Am. Stat. Assoc. 82, 918 (1987), eqs. 3-4) for x and y
// sorted ascending, continuous version (ties are not given mid-ranks):
//
//	A^2 = (1/N) sum_i (1/n_i) sum_{j=1}^{N-1} (N M_ij - j n_i)^2 / (j (N - j)),
//
// M_ij the number of sample-i values among the j smallest of the pooled
// sample. Under the null E A^2 = k - 1 = 1 and Var A^2 = sigma_N^2 has
// their exact finite-N form, computed in O(N). The p-value interpolates
// log(p/(1-p)) linearly in T between the asymptotic upper percentiles of T
// for k - 1 = 1 (adTable: 0.325 at p = 0.25, 1.226 at 0.10, 1.961 at 0.05,
// 2.718 at 0.025, 3.752 at 0.01, 4.592 at 0.005, 6.546 at 0.001); beyond
// the table P is the end value with PBound set. The size of the resulting
// test is checked by simulation in the tests.
func ADTest(x, y []float64) ADResult {
	n1, n2 := len(x), len(y)
	N := n1 + n2
	if n1 < 2 || n2 < 2 || N < 4 {
		return ADResult{A2: math.NaN(), T: math.NaN(), P: math.NaN()}
	}
	fN := float64(N)
	f1, f2 := float64(n1), float64(n2)
	var s1, s2 float64
	i, k := 0, 0
	for j := 1; j < N; j++ {
		// Take the j-th smallest pooled value.
		if k >= n2 || (i < n1 && x[i] <= y[k]) {
			i++
		} else {
			k++
		}
		fj := float64(j)
		den := fj * (fN - fj)
		a := fN*float64(i) - fj*f1
		b := fN*float64(k) - fj*f2
		s1 += a * a / den
		s2 += b * b / den
	}
	a2 := (s1/f1 + s2/f2) / fN
	sd := math.Sqrt(adVariance(N, []int{n1, n2}))
	t := (a2 - 1) / sd
	p, bound := adPValue(t)
	return ADResult{A2: a2, T: t, P: p, PBound: bound}
}

// adVariance is sigma_N^2 of Scholz and Stephens (1987), eq. 4:
//
//	sigma^2 = (a N^3 + b N^2 + c N + d) / ((N-1)(N-2)(N-3)),
//	a = (4g - 6)(k-1) + (10 - 6g) H,
//	b = (2g - 4) k^2 + 8 h k + (2g - 14h - 4) H - 8h + 4g - 6,
//	c = (6h + 2g - 2) k^2 + (4h - 4g + 6) k + (2h - 6) H + 4h,
//	d = (2h + 6) k^2 - 4 h k,
//
// H = sum 1/n_i, h = sum_{i<N} 1/i, g = sum_{i=1}^{N-2} sum_{j=i+1}^{N-1} 1/((N-i) j).
func adVariance(N int, n []int) float64 {
	k := float64(len(n))
	H := 0.0
	for _, v := range n {
		H += 1 / float64(v)
	}
	// Harmonic numbers: h_m = sum_{i=1}^m 1/i.
	h := 0.0
	for i := 1; i < N; i++ {
		h += 1 / float64(i)
	}
	// g = sum_{i=1}^{N-2} (h_{N-1} - h_i)/(N - i).
	g, hi := 0.0, 0.0
	for i := 1; i <= N-2; i++ {
		hi += 1 / float64(i)
		g += (h - hi) / float64(N-i)
	}
	fN := float64(N)
	a := (4*g-6)*(k-1) + (10-6*g)*H
	b := (2*g-4)*k*k + 8*h*k + (2*g-14*h-4)*H - 8*h + 4*g - 6
	c := (6*h+2*g-2)*k*k + (4*h-4*g+6)*k + (2*h-6)*H + 4*h
	d := (2*h+6)*k*k - 4*h*k
	return (a*fN*fN*fN + b*fN*fN + c*fN + d) / ((fN - 1) * (fN - 2) * (fN - 3))
}

// adTable holds the asymptotic upper percentiles t_m(p) of T for m = k - 1
// = 1, from the interpolation formula of Scholz and Stephens (1987, Table
// 2), t_m(p) = b0 + b1/sqrt(m) + b2/m, with the coefficients b0, b1, b2 as
// SciPy's scipy.stats.anderson_ksamp uses them (scipy/scipy,
// scipy/stats/_morestats.py; its documentation lists the levels 25%, 10%,
// 5%, 2.5%, 1%, 0.5% and 0.1%): at m = 1 each entry is b0 + b1 + b2. The
// values used before, quoted from memory as the paper's m = 1 row (0.326,
// 1.225, 1.960, 2.719, 3.752; not checked against the paper), differ from
// these by at most 0.001.
var adTable = [...]struct{ t, p float64 }{
	{0.325, 0.25}, {1.226, 0.10}, {1.961, 0.05}, {2.718, 0.025}, {3.752, 0.01}, {4.592, 0.005}, {6.546, 0.001},
}

func adPValue(t float64) (float64, string) {
	if math.IsNaN(t) {
		return math.NaN(), ""
	}
	first, last := adTable[0], adTable[len(adTable)-1]
	if t < first.t {
		return first.p, ">"
	}
	if t > last.t {
		return last.p, "<"
	}
	logit := func(p float64) float64 { return math.Log(p / (1 - p)) }
	for i := 1; i < len(adTable); i++ {
		lo, hi := adTable[i-1], adTable[i]
		if t <= hi.t {
			f := (t - lo.t) / (hi.t - lo.t)
			l := logit(lo.p) + f*(logit(hi.p)-logit(lo.p))
			return 1 / (1 + math.Exp(-l)), ""
		}
	}
	return last.p, "<"
}
