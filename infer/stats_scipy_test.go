package infer

import (
	"encoding/json"
	"math"
	"os"
	"slices"
	"strconv"
	"testing"
)

// TestTwoSampleAgainstSciPy: the Kolmogorov-Smirnov distance and exact
// p-value, and the Anderson-Darling statistic T and p-value, against
// SciPy 1.10.1 (scipy.stats.ks_2samp with method="exact",
// scipy.stats.anderson_ksamp with midrank=False) on the samples stored in
// testdata/infer/reference-scipy.json (made by reference_scipy.py; the
// command is in the file). Tolerances:
//   - KS distance: 1e-12 absolute (both are a maximum of exact ratios);
//   - exact KS p-value: 1e-8 relative (SciPy and ksExactCDF use different
//     exact recursions, each with rounding ~1e-14 per step);
//   - AD T: 1e-9 relative (the same closed form, summed in another order);
//   - AD p-value, where SciPy's is inside its table (0.001 < p < 0.25):
//     within 15% relative, because the two interpolate the same table of
//     critical values differently (SciPy fits a quadratic in log p).
func TestTwoSampleAgainstSciPy(t *testing.T) {
	raw, err := os.ReadFile("../testdata/infer/reference-scipy.json")
	if err != nil {
		t.Fatal(err)
	}
	var ref struct {
		Cases []struct {
			Name     string
			X, Y     []string
			KSD      float64 `json:"ks_d"`
			KSPExact float64 `json:"ks_p_exact"`
			ADT      float64 `json:"ad_t"`
			ADP      float64 `json:"ad_p"`
		}
	}
	if err := json.Unmarshal(raw, &ref); err != nil {
		t.Fatal(err)
	}
	if len(ref.Cases) < 3 {
		t.Fatalf("%d cases", len(ref.Cases))
	}
	parse := func(ss []string) []float64 {
		out := make([]float64, len(ss))
		for i, s := range ss {
			v, err := strconv.ParseFloat(s, 64)
			if err != nil {
				t.Fatal(err)
			}
			out[i] = v
		}
		slices.Sort(out)
		return out
	}
	for _, c := range ref.Cases {
		x, y := parse(c.X), parse(c.Y)
		d := ksDistance(x, y)
		if math.Abs(d-c.KSD) > 1e-12 {
			t.Errorf("%s: KS distance %.15g, SciPy %.15g", c.Name, d, c.KSD)
		}
		p, exact := KSPValue(d, len(x), len(y))
		if !exact {
			t.Errorf("%s: KS p-value not exact at n*m = %d", c.Name, len(x)*len(y))
		}
		if math.Abs(p-c.KSPExact) > 1e-8*c.KSPExact {
			t.Errorf("%s: KS p %.12g, SciPy %.12g", c.Name, p, c.KSPExact)
		}
		ad := ADTest(x, y)
		if math.Abs(ad.T-c.ADT) > 1e-9*math.Abs(c.ADT) {
			t.Errorf("%s: AD T %.12g, SciPy %.12g", c.Name, ad.T, c.ADT)
		}
		if c.ADP > 0.001 && c.ADP < 0.25 {
			if math.Abs(ad.P-c.ADP) > 0.15*c.ADP {
				t.Errorf("%s: AD p %.6g, SciPy %.6g", c.Name, ad.P, c.ADP)
			}
		} else if c.ADP <= 0.001 && !(ad.P <= 0.0015) {
			t.Errorf("%s: AD p %.6g, SciPy says <= 0.001", c.Name, ad.P)
		} else if c.ADP >= 0.25 && !(ad.P >= 0.2) {
			t.Errorf("%s: AD p %.6g, SciPy says >= 0.25", c.Name, ad.P)
		}
	}
}
