package infer

import (
	"fmt"
	"math"
	"slices"
	"strings"

	"edgewise/models"

	"gonum.org/v1/gonum/mat"
)

// Thresholds of the identifiability analysis, on the eigenvalues lambda of
// the observed information I in working coordinates (ln rate, logit p).
const (
	// flatRelative: lambda <= flatRelative * lambda_max is flat whatever
	// the data size. The central-difference information is accurate to
	// about 1e-8 of lambda_max (see hessStep), so a smaller eigenvalue
	// cannot be told from zero.
	flatRelative = 1e-7
	// flatSE: a direction whose standard error exceeds flatSE (in natural
	// log units, a factor e^10 = 22026 at one standard error) is not
	// determined by the data in any practical sense, and is counted as
	// flat.
	flatSE = 10.0
	// flatWeight: a parameter is undetermined when the squared length of
	// its unit vector's projection on the flat subspace exceeds flatWeight
	// (it carries at least 10% of some flat direction).
	flatWeight = 0.01
)

// Identifiability is what the observed information at the maximum says
// the data determine.
type Identifiability struct {
	// Eigenvalues of I in working coordinates, ascending (nats per unit^2).
	Eigenvalues []float64
	// Flat is the number of directions the data do not determine.
	Flat int
	// Determined[j] is false when free parameter j moves along a flat
	// direction (it then has no finite standard error and no interval).
	Determined []bool
	// Effective = number of free parameters - Flat: the number of
	// parameter combinations the data determine, used by AIC and BIC.
	Effective int
	// Statements name the flat directions in terms of the parameters
	// ("only k3*k5/k4 is determined").
	Statements []string
	// NotMaximum is true when I has a clearly negative eigenvalue: the
	// point is a saddle, not a maximum.
	NotMaximum bool
	// Cov is the covariance of the working coordinates on the determined
	// subspace: sum over non-flat eigenpairs of v v^T / lambda.
	Cov *mat.SymDense
	// FlatVectors are unit vectors spanning the flat subspace (working
	// coordinates).
	FlatVectors [][]float64
	// NearZero lists the parameters whose flat direction is that of a rate
	// running to zero (see analyseInformation): they count in Effective,
	// have no finite standard error on the log scale, and their profile
	// interval reaches 0.
	NearZero []int
}

// nearZeroWeight: a flat direction that puts at least this share of its
// squared length on rates that are small on the records' time scale is
// the direction of a rate running to zero, not a combination the data
// cannot tell apart.
const nearZeroWeight = 0.5

// analyseInformation classifies the eigen-directions of info and names the
// flat ones with the parameter names. small[j] marks rates that are small
// on the records' time scale (Fit: below smallRate times the visible event
// rate). In log coordinates such a rate is flat because it is near zero
// (d ln L/d ln k = k d ln L/dk vanishes with k), not because the data
// cannot tell it from another: the scheme without it fits as well, and it
// still counts as a parameter (so that AIC and BIC prefer the smaller
// scheme), with an interval reaching 0.
func analyseInformation(info *mat.SymDense, names []string, kinds []models.ParamKind, x []float64, small []bool) (*Identifiability, error) {
	p := len(names)
	id := &Identifiability{Determined: make([]bool, p), Cov: mat.NewSymDense(max(p, 1), nil)}
	if p == 0 {
		return id, nil
	}
	var es mat.EigenSym
	if !es.Factorize(info, true) {
		return nil, fmt.Errorf("identifiability: eigen-decomposition of the observed information failed")
	}
	lam := es.Values(nil)
	var vec mat.Dense
	es.VectorsTo(&vec)
	id.Eigenvalues = append([]float64(nil), lam...)
	lmax := 0.0
	for _, l := range lam {
		lmax = math.Max(lmax, math.Abs(l))
	}
	thr := math.Max(flatRelative*lmax, 1/(flatSE*flatSE))
	proj := mat.NewSymDense(p, nil) // projector on the flat subspace
	for k, l := range lam {
		v := mat.Col(nil, k, &vec)
		if l <= thr {
			if l < -thr && l < -1e-4*lmax {
				id.NotMaximum = true
			}
			ws := 0.0
			for j := range v {
				if small != nil && small[j] {
					ws += v[j] * v[j]
				}
			}
			if ws >= nearZeroWeight {
				for j := range v {
					if small[j] && v[j]*v[j] > flatWeight && !slices.Contains(id.NearZero, j) {
						id.NearZero = append(id.NearZero, j)
					}
				}
				continue
			}
			id.Flat++
			id.FlatVectors = append(id.FlatVectors, v)
			for i := 0; i < p; i++ {
				for j := i; j < p; j++ {
					proj.SetSym(i, j, proj.At(i, j)+v[i]*v[j])
				}
			}
			continue
		}
		for i := 0; i < p; i++ {
			for j := i; j < p; j++ {
				id.Cov.SetSym(i, j, id.Cov.At(i, j)+v[i]*v[j]/l)
			}
		}
	}
	id.Effective = p - id.Flat
	for j := 0; j < p; j++ {
		id.Determined[j] = proj.At(j, j) <= flatWeight
	}
	slices.Sort(id.NearZero)
	if id.Flat > 0 {
		id.Statements = nameFlat(proj, names, kinds, x)
	}
	return id, nil
}

// nameFlat describes the flat subspace with projector proj block by block:
// parameters are linked when the projector couples them, and each
// connected block of m parameters with f flat directions determines m - f
// combinations.
func nameFlat(proj *mat.SymDense, names []string, kinds []models.ParamKind, x []float64) []string {
	p := len(names)
	label := func(j int) string {
		if kinds[j] == models.DetectParam {
			return "logit " + names[j]
		}
		return names[j]
	}
	involved := func(j int) bool { return proj.At(j, j) > flatWeight }
	seen := make([]bool, p)
	var out []string
	for s := 0; s < p; s++ {
		if seen[s] || !involved(s) {
			continue
		}
		// Connected block through |P_ij| > flatWeight/10.
		block := []int{s}
		seen[s] = true
		for q := 0; q < len(block); q++ {
			i := block[q]
			for j := 0; j < p; j++ {
				if !seen[j] && involved(j) && math.Abs(proj.At(i, j)) > flatWeight/10 {
					seen[j] = true
					block = append(block, j)
				}
			}
		}
		slices.Sort(block)
		m := len(block)
		sub := mat.NewSymDense(m, nil)
		tr := 0.0
		for a, i := range block {
			tr += proj.At(i, i)
			for b := a; b < m; b++ {
				sub.SetSym(a, b, proj.At(i, block[b]))
			}
		}
		f := int(math.Round(tr))
		var bnames []string
		for _, j := range block {
			bnames = append(bnames, label(j))
		}
		var es mat.EigenSym
		if !es.Factorize(sub, true) {
			out = append(out, fmt.Sprintf("the data do not determine %s separately", strings.Join(bnames, ", ")))
			continue
		}
		var vec mat.Dense
		es.VectorsTo(&vec)
		switch {
		case m-f <= 0:
			out = append(out, fmt.Sprintf("the data do not determine %s at all: ln L does not change when %s", strings.Join(bnames, ", "), changeWord(bnames)))
		case m-f == 1:
			c := mat.Col(nil, 0, &vec) // eigenvalue ~0 of the projector: the determined combination
			if isSum(c, block, x, kinds) {
				out = append(out, fmt.Sprintf("only the sum %s is determined: ln L does not change when they move with their sum fixed", strings.Join(bnames, " + ")))
				break
			}
			out = append(out, fmt.Sprintf("only the combination %s is determined (locally); %s move together along a ridge of equal ln L", productForm(c, block, label), strings.Join(bnames, ", ")))
		default:
			for k := m - f; k < m; k++ {
				v := mat.Col(nil, k, &vec)
				out = append(out, "ln L does not change along "+moveForm(v, block, label))
			}
		}
	}
	return out
}

// isSum reports whether the determined log-combination c is that of a sum
// of rates: d(sum x_i) = sum x_i d ln x_i, so c_i proportional to x_i
// (within 5%), with every entry of one sign.
func isSum(c []float64, block []int, x []float64, kinds []models.ParamKind) bool {
	if len(block) < 2 {
		return false
	}
	r0 := 0.0
	for a, j := range block {
		if kinds[j] != models.RateParam || x[j] <= 0 {
			return false
		}
		r := c[a] / x[j]
		if a == 0 {
			r0 = r
			if r0 == 0 {
				return false
			}
			continue
		}
		if math.Abs(r/r0-1) > 0.05 {
			return false
		}
	}
	return true
}

func changeWord(names []string) string {
	if len(names) == 1 {
		return names[0] + " changes"
	}
	return "they change"
}

// rationalise scales c so that its largest entry is 1 and, when small
// integer multiples make every entry an integer to within 0.05, returns
// those integers.
func rationalise(c []float64) ([]float64, bool) {
	mx := 0.0
	for _, v := range c {
		if math.Abs(v) > math.Abs(mx) {
			mx = v
		}
	}
	if mx == 0 {
		return c, false
	}
	s := make([]float64, len(c))
	for i, v := range c {
		s[i] = v / mx
	}
	for q := 1.0; q <= 6; q++ {
		ok := true
		r := make([]float64, len(s))
		for i, v := range s {
			r[i] = math.Round(q * v)
			if math.Abs(q*v-r[i]) > 0.05 {
				ok = false
				break
			}
		}
		if ok {
			return r, true
		}
	}
	return s, false
}

// productForm writes the combination sum c_i ln x_i as a product
// x_a^c_a * x_b / x_c, with exponents rounded to small integers when they
// are close to them.
func productForm(c []float64, block []int, label func(int) string) string {
	r, integral := rationalise(c)
	var num, den []string
	for a, j := range block {
		e := r[a]
		if math.Abs(e) < 0.05 {
			continue
		}
		term := label(j)
		ae := math.Abs(e)
		if integral && ae != 1 {
			term += fmt.Sprintf("^%g", ae)
		} else if !integral && math.Abs(ae-1) > 1e-9 {
			term += fmt.Sprintf("^%.3g", ae)
		}
		if e > 0 {
			num = append(num, term)
		} else {
			den = append(den, term)
		}
	}
	s := strings.Join(num, "*")
	if s == "" {
		s = "1"
	}
	if len(den) > 0 {
		s += "/" + strings.Join(den, "/")
	}
	return s
}

// moveForm writes a flat direction as the factors the parameters are
// multiplied by: "k3 x e^t, k5 x e^-t".
func moveForm(v []float64, block []int, label func(int) string) string {
	r, _ := rationalise(v)
	var parts []string
	for a, j := range block {
		if math.Abs(r[a]) < 0.05 {
			continue
		}
		parts = append(parts, fmt.Sprintf("%s x e^(%.3g t)", label(j), r[a]))
	}
	return strings.Join(parts, ", ")
}

// StructuralLimit is the empirical number of rate combinations that the
// record of one visible edge of an N-state network can determine:
// 4N - 6. It is an empirical count (from the number of exponential
// modes and amplitudes of the gap densities), not a theorem.
func StructuralLimit(states int) int { return 4*states - 6 }
