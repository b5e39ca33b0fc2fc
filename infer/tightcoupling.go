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

// CyclePath is a cycle of a model: its closed state list
// [s0, s1, ..., s0] and the index into Model.Edges of every step
// (len(States) - 1 entries). The edges matter when parallel edges join two
// states of the cycle; otherwise the states alone fix it.
type CyclePath struct {
	States []string
	Edges  []int
}

// String writes the cycle as "A-B-C-A", followed by " via edges 0, 3"
// when a step runs along one of several parallel edges.
func (c CyclePath) String() string {
	return models.AffinitySpec{Cycle: c.States, Edges: c.Edges}.CycleName()
}

// VisibleCycles returns the state lists of VisibleCyclePaths: every simple
// cycle of m that crosses the directed edge carrying plus, in its
// direction, as closed state lists [tail, head, ..., tail]. With parallel
// edges two cycles can share a state list (a step along either channel);
// VisibleCyclePaths tells them apart.
func VisibleCycles(m *models.Model, plus string) ([][]string, error) {
	paths, err := VisibleCyclePaths(m, plus)
	if err != nil {
		return nil, err
	}
	out := make([][]string, len(paths))
	for i, p := range paths {
		out[i] = p.States
	}
	return out, nil
}

// VisibleCyclePaths returns every simple cycle of m that crosses the
// directed edge carrying the label plus, in its direction: shortest first,
// then in the order of the states' names, then of the edge indices. A
// simple cycle visits each state once and runs along each edge once, so a
// hidden edge parallel to the visible one closes a cycle of two states. A
// graph without such a cycle (a chain) gives none. Edges is set when a
// step of the cycle joins two states that parallel edges join, and nil
// otherwise (the states then fix the cycle). It fails when plus is not on
// exactly one directed edge, or beyond 100000 cycles.
func VisibleCyclePaths(m *models.Model, plus string) ([]CyclePath, error) {
	tail, head, err := visibleEnds(m, plus)
	if err != nil {
		return nil, err
	}
	ve := slices.IndexFunc(m.Edges, func(e models.EdgeSpec) bool { return e.Labels[0] == plus || e.Labels[1] == plus })
	n := len(m.States)
	idx := map[string]int{}
	for i, s := range m.States {
		idx[s] = i
	}
	type hop struct{ to, edge int }
	adj := make([][]hop, n)
	pairs := map[[2]int]int{} // edges per unordered pair of states
	for k, e := range m.Edges {
		a, b := idx[e.Between[0]], idx[e.Between[1]]
		adj[a] = append(adj[a], hop{b, k})
		adj[b] = append(adj[b], hop{a, k})
		pairs[[2]int{min(a, b), max(a, b)}]++
	}
	for _, a := range adj {
		slices.SortFunc(a, func(x, y hop) int {
			if c := strings.Compare(m.States[x.to], m.States[y.to]); c != 0 {
				return c
			}
			return x.edge - y.edge
		})
	}
	// Simple paths head -> tail that do not use the visible edge itself.
	var out []CyclePath
	on := make([]bool, n)
	path, edges := []int{tail, head}, []int{ve}
	on[tail], on[head] = true, true
	emit := func() {
		c := CyclePath{States: make([]string, 0, len(path)+1)}
		ambiguous := false
		for i, p := range path {
			c.States = append(c.States, m.States[p])
			q := path[(i+1)%len(path)]
			ambiguous = ambiguous || pairs[[2]int{min(p, q), max(p, q)}] > 1
		}
		c.States = append(c.States, m.States[tail])
		if ambiguous {
			c.Edges = slices.Clone(edges)
		}
		out = append(out, c)
	}
	var walk func(s int) error
	walk = func(s int) error {
		for _, h := range adj[s] {
			if h.edge == ve {
				continue
			}
			if h.to == tail {
				edges = append(edges, h.edge)
				emit()
				edges = edges[:len(edges)-1]
				if len(out) > maxVisibleCycles {
					return fmt.Errorf("model %s: more than %d cycles cross the visible edge; give the cycles' affinities one by one in the spec", m.Name, maxVisibleCycles)
				}
				continue
			}
			if on[h.to] {
				continue
			}
			on[h.to] = true
			path, edges = append(path, h.to), append(edges, h.edge)
			if err := walk(h.to); err != nil {
				return err
			}
			path, edges = path[:len(path)-1], edges[:len(edges)-1]
			on[h.to] = false
		}
		return nil
	}
	if err := walk(head); err != nil {
		return nil, err
	}
	slices.SortStableFunc(out, func(a, b CyclePath) int { return len(a.States) - len(b.States) })
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
	cycles, err := VisibleCyclePaths(m, plus)
	if err != nil {
		return nil, err
	}
	if len(cycles) == 0 {
		return cloneModel(m), nil
	}
	return imposeAffinity(m, cycles, plus, value, fmt.Sprintf("tight coupling: every cycle crossing %q once has affinity %g k_BT", plus, value))
}

// KnownCycle is a cycle whose affinity the user knows: chemical driving
// minus load times step, in k_BT.
type KnownCycle struct {
	States []string // closed: States[0] == States[len-1], e.g. A, B, C, A
	Value  float64
}

// String writes "A-B-C-A=4".
func (k KnownCycle) String() string {
	return fmt.Sprintf("%s=%g", strings.Join(k.States, "-"), k.Value)
}

// WithKnownCycles returns a copy of m with each known cycle that m has (by
// its states, in either direction: the reverse cycle has the opposite
// affinity) held at its value by an affinity constraint, and the number of
// cycles imposed; cycles m does not have are skipped. plus names the
// visible edge's forward label (its rates are solved only as a last
// resort).
func WithKnownCycles(m *models.Model, plus string, known []KnownCycle) (*models.Model, int, error) {
	out, n := m, 0
	for _, k := range known {
		if _, err := out.CycleSteps(k.States, nil); err != nil {
			continue
		}
		mc, err := imposeAffinity(out, []CyclePath{{States: k.States}}, plus, k.Value, "known affinity "+k.String())
		if err != nil {
			return nil, 0, err
		}
		if len(mc.Affinities) > len(out.Affinities) {
			n++
		}
		out = mc
	}
	return out, n, nil
}

// imposeAffinity adds to a copy of m one affinity constraint at value per
// cycle of a maximal independent subset of cycles (see TightCoupling for
// the choice of the solved rate); desc is appended to the description.
func imposeAffinity(m *models.Model, cycles []CyclePath, plus string, value float64, desc string) (*models.Model, error) {
	out := cloneModel(m)
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
		c, err := cycleCoef(m, CyclePath{a.Cycle, a.Edges})
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
			return nil, fmt.Errorf("model %s: its affinity constraints fix cycle %s at %.6g k_BT, which contradicts the known affinity %g", m.Name, cyc, implied, value)
		}
		s := chooseSolve(m, cyc, coef, rows, solved, params, visible)
		if s == "" {
			return nil, fmt.Errorf("model %s: no free rate of cycle %s can be solved from the constraint alongside the model's other constraints", m.Name, cyc)
		}
		rows, vals, solved = append(rows, coef), append(vals, value), append(solved, s)
		out.Affinities = append(out.Affinities, models.AffinitySpec{Cycle: cyc.States, Edges: cyc.Edges, Value: value, Solve: s})
		delete(params, s)
	}
	out.Params = out.Params[:0]
	for _, p := range m.Params {
		if _, ok := params[p.Name]; ok {
			out.Params = append(out.Params, p)
		}
	}
	out.Description = strings.TrimSpace(fmt.Sprintf("%s; %s", m.Description, desc))
	parsed, err := roundTrip(out)
	if err != nil {
		return nil, fmt.Errorf("model %s with %s: %w", m.Name, desc, err)
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
// the cycle.
func cycleSteps(m *models.Model, cyc CyclePath, f func(e, dir int)) error {
	steps, err := m.CycleSteps(cyc.States, cyc.Edges)
	if err != nil {
		return fmt.Errorf("model %s: cycle %s: %w", m.Name, cyc, err)
	}
	for _, st := range steps {
		dir := 0
		if !st.Forward {
			dir = 1
		}
		f(st.Edge, dir)
	}
	return nil
}

// cycleEdgeVector returns the oriented edge vector of a cycle: +1 for an
// edge run From->To, -1 for To->From.
func cycleEdgeVector(m *models.Model, cyc CyclePath) ([]float64, error) {
	v := make([]float64, len(m.Edges))
	err := cycleSteps(m, cyc, func(e, dir int) { v[e] += 1 - 2*float64(dir) })
	return v, err
}

// cycleCoef returns the coefficients of ln(rate parameter) in the cycle's
// affinity (forward rates +1, backward -1; ties add up).
func cycleCoef(m *models.Model, cyc CyclePath) (map[string]float64, error) {
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
func chooseSolve(m *models.Model, cyc CyclePath, coef map[string]float64, rows []map[string]float64, solved []string, params map[string]models.Param, visible map[string]bool) string {
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
