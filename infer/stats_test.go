package infer

import (
	"math"
	"math/rand/v2"
	"slices"
	"testing"

	"gonum.org/v1/gonum/stat/distuv"
)

// TestClopperPearson checks the exact binomial interval three ways:
//   - closed forms at the edges: k = 0 gives hi = 1 - (a/2)^(1/n) and
//     k = n gives lo = (a/2)^(1/n) (Clopper and Pearson, Biometrika 26,
//     404 (1934): the limits solve P(X <= k | hi) = a/2, P(X >= k | lo) = a/2);
//   - the defining tail equations, with gonum's Binomial CDF (an independent
//     route: a sum of binomial terms, not a Beta quantile), to 1e-9;
//   - 95% intervals quoted to 4 decimals in textbook tables (values from
//     memory: 5/10 -> 0.1871-0.8129, 1/10 -> 0.0025-0.4450,
//     10/20 -> 0.2720-0.7280), to the table's rounding, 5e-5.
func TestClopperPearson(t *testing.T) {
	for _, n := range []int{1, 5, 10, 100, 1000} {
		_, hi := ClopperPearson(0, n, 0.95)
		if want := 1 - math.Pow(0.025, 1/float64(n)); math.Abs(hi-want) > 1e-12 {
			t.Errorf("n=%d k=0: hi %v, want %v", n, hi, want)
		}
		lo, _ := ClopperPearson(n, n, 0.95)
		if want := math.Pow(0.025, 1/float64(n)); math.Abs(lo-want) > 1e-12 {
			t.Errorf("n=%d k=n: lo %v, want %v", n, lo, want)
		}
	}
	for _, c := range [][2]int{{1, 10}, {5, 10}, {3, 17}, {50, 200}, {999, 1000}} {
		k, n := c[0], c[1]
		for _, level := range []float64{0.9, 0.95, 0.99} {
			lo, hi := ClopperPearson(k, n, level)
			a := (1 - level) / 2
			// P(X <= k | hi) = a and P(X >= k | lo) = 1 - P(X <= k-1 | lo) = a.
			if got := (distuv.Binomial{N: float64(n), P: hi}).CDF(float64(k)); math.Abs(got-a) > 1e-9 {
				t.Errorf("%d/%d level %g: P(X<=k|hi) = %v, want %v", k, n, level, got, a)
			}
			if got := 1 - (distuv.Binomial{N: float64(n), P: lo}).CDF(float64(k-1)); math.Abs(got-a) > 1e-9 {
				t.Errorf("%d/%d level %g: P(X>=k|lo) = %v, want %v", k, n, level, got, a)
			}
		}
	}
	table := []struct {
		k, n   int
		lo, hi float64
	}{{5, 10, 0.1871, 0.8129}, {1, 10, 0.0025, 0.4450}, {10, 20, 0.2720, 0.7280}}
	for _, c := range table {
		lo, hi := ClopperPearson(c.k, c.n, 0.95)
		if math.Abs(lo-c.lo) > 5e-5 || math.Abs(hi-c.hi) > 5e-5 {
			t.Errorf("%d/%d: (%.5f, %.5f), table (%.4f, %.4f)", c.k, c.n, lo, hi, c.lo, c.hi)
		}
	}
}

// TestMedianSelect: quickselect median against sorting, including ties.
func TestMedianSelect(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	for n := 1; n < 60; n++ {
		x := make([]float64, n)
		for i := range x {
			x[i] = float64(rng.IntN(7))
		}
		s := slices.Clone(x)
		slices.Sort(s)
		want := s[n/2]
		if n%2 == 0 {
			want = (s[n/2-1] + s[n/2]) / 2
		}
		if got := median(x); got != want {
			t.Fatalf("n=%d: median %v, want %v", n, got, want)
		}
	}
}
