package infer

import (
	"fmt"
	"math"
	"slices"
	"strings"

	"edgewise/models"

	"gonum.org/v1/gonum/stat/distuv"
)

// NestedTest is the likelihood-ratio test of a candidate nested in
// another.
type NestedTest struct {
	Small, Large string
	How          string // how the nesting was found
	LR           float64
	DF           int // difference of the numbers of free parameters
	// Boundary is the number of parameters the small scheme holds at a
	// bound of the large one's space (rates of absent edges at zero).
	Boundary int
	P        float64
	Method   string
	Adjusted float64 // Holm over all the nested tests of the comparison
	Reject   bool    // Adjusted <= 0.05
}

// NestedTests finds the nested pairs among the fitted candidates and
// tests each by the likelihood ratio. Nesting is found from the specs:
//
//   - the same states (by name) and the same graph, with every rate of the
//     larger scheme free and untied and no affinity constraint in it: the
//     smaller one's ties, fixed values and constraints restrict the
//     larger's space;
//   - or the smaller graph is a sub-graph of the larger (same states, a
//     subset of its edges with the same labels), the larger fully free as
//     above: the smaller is the larger with the missing edges' rates at 0,
//     a point on the boundary of its space.
//
// Without a boundary, 2 ln LR is asymptotically chi-square on DF degrees
// of freedom. With k rates tested at zero, it is the chi-bar-square
// mixture sum_{i=0..k} C(k, i) 2^-k chi2_{DF-k+i} (Self and Liang, JASA 82,
// 605 (1987); exact when the k boundary directions are orthogonal in the
// information, an approximation otherwise). The p-values are Holm-adjusted
// over all the pairs (family-wise 5%).
func NestedTests(rs []Ranked) []NestedTest {
	var out []NestedTest
	for i := range rs {
		for j := range rs {
			if i == j || rs[i].Fit == nil || rs[j].Fit == nil {
				continue
			}
			small, large := rs[i], rs[j]
			how, missing, ok := nestedIn(small.Model, large.Model)
			if !ok {
				continue
			}
			// Degrees of freedom: the difference of the free-parameter
			// counts. (The effective counts of the ranking depend on the
			// data: rates running to zero under the null make their
			// directions flat, which would hide the very parameters
			// under test.)
			df := len(large.Fit.Free) - len(small.Fit.Free)
			if df < 1 {
				continue
			}
			k := min(2*missing, df)
			lr := math.Max(0, 2*(large.Fit.LogLik-small.Fit.LogLik))
			t := NestedTest{Small: small.Name, Large: large.Name, How: how, LR: lr, DF: df, Boundary: k, P: chiBarSquareSF(lr, df, k)}
			t.Method = fmt.Sprintf("likelihood ratio, chi-square(%d)", df)
			if k > 0 {
				t.Method = fmt.Sprintf("likelihood ratio, chi-bar-square: %d rates at zero (Self and Liang 1987)", k)
			}
			out = append(out, t)
		}
	}
	ps := make([]float64, len(out))
	for i, t := range out {
		ps[i] = t.P
	}
	adj := Holm(ps)
	for i := range out {
		out[i].Adjusted = adj[i]
		out[i].Reject = adj[i] <= 0.05
	}
	return out
}

// chiBarSquareSF is P(X >= x) for the mixture sum_{i=0..k} C(k,i) 2^-k
// chi2_{df-k+i} (chi2_0 a point mass at 0).
func chiBarSquareSF(x float64, df, k int) float64 {
	if k == 0 {
		return distuv.ChiSquared{K: float64(df)}.Survival(x)
	}
	p := 0.0
	w := math.Pow(2, -float64(k))
	binom := 1.0
	for i := 0; i <= k; i++ {
		if i > 0 {
			binom = binom * float64(k-i+1) / float64(i)
		}
		d := df - k + i
		var s float64
		switch {
		case d == 0:
			if x <= 0 {
				s = 1
			}
		default:
			s = distuv.ChiSquared{K: float64(d)}.Survival(x)
		}
		p += w * binom * s
	}
	return p
}

// edgeKey is an edge by its states' names (sorted) and the labels of its
// two directions in that order.
func edgeKeys(m *models.Model) []string {
	var ks []string
	for _, e := range m.Edges {
		a, b := e.Between[0], e.Between[1]
		la, lb := e.Labels[0], e.Labels[1]
		if a > b {
			a, b, la, lb = b, a, lb, la
		}
		ks = append(ks, a+"|"+b+"|"+la+"|"+lb)
	}
	slices.Sort(ks)
	return ks
}

// fullyFree reports whether every rate of m is its own free parameter and
// m has no affinity constraint.
func fullyFree(m *models.Model) bool {
	if len(m.Affinities) > 0 {
		return false
	}
	uses := map[string]int{}
	for _, e := range m.Edges {
		for d := 0; d < 2; d++ {
			if d == 1 && e.OneWay {
				continue
			}
			uses[e.Rates[d]]++
		}
	}
	for _, p := range m.Params {
		if p.Kind == models.RateParam && (p.Fixed || uses[p.Name] != 1) {
			return false
		}
	}
	return true
}

// nestedIn reports whether small is nested in large (see NestedTests),
// how, and how many of large's edges small lacks.
func nestedIn(small, large *models.Model) (string, int, bool) {
	ss, ls := slices.Clone(small.States), slices.Clone(large.States)
	slices.Sort(ss)
	slices.Sort(ls)
	if !slices.Equal(ss, ls) || !fullyFree(large) {
		return "", 0, false
	}
	se, le := edgeKeys(small), edgeKeys(large)
	// Multiset inclusion of se in le.
	rest := slices.Clone(le)
	for _, k := range se {
		i := slices.Index(rest, k)
		if i < 0 {
			return "", 0, false
		}
		rest = slices.Delete(rest, i, i+1)
	}
	if len(rest) == 0 {
		if fullyFree(small) {
			return "", 0, false // the same scheme
		}
		return "same graph, with ties, fixed rates or affinity constraints", 0, true
	}
	var names []string
	for _, k := range rest {
		f := strings.Split(k, "|")
		names = append(names, f[0]+"-"+f[1])
	}
	return "sub-graph: the larger scheme without edge(s) " + strings.Join(names, ", "), len(rest), true
}
