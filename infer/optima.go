package infer

import (
	"math"
	"slices"
)

// startGroup is a set of converged starts that ended at the same ln L.
type startGroup struct {
	members    []int
	x          []float64
	ll         float64
	equivalent bool
}

// groupStarts clusters the converged starts by ln L (within
// sameOptimumTol), best first; ties in ln L at different parameters are
// flagged as equivalent optima.
func groupStarts(sr []StartResult, ob *objective) []startGroup {
	var idx []int
	for i, s := range sr {
		if s.Converged && !math.IsNaN(s.LogLik) && !math.IsInf(s.LogLik, 0) {
			idx = append(idx, i)
		}
	}
	slices.SortStableFunc(idx, func(a, b int) int {
		switch {
		case sr[a].LogLik > sr[b].LogLik:
			return -1
		case sr[a].LogLik < sr[b].LogLik:
			return 1
		}
		return a - b
	})
	var gs []startGroup
	for _, i := range idx {
		placed := false
		for g := range gs {
			if math.Abs(gs[g].ll-sr[i].LogLik) <= sameOptimumTol {
				gs[g].members = append(gs[g].members, i)
				if maxLogDiff(gs[g].x, sr[i].X) > 0.05 {
					gs[g].equivalent = true
				}
				placed = true
				break
			}
		}
		if !placed {
			gs = append(gs, startGroup{members: []int{i}, x: sr[i].X, ll: sr[i].LogLik})
		}
	}
	return gs
}

func maxLogDiff(a, b []float64) float64 {
	m := 0.0
	for i := range a {
		m = math.Max(m, math.Abs(math.Log(a[i])-math.Log(b[i])))
	}
	return m
}

// mergeOptima sorts the optima by ln L on all the data and merges those
// that refinement brought to the same ln L.
func mergeOptima(res *FitResult) {
	order := allIndex(len(res.Optima))
	slices.SortStableFunc(order, func(a, b int) int {
		la, lb := res.Optima[a].LogLik, res.Optima[b].LogLik
		switch {
		case la > lb:
			return -1
		case la < lb:
			return 1
		}
		return a - b
	})
	newIdx := make([]int, len(res.Optima))
	var out []Optimum
	for _, o := range order {
		op := res.Optima[o]
		merged := false
		for k := range out {
			if op.Refined && out[k].Refined && math.Abs(out[k].LogLik-op.LogLik) <= sameOptimumTol {
				out[k].Starts += op.Starts
				if maxLogDiff(out[k].X, op.X) > 0.05 {
					out[k].Equivalent = true
				}
				newIdx[o] = k
				merged = true
				break
			}
		}
		if !merged {
			newIdx[o] = len(out)
			out = append(out, op)
		}
	}
	res.Optima = out
	for i := range res.Starts {
		if g := res.Starts[i].Optimum; g >= 0 {
			res.Starts[i].Optimum = newIdx[g]
		}
	}
}
