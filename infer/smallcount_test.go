package infer

import (
	"encoding/json"
	"math"
	"os"
	"strconv"
	"testing"

	"gonum.org/v1/gonum/stat/distuv"
)

type smallCountRef struct {
	Garwood []struct {
		N      int
		Level  float64
		Lo, Hi string
	}
	Binomial []struct {
		K, N int
		P0   float64
		LogP string `json:"log_p"`
		P, Z string
	}
	Chi2 []struct {
		X  float64
		SF string
	} `json:"chi2_1df"`
}

func loadSmallCountRef(t *testing.T) smallCountRef {
	t.Helper()
	raw, err := os.ReadFile("../testdata/infer/reference-smallcount.json")
	if err != nil {
		t.Fatal(err)
	}
	var ref smallCountRef
	if err := json.Unmarshal(raw, &ref); err != nil {
		t.Fatal(err)
	}
	if len(ref.Garwood) < 20 || len(ref.Binomial) < 10 {
		t.Fatalf("reference file holds %d and %d cases", len(ref.Garwood), len(ref.Binomial))
	}
	return ref
}

func parseF(t *testing.T, s string) float64 {
	t.Helper()
	v, err := strconv.ParseFloat(s, 64)
	if err != nil {
		t.Fatal(err)
	}
	return v
}

// TestPoissonIntervalAgainstSciPy: the Garwood interval (Biometrika 28,
// 437 (1936)) against SciPy 1.10.1's chi-square quantiles
// (testdata/infer/reference-smallcount.json, made by
// reference_smallcount.py): 1e-10 relative (both invert a regularised
// incomplete gamma function to near machine precision; 1e-10 leaves room
// for the different iterations). Another route: the limits solve
// P(N >= n | lo) = a/2 and P(N <= n | hi) = a/2 (gonum's Poisson CDF),
// checked to 1e-9.
func TestPoissonIntervalAgainstSciPy(t *testing.T) {
	ref := loadSmallCountRef(t)
	for _, c := range ref.Garwood {
		lo, hi := PoissonInterval(c.N, c.Level)
		wlo, whi := parseF(t, c.Lo), parseF(t, c.Hi)
		if math.Abs(lo-wlo) > 1e-10*math.Max(wlo, 1e-300) || math.Abs(hi-whi) > 1e-10*whi {
			t.Errorf("n = %d at %g: [%.17g, %.17g], SciPy [%.17g, %.17g]", c.N, c.Level, lo, hi, wlo, whi)
		}
		if !(hi > lo) || lo < 0 {
			t.Errorf("n = %d: interval [%g, %g] is negative or empty", c.N, lo, hi)
		}
		a := 1 - c.Level
		if c.N > 0 && c.N < 2000 {
			if got := 1 - (distuv.Poisson{Lambda: lo}).CDF(float64(c.N-1)); math.Abs(got-a/2) > 1e-9 {
				t.Errorf("n = %d: P(N >= n | lo) = %g, want %g", c.N, got, a/2)
			}
		}
		if c.N < 2000 {
			if got := (distuv.Poisson{Lambda: hi}).CDF(float64(c.N)); math.Abs(got-a/2) > 1e-9 {
				t.Errorf("n = %d: P(N <= n | hi) = %g, want %g", c.N, got, a/2)
			}
		}
	}
}

// TestBinomialTestAgainstSciPy: p-value (1e-9 relative), its log (1e-9
// absolute, also far below the range of float64 where SciPy sums log-pmf
// terms) and the normal score (1e-8 relative; beyond the range of the
// normal quantile SciPy solves log_ndtr(-z) = ln(p/2), the Go code inverts
// the asymptotic tail series) against SciPy 1.10.1.
func TestBinomialTestAgainstSciPy(t *testing.T) {
	ref := loadSmallCountRef(t)
	for _, c := range ref.Binomial {
		r := BinomialTest(c.K, c.N, c.P0)
		wp, wlp, wz := parseF(t, c.P), parseF(t, c.LogP), parseF(t, c.Z)
		if math.Abs(r.P-wp) > 1e-9*wp || (wp == 0 && r.P != 0) {
			t.Errorf("%d of %d at %g: p %.17g, SciPy %.17g", c.K, c.N, c.P0, r.P, wp)
		}
		lp := math.Min(0, math.Ln2+math.Min(logBinomLower(c.K, c.N, c.P0), logBinomUpper(c.K, c.N, c.P0)))
		if math.Abs(lp-wlp) > 1e-9*math.Max(1, math.Abs(wlp)) {
			t.Errorf("%d of %d at %g: ln p %.17g, SciPy %.17g", c.K, c.N, c.P0, lp, wlp)
		}
		if math.Abs(r.Z-wz) > 1e-8*math.Max(1, math.Abs(wz)) || math.IsInf(r.Z, 0) {
			t.Errorf("%d of %d at %g: z %.17g, SciPy %.17g", c.K, c.N, c.P0, r.Z, wz)
		}
	}
}

// TestBinomialTestSize: the exact test never rejects more often than its
// level: for n up to 60 and several p0, the probability (summed exactly
// over k) that p <= a is at most a, at a = 0.05 and 0.01. It also rejects
// exactly when p0 is outside the Clopper-Pearson interval at 1 - a
// (the two use the same tails).
func TestBinomialTestSize(t *testing.T) {
	for _, n := range []int{1, 2, 5, 14, 30, 60} {
		for _, p0 := range []float64{0.02, 0.1, 0.3, 0.5, 0.8} {
			for _, a := range []float64{0.05, 0.01} {
				size := 0.0
				b := distuv.Binomial{N: float64(n), P: p0}
				for k := 0; k <= n; k++ {
					r := BinomialTest(k, n, p0)
					lo, hi := ClopperPearson(k, n, 1-a)
					outside := p0 < lo || p0 > hi
					// Ties at the boundary are measure-zero; allow 1e-12.
					if (r.P <= a) != outside && math.Abs(r.P-a) > 1e-12 {
						t.Errorf("n %d k %d p0 %g a %g: p %g but CP [%g, %g]", n, k, p0, a, r.P, lo, hi)
					}
					if r.P <= a {
						size += b.Prob(float64(k))
					}
				}
				if size > a+1e-12 {
					t.Errorf("n %d p0 %g: size %g > %g", n, p0, size, a)
				}
			}
		}
	}
}

// TestBinomialTestEdges: no trials, impossible counts, the case of
// 0 of 14 '-' events followed by '-' (finite z, no disagreement), and
// continuity of the normal score where it switches from the quantile to
// the asymptotic series (relative 1e-6, the series' accuracy there).
func TestBinomialTestEdges(t *testing.T) {
	if r := BinomialTest(0, 0, 0.3); r.P != 1 || r.Z != 0 {
		t.Errorf("no trials: %+v", r)
	}
	if r := BinomialTest(1, 5, 0); r.P != 0 || !math.IsInf(r.Z, 1) {
		t.Errorf("impossible count: %+v", r)
	}
	r := BinomialTest(0, 14, 0.05)
	if !(r.P > 0.9) || math.IsInf(r.Z, 0) || !(math.Abs(r.Z) < 0.2) {
		t.Errorf("0 of 14 at 0.05: %+v", r)
	}
	lq := -700.0
	zq := -distuv.UnitNormal.Quantile(math.Exp(lq))
	za := normalScore(lq + math.Ln2 - 1e-9)
	if math.Abs(zq-za) > 1e-6*zq {
		t.Errorf("normal score at the switch: quantile %.12g, series %.12g", zq, za)
	}
	prev := 0.0
	for lp := -1.0; lp > -1e6; lp *= 1.5 {
		z := normalScore(lp)
		if !(z > prev) || math.IsInf(z, 0) {
			t.Fatalf("normal score not increasing or infinite at ln p = %g: %g after %g", lp, z, prev)
		}
		prev = z
	}
}

// TestAffinityTestSize: the exact likelihood-ratio test of F keeps its
// level for small counts: the probability, summed exactly over the two
// binomial laws of the model, that p <= a is at most a (plus the 1e-13
// tails left out of the enumeration). The chi-square route, used only for
// large counts, is checked against SciPy's chi-square tail.
func TestAffinityTestSize(t *testing.T) {
	for _, c := range []struct {
		np, nm int
		p1, p2 float64
	}{{14, 14, 0.6, 0.05}, {30, 8, 0.7, 0.2}, {50, 50, 0.5, 0.5}, {100, 12, 0.9, 0.1}, {5, 40, 0.2, 0.6}} {
		for _, a := range []float64{0.05, 0.01} {
			size := 0.0
			b1 := distuv.Binomial{N: float64(c.np), P: c.p1}
			b2 := distuv.Binomial{N: float64(c.nm), P: c.p2}
			for y1 := 0; y1 <= c.np; y1++ {
				for y2 := 0; y2 <= c.nm; y2++ {
					r := AffinityTest(y1, c.np, y2, c.nm, c.p1, c.p2)
					if math.IsNaN(r.P) || math.IsInf(r.Z, 0) {
						t.Fatalf("%+v at (%d, %d): %+v", c, y1, y2, r)
					}
					if r.P <= a {
						size += b1.Prob(float64(y1)) * b2.Prob(float64(y2))
					}
				}
			}
			if size > a+1e-9 {
				t.Errorf("%+v: size %g > %g", c, size, a)
			}
			t.Logf("%+v: size %.4f at %g", c, size, a)
		}
	}
	ref := loadSmallCountRef(t)
	for _, c := range ref.Chi2 {
		if got, want := chiSquareSF(c.X, 1), parseF(t, c.SF); math.Abs(got-want) > 1e-12*want+1e-300 {
			t.Errorf("chi2 sf(%g) = %.17g, SciPy %.17g", c.X, got, want)
		}
	}
}

// TestAffinityTestStatistic: G against a direct maximisation of the
// constrained likelihood (a grid of 2e5 values of P(-|-); another
// route than the quadratic's root) to 1e-4 (the grid's resolution), including
// counts with a pair never seen, where the plug-in F is infinite but G is
// finite; and the sign of z follows F_hat - F_m.
func TestAffinityTestStatistic(t *testing.T) {
	for _, c := range []struct {
		y1, n1, y2, n2 int
		a              float64
	}{{7, 14, 0, 14, 3}, {0, 20, 5, 20, 0.5}, {40, 60, 10, 30, 2}, {3, 3, 2, 9, 1}, {0, 5, 0, 5, 1.5}} {
		g := affinityG(c.y1, c.n1, c.y2, c.n2, c.a)
		ll := func(q float64) float64 {
			p1 := c.a * q
			return float64(c.y1)*math.Log(p1) + float64(c.n1-c.y1)*math.Log1p(-p1) + float64(c.y2)*math.Log(q) + float64(c.n2-c.y2)*math.Log1p(-q)
		}
		hi := math.Min(1, 1/c.a)
		best := math.Inf(-1)
		for i := 1; i < 200000; i++ {
			best = math.Max(best, ll(hi*float64(i)/200000))
		}
		free := xlogx(float64(c.y1)) + xlogx(float64(c.n1-c.y1)) - xlogx(float64(c.n1)) + xlogx(float64(c.y2)) + xlogx(float64(c.n2-c.y2)) - xlogx(float64(c.n2))
		want := 2 * (free - best)
		if c.y1+c.y2 == 0 {
			want = 2 * free // the supremum is approached as q -> 0
		}
		if math.Abs(g-want) > 1e-4*math.Max(1, want) {
			t.Errorf("%+v: G %.10g, grid %.10g", c, g, want)
		}
	}
	if r := AffinityTest(7, 14, 0, 14, 0.6, 0.2); !(r.Z > 0) || math.IsInf(r.Z, 0) || !(r.P > 0 && r.P <= 1) {
		t.Errorf("F_hat = +inf above the model: %+v", r)
	}
	if r := AffinityTest(0, 14, 5, 14, 0.6, 0.2); !(r.Z < 0) || math.IsInf(r.Z, 0) {
		t.Errorf("F_hat = -inf below the model: %+v", r)
	}
}
