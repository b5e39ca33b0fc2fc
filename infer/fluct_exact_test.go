package infer

import (
	"math"
	"testing"

	"edgewise/likelihood"
)

// TestFixedTimeHelperAgrees: the test helper flFixedTime and
// likelihood.Predictor.FixedTime are two implementations of the
// uniformised fixed-time law; they must agree to 1e-12 in every
// probability (both sum non-negative terms; their Poisson truncations are
// below 1e-14).
func TestFixedTimeHelperAgrees(t *testing.T) {
	net := flTwoCycle()
	k, err := likelihood.NewKernels(net)
	if err != nil {
		t.Fatal(err)
	}
	pr, err := likelihood.NewPredictor(k, likelihood.Instrument{})
	if err != nil {
		t.Fatal(err)
	}
	for _, T := range []float64{3, 30} {
		p, off := flFixedTime(t, net, T)
		ex, err := pr.FixedTime(T, []int{1, -1})
		if err != nil {
			t.Fatal(err)
		}
		worst := 0.0
		for i, v := range p {
			worst = math.Max(worst, math.Abs(v-ex.Prob(i-off)))
		}
		if worst > 1e-12 {
			t.Errorf("T = %g: largest difference %g", T, worst)
		}
	}
}

// TestCountHistogramsMatchExact: the window histograms of simulated data
// follow the exact count-stopped law P_n(c), raw and post-selected
// (likelihood.Predictor.CountStopped, an independent dynamic programme),
// and the fraction of post-selected windows is its Weight. Pearson's
// chi-square over the c with an expected count >= 5 (pooling the rest)
// must not reject at p < 1e-4 (a chance failure that rare; a wrong
// current, window length or post-selection rule fails by far).
func TestCountHistogramsMatchExact(t *testing.T) {
	net := flTwoCycle()
	k, err := likelihood.NewKernels(net)
	if err != nil {
		t.Fatal(err)
	}
	pr, err := likelihood.NewPredictor(k, likelihood.Instrument{})
	if err != nil {
		t.Fatal(err)
	}
	d := flSimulate(t, net, 100000, 3, 21)
	res, err := FluctuationTest(d, []int{2, 7, 30}, FluctOptions{Boot: 1})
	if err != nil {
		t.Fatal(err)
	}
	for _, r := range res {
		for _, post := range []bool{false, true} {
			s := r.Raw
			if post {
				s = r.PostSelected
			}
			ex, err := pr.CountStopped(r.N, []int{1, -1}, post)
			if err != nil {
				t.Fatal(err)
			}
			var chi2, restO, restE float64
			df := -1
			for i, o := range s.Count {
				e := ex.Prob(i-s.Offset) * float64(s.Windows)
				if e < 5 {
					restO += float64(o)
					restE += e
					continue
				}
				chi2 += (float64(o) - e) * (float64(o) - e) / e
				df++
			}
			if restE > 0 {
				chi2 += (restO - restE) * (restO - restE) / restE
				df++
			}
			p := chiSquareSF(chi2, df)
			t.Logf("n=%d post=%v: %d windows, chi2 %.1f on %d df, p %.3g", r.N, post, s.Windows, chi2, df, p)
			if p < 1e-4 {
				t.Errorf("n=%d post=%v: histogram departs from the exact law (chi2 %.1f on %d df)", r.N, post, chi2, df)
			}
			if post {
				frac := float64(s.Windows) / float64(r.Raw.Windows)
				se := math.Sqrt(ex.Weight * (1 - ex.Weight) / float64(r.Raw.Windows))
				if math.Abs(frac-ex.Weight) > 4*se {
					t.Errorf("n=%d: post-selected fraction %.4f, exact %.4f", r.N, frac, ex.Weight)
				}
			}
		}
	}
}
