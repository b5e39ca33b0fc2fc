package infer

import (
	"fmt"
	"maps"
	"math"
	"slices"
	"strings"

	"edgewise/models"

	"gonum.org/v1/gonum/mat"
)

// A known force for a whole family: the tight-coupling assumption.
//
// A user who knows the free energy that drives one forward step of the
// visible edge (for a motor: the chemical potential of one fuel molecule
// minus load times step, in k_BT) can impose it on candidates that were not
// written by hand by assuming tight coupling: every cycle that crosses the
// visible edge once in the + direction consumes exactly one unit of
// driving, so every such cycle has the same affinity, the known value.
// Cycles that avoid the visible edge (a futile side loop, a slip pathway
// that never steps) are left free.
//
// In log-rates the assumption is linear: A(z) = value * z_+ for every cycle
// z of the biconnected part of the graph that holds the visible edge, z_+
// the number of + crossings. Two consequences to keep in mind: a cycle of
// that part that does not cross the visible edge has affinity 0 under the
// assumption (it is the difference of two crossing cycles: in a ring with
// a chord, the cycle made by the chord and the far side of the ring), and
// a machine that slips (a cycle crossing the visible edge with another
// stoichiometry) violates it; give per-cycle affinities in a spec instead.

// maxVisibleCycles bounds the number of cycles VisibleCycles lists.
const maxVisibleCycles = 100000

// VisibleCycles returns every simple cycle of m that crosses the directed
// edge carrying the label plus, in its direction, as closed state lists
// [tail, head, ..., tail]: shortest first, then in the order of the
// states' names. A graph without such a cycle (a chain) gives none. It
// fails when plus is not on exactly one directed edge, when two edges join
// the same pair of states, or beyond 100000 cycles.
func VisibleCycles(m *models.Model, plus string) ([][]string, error) {
	tail, head, err := visibleEnds(m, plus)
	if err != nil {
		return nil, err
	}
	n := len(m.States)
	idx := map[string]int{}
	for i, s := range m.States {
		idx[s] = i
	}
	adj := make([][]int, n)
	seen := map[[2]int]bool{}
	for _, e := range m.Edges {
		a, b := idx[e.Between[0]], idx[e.Between[1]]
		key := [2]int{min(a, b), max(a, b)}
		if seen[key] {
			return nil, fmt.Errorf("model %s: two edges join %s and %s; give the cycles' affinities one by one in the spec", m.Name, e.Between[0], e.Between[1])
		}
		seen[key] = true
		adj[a] = append(adj[a], b)
		adj[b] = append(adj[b], a)
	}
	for _, a := range adj {
		slices.SortFunc(a, func(x, y int) int { return strings.Compare(m.States[x], m.States[y]) })
	}
	// Simple paths head -> tail of at least two steps (one step would be
	// the visible edge itself).
	var out [][]string
	on := make([]bool, n)
	path := []int{tail, head}
	on[tail], on[head] = true, true
	var walk func(s int) error
	walk = func(s int) error {
		for _, t := range adj[s] {
			if t == tail && len(path) > 2 {
				cyc := make([]string, 0, len(path)+1)
				for _, p := range path {
					cyc = append(cyc, m.States[p])
				}
				out = append(out, append(cyc, m.States[tail]))
				if len(out) > maxVisibleCycles {
					return fmt.Errorf("model %s: more than %d cycles cross the visible edge; give the cycles' affinities one by one in the spec", m.Name, maxVisibleCycles)
				}
				continue
			}
			if on[t] {
				continue
			}
			on[t] = true
			path = append(path, t)
			if err := walk(t); err != nil {
				return err
			}
			path = path[:len(path)-1]
			on[t] = false
		}
		return nil
	}
	if err := walk(head); err != nil {
		return nil, err
	}
	slices.SortStableFunc(out, func(a, b []string) int { return len(a) - len(b) })
	return out, nil
}

// TightCoupling returns a copy of m under the tight-coupling assumption:
// every cycle that crosses the visible edge (the directed edge carrying
// plus) once in the + direction has the affinity value (k_BT). It adds one
// affinity constraint per cycle of a maximal independent set of such
// cycles (shortest cycles first), each solving one rate parameter of its
// cycle, preferably the rate against the cycle's direction on the step
// that closes it, never a fixed rate and the visible edge's rates only as
// a last resort; the solved parameters leave the parameter list, as in a
// spec. Existing constraints are kept and must not contradict the new
// ones. A model with no cycle through the visible edge is returned
// unchanged. The result passes every check of the models package (it is
// written as a spec and parsed back). See the package notes above for what
// the assumption implies and when it fails.
func TightCoupling(m *models.Model, plus string, value float64) (*models.Model, error) {
	if math.IsNaN(value) || math.IsInf(value, 0) {
		return nil, fmt.Errorf("model %s: known affinity %v is not a finite number", m.Name, value)
	}
	cycles, err := VisibleCycles(m, plus)
	if err != nil {
		return nil, err
	}
	out := cloneModel(m)
	if len(cycles) == 0 {
		return out, nil
	}
	params := map[string]models.Param{}
	for _, p := range m.Params {
		params[p.Name] = p
	}
	visible := map[string]bool{}
	for _, e := range m.Edges {
		if e.Labels[0] == plus || e.Labels[1] == plus {
			visible[e.Rates[0]], visible[e.Rates[1]] = true, true
		}
	}
	var rows []map[string]float64 // log-rate coefficients of every constraint
	var vals []float64
	var solved []string
	for _, a := range m.Affinities {
		c, err := cycleCoef(m, a.Cycle)
		if err != nil {
			return nil, err
		}
		rows, vals, solved = append(rows, c), append(vals, a.Value), append(solved, a.Solve)
	}
	var basis [][]float64 // reduced edge vectors of the chosen cycles
	for _, cyc := range cycles {
		ev, err := cycleEdgeVector(m, cyc)
		if err != nil {
			return nil, err
		}
		if !reduceAppend(&basis, ev) {
			continue // a combination of cycles already chosen
		}
		coef, err := cycleCoef(m, cyc)
		if err != nil {
			return nil, err
		}
		if y, ok := inSpan(rows, coef); ok {
			implied := 0.0
			for i, v := range y {
				implied += v * vals[i]
			}
			if math.Abs(implied-value) <= 1e-9*(1+math.Abs(value)) {
				continue // the model's constraints already give this value
			}
			return nil, fmt.Errorf("model %s: its affinity constraints fix cycle %s at %.6g k_BT, which contradicts the known affinity %g", m.Name, strings.Join(cyc, "-"), implied, value)
		}
		s := chooseSolve(m, cyc, coef, rows, solved, params, visible)
		if s == "" {
			return nil, fmt.Errorf("model %s: no free rate of cycle %s can be solved from the tight-coupling constraint alongside the model's other constraints", m.Name, strings.Join(cyc, "-"))
		}
		rows, vals, solved = append(rows, coef), append(vals, value), append(solved, s)
		out.Affinities = append(out.Affinities, models.AffinitySpec{Cycle: cyc, Value: value, Solve: s})
		delete(params, s)
	}
	out.Params = out.Params[:0]
	for _, p := range m.Params {
		if _, ok := params[p.Name]; ok {
			out.Params = append(out.Params, p)
		}
	}
	out.Description = strings.TrimSpace(fmt.Sprintf("%s; tight coupling: every cycle crossing %q once has affinity %g k_BT", m.Description, plus, value))
	parsed, err := roundTrip(out)
	if err != nil {
		return nil, fmt.Errorf("model %s with tight coupling: %w", m.Name, err)
	}
	return parsed, nil
}

// cloneModel returns a deep copy of m.
func cloneModel(m *models.Model) *models.Model {
	c := *m
	c.States = slices.Clone(m.States)
	c.Edges = slices.Clone(m.Edges)
	c.Params = slices.Clone(m.Params)
	c.Labels = slices.Clone(m.Labels)
	c.Affinities = make([]models.AffinitySpec, len(m.Affinities))
	for i, a := range m.Affinities {
		a.Cycle = slices.Clone(a.Cycle)
		c.Affinities[i] = a
	}
	return &c
}

// cycleSteps calls f with the edge index and direction of every step of
// the closed state list cyc.
func cycleSteps(m *models.Model, cyc []string, f func(e, dir int)) error {
	for i := 0; i+1 < len(cyc); i++ {
		found := false
		for e, es := range m.Edges {
			switch {
			case es.Between[0] == cyc[i] && es.Between[1] == cyc[i+1]:
				f(e, 0)
			case es.Between[1] == cyc[i] && es.Between[0] == cyc[i+1]:
				f(e, 1)
			default:
				continue
			}
			if es.OneWay {
				return fmt.Errorf("model %s: cycle %s runs through the one-way edge %s-%s, so its affinity is infinite and cannot be set", m.Name, strings.Join(cyc, "-"), es.Between[0], es.Between[1])
			}
			found = true
			break
		}
		if !found {
			return fmt.Errorf("model %s: no edge joins %s and %s", m.Name, cyc[i], cyc[i+1])
		}
	}
	return nil
}

// cycleEdgeVector returns the oriented edge vector of a cycle: +1 for an
// edge run From->To, -1 for To->From.
func cycleEdgeVector(m *models.Model, cyc []string) ([]float64, error) {
	v := make([]float64, len(m.Edges))
	err := cycleSteps(m, cyc, func(e, dir int) { v[e] += 1 - 2*float64(dir) })
	return v, err
}

// cycleCoef returns the coefficients of ln(rate parameter) in the cycle's
// affinity (forward rates +1, backward -1; ties add up).
func cycleCoef(m *models.Model, cyc []string) (map[string]float64, error) {
	c := map[string]float64{}
	err := cycleSteps(m, cyc, func(e, dir int) {
		c[m.Edges[e].Rates[dir]]++
		c[m.Edges[e].Rates[1-dir]]--
	})
	for k, v := range c {
		if v == 0 {
			delete(c, k)
		}
	}
	return c, err
}

// reduceAppend reduces v against the echelon rows of basis and appends
// the remainder when it is not zero, reporting whether it did. Entries are
// small integers, so exact zeros are recognised with a tolerance of 1e-9.
func reduceAppend(basis *[][]float64, v []float64) bool {
	r := slices.Clone(v)
	for _, b := range *basis {
		p := slices.IndexFunc(b, func(x float64) bool { return math.Abs(x) > 1e-9 })
		if f := r[p] / b[p]; f != 0 {
			for i := range r {
				r[i] -= f * b[i]
			}
		}
	}
	if !slices.ContainsFunc(r, func(x float64) bool { return math.Abs(x) > 1e-9 }) {
		return false
	}
	*basis = append(*basis, r)
	return true
}

// inSpan reports whether the coefficient row coef is a linear combination
// of rows (least squares, relative residual below 1e-9), and the weights.
func inSpan(rows []map[string]float64, coef map[string]float64) ([]float64, bool) {
	if len(rows) == 0 {
		return nil, false
	}
	set := map[string]bool{}
	for _, r := range append(slices.Clone(rows), coef) {
		for k := range r {
			set[k] = true
		}
	}
	names := slices.Sorted(maps.Keys(set))
	b := mat.NewDense(len(names), len(rows), nil)
	target := mat.NewVecDense(len(names), nil)
	for i, k := range names {
		for j, r := range rows {
			b.Set(i, j, r[k])
		}
		target.SetVec(i, coef[k])
	}
	var y, fit mat.VecDense
	if err := y.SolveVec(b, target); err != nil {
		return nil, false
	}
	fit.MulVec(b, &y)
	fit.SubVec(&fit, target)
	if mat.Norm(&fit, 2) > 1e-9*mat.Norm(target, 2) {
		return nil, false
	}
	return y.RawVector().Data, true
}

// chooseSolve picks the rate to solve from a new constraint with
// coefficients coef: a free, unsolved rate parameter of the cycle whose
// choice keeps the solved block of all constraints (rows, with solves
// solved, plus this one) well conditioned. Preference: the rates against
// the cycle's direction from the closing step backwards, then the
// forward rates likewise, the visible edge's last.
func chooseSolve(m *models.Model, cyc []string, coef map[string]float64, rows []map[string]float64, solved []string, params map[string]models.Param, visible map[string]bool) string {
	var steps [][2]int
	_ = cycleSteps(m, cyc, func(e, dir int) { steps = append(steps, [2]int{e, dir}) })
	var cands, last []string
	for pass := 0; pass < 2; pass++ {
		for i := len(steps) - 1; i >= 0; i-- {
			e, dir := steps[i][0], steps[i][1]
			name := m.Edges[e].Rates[1-dir]
			if pass == 1 {
				name = m.Edges[e].Rates[dir]
			}
			p, ok := params[name]
			if !ok || p.Fixed || p.Kind != models.RateParam || coef[name] == 0 || slices.Contains(cands, name) || slices.Contains(last, name) {
				continue
			}
			if visible[name] {
				last = append(last, name)
			} else {
				cands = append(cands, name)
			}
		}
	}
	all := append(slices.Clone(rows), coef)
	for _, s := range append(cands, last...) {
		cols := append(slices.Clone(solved), s)
		k := len(all)
		cs := mat.NewDense(k, k, nil)
		for i, r := range all {
			for j, name := range cols {
				cs.Set(i, j, r[name])
			}
		}
		var lu mat.LU
		lu.Factorize(cs)
		if c := lu.Cond(); !math.IsInf(c, 0) && c < 1e10 {
			return s
		}
	}
	return ""
}
