package models

import (
	"errors"
	"fmt"
	"math"
	"slices"
	"strings"

	"gonum.org/v1/gonum/mat"
)

// Affinity constraints live in log space. Write a = ln p for the value of
// each rate parameter. The affinity of a cycle is linear in a,
//
//	A_C = sum_steps (ln w_forward - ln w_backward) = sum_j c_Cj a_j,
//
// with integer coefficients c_Cj (a tied name may appear several times). For
// k constraints with values v and solved parameters S (one per constraint),
// split c into the solved columns C_S (k x k) and the rest C_R:
//
//	a_S = C_S^{-1} (v - C_R a_R),
//
// so every constraint holds exactly for every value of the other parameters.
// The system is valid when the rows of c are linearly independent (else two
// constraints repeat or contradict each other) and C_S is invertible.

// affinitySystem is the linear system of a model's affinity constraints.
type affinitySystem struct {
	names []string // rate parameter names with a coefficient in some constraint
	col   map[string]int
	c     *mat.Dense // k x len(names) coefficients
	v     []float64  // constraint values
	solve []int      // column of the solved parameter of each constraint
	lu    mat.LU     // of C_S
}

// SolveError reports that affinity constraint Index (0-based) cannot be
// met with finite rates at the given parameter values.
type SolveError struct {
	Index int
	Msg   string
}

func (e *SolveError) Error() string { return fmt.Sprintf("affinity[%d]: %s", e.Index, e.Msg) }

// constraintError is one problem with an affinity constraint.
type constraintError struct {
	index int    // constraint, 0-based
	field string // "cycle", "solve", "value"
	msg   string
}

// edgesError marks a problem with an affinity's edges list (reported at
// the key affinity[i].edges rather than .cycle).
type edgesError struct{ msg string }

func (e *edgesError) Error() string { return e.msg }

// edgeName names edge i of the model for messages: "edge[2] (A-B, rates
// s1, r1)".
func (m *Model) edgeName(i int) string {
	e := m.Edges[i]
	r := e.Rates[0]
	if !e.OneWay {
		r += ", " + e.Rates[1]
	}
	return fmt.Sprintf("edge[%d] (%s-%s, rates %s)", i, e.Between[0], e.Between[1], r)
}

// CycleName returns the constraint's cycle as "A-B-C-A", followed by
// " via edges 0, 1, 2" when it names the edge of every step.
func (a AffinitySpec) CycleName() string {
	s := strings.Join(a.Cycle, "-")
	if a.Edges != nil {
		s += " via edges " + joinInts(a.Edges)
	}
	return s
}

// CycleSteps resolves a closed state list (cycle[0] == cycle[len-1]) to
// the edge steps it takes. edges, when not nil, gives the index into
// m.Edges of every step (len(cycle) - 1 entries); it is required when a
// step joins two states that parallel edges join, and checked otherwise.
// A cycle visits each state once (the closing repeat aside) and runs along
// each edge once, so it has at least two distinct states, and exactly two
// only along two parallel edges. A step along a one-way edge is an error:
// the cycle's affinity is infinite.
func (m *Model) CycleSteps(cycle []string, edges []int) ([]Step, error) {
	n := len(cycle)
	if n < 3 || cycle[0] != cycle[n-1] {
		return nil, fmt.Errorf("states %v do not form a cycle: need at least two distinct states, returning to the first", cycle)
	}
	known := map[string]bool{}
	for _, s := range m.States {
		known[s] = true
	}
	seen := map[string]bool{}
	for _, s := range cycle[:n-1] {
		if !known[s] {
			return nil, fmt.Errorf("unknown state %q", s)
		}
		if seen[s] {
			return nil, fmt.Errorf("states %v do not form a cycle: %q is visited twice", cycle, s)
		}
		seen[s] = true
	}
	if edges != nil && len(edges) != n-1 {
		return nil, &edgesError{fmt.Sprintf("%d edge indices for the %d steps of the cycle %s; give one per step", len(edges), n-1, strings.Join(cycle, "-"))}
	}
	steps := make([]Step, n-1)
	used := map[int]int{} // edge -> step
	for i := 0; i+1 < n; i++ {
		a, b := cycle[i], cycle[i+1]
		var join []int
		for j, e := range m.Edges {
			if (e.Between[0] == a && e.Between[1] == b) || (e.Between[1] == a && e.Between[0] == b) {
				join = append(join, j)
			}
		}
		if len(join) == 0 {
			return nil, fmt.Errorf("states %v do not form a cycle: no edge joins %s and %s", cycle, a, b)
		}
		e := join[0]
		switch {
		case edges != nil:
			e = edges[i]
			if !slices.Contains(join, e) {
				names := make([]string, len(join))
				for k, j := range join {
					names[k] = fmt.Sprintf("edge[%d]", j)
				}
				what := fmt.Sprintf("there is no edge[%d] (the spec has %d edges, numbered from 0)", e, len(m.Edges))
				if e < len(m.Edges) {
					what = m.edgeName(e) + " does not join them"
				}
				verb := "joins"
				if len(join) > 1 {
					verb = "join"
				}
				return nil, &edgesError{fmt.Sprintf("step %d (%s to %s): %s; %s %s %s and %s", i+1, a, b, what, strings.Join(names, " and "), verb, a, b)}
			}
		case len(join) > 1:
			names := make([]string, len(join))
			for k, j := range join {
				names[k] = m.edgeName(j)
			}
			return nil, fmt.Errorf("states %s and %s are joined by the parallel edges %s, so the state list does not say which one the cycle takes; add edges = [...] with the index of the edge of every step (numbered from 0 in file order; %d entries)", a, b, strings.Join(names, " and "), n-1)
		}
		if k, dup := used[e]; dup {
			if n == 3 {
				return nil, fmt.Errorf("states %v do not form a cycle: a cycle of two states needs two parallel edges between them, out along one and back along the other (edges = [i, j])", cycle)
			}
			return nil, &edgesError{fmt.Sprintf("steps %d and %d both use edge[%d]; a cycle runs along each edge once", k+1, i+1, e)}
		}
		used[e] = i
		es := m.Edges[e]
		if es.OneWay {
			return nil, fmt.Errorf("the cycle runs through the one-way edge %s-%s, so its affinity is infinite and cannot be constrained", es.Between[0], es.Between[1])
		}
		steps[i] = Step{Edge: e, Forward: es.Between[0] == a}
	}
	return steps, nil
}

// cycleCoefficients returns the coefficients of ln(rate parameter) in the
// affinity of the constraint's cycle.
func (m *Model) cycleCoefficients(a AffinitySpec) (map[string]float64, error) {
	steps, err := m.CycleSteps(a.Cycle, a.Edges)
	if err != nil {
		return nil, err
	}
	coef := map[string]float64{}
	for _, st := range steps {
		d := 0
		if !st.Forward {
			d = 1
		}
		e := m.Edges[st.Edge]
		coef[e.Rates[d]]++
		coef[e.Rates[1-d]]--
	}
	for k, c := range coef {
		if c == 0 {
			delete(coef, k)
		}
	}
	return coef, nil
}

// checkAffinities validates the affinity constraints of a parsed model and
// returns one error per problem.
func (m *Model) checkAffinities() []constraintError {
	var errs []constraintError
	bad := func(i int, field, format string, a ...any) {
		errs = append(errs, constraintError{i, field, fmt.Sprintf(format, a...)})
	}
	fixed := map[string]bool{}
	for _, p := range m.Params {
		if p.Fixed {
			fixed[p.Name] = true
		}
	}
	solvedBy := map[string]int{}
	ok := true
	for i, a := range m.Affinities {
		coef, err := m.cycleCoefficients(a)
		if err != nil {
			field := "cycle"
			var ee *edgesError
			if errors.As(err, &ee) {
				field = "edges"
			}
			bad(i, field, "%v", err)
			ok = false
			continue
		}
		var cands []string
		for _, name := range sortedKeys(coef) {
			if !fixed[name] {
				cands = append(cands, name)
			}
		}
		switch {
		case len(coef) == 0:
			bad(i, "cycle", "the ties make this cycle's affinity identically 0; it cannot be constrained")
			ok = false
		case a.Solve == "":
			bad(i, "solve", "missing: name the rate this constraint determines (one of %s)", strings.Join(cands, ", "))
			ok = false
		case coef[a.Solve] == 0:
			bad(i, "solve", "%q is not a rate of this cycle (or it appears forward and backward and cancels); choose one of %s", a.Solve, strings.Join(cands, ", "))
			ok = false
		default:
			if j, dup := solvedBy[a.Solve]; dup {
				bad(i, "solve", "%q is already solved by affinity[%d]; each constraint needs its own rate", a.Solve, j)
				ok = false
			}
			solvedBy[a.Solve] = i
		}
	}
	if !ok || len(m.Affinities) == 0 {
		return errs
	}
	sys := m.buildSystem()
	// Linear independence of the constraint rows, one at a time: a row in
	// the span of the earlier rows either repeats or contradicts them.
	var basis []int
	for i := range m.Affinities {
		if len(basis) > 0 {
			y, res := project(sys.c, basis, i)
			if res < 1e-9 {
				implied := 0.0
				var with []string
				for k, b := range basis {
					implied += y[k] * sys.v[b]
					if math.Abs(y[k]) > 1e-9 {
						with = append(with, fmt.Sprintf("affinity[%d]", b))
					}
				}
				if math.Abs(implied-sys.v[i]) <= 1e-9*(1+math.Abs(implied)) {
					bad(i, "cycle", "repeats %s: that already fixes this cycle's affinity at %.6g k_BT", strings.Join(with, ", "), implied)
				} else {
					bad(i, "value", "contradicts %s: that fixes this cycle's affinity at %.6g k_BT, not %g", strings.Join(with, ", "), implied, sys.v[i])
				}
				continue
			}
		}
		basis = append(basis, i)
	}
	if len(errs) > 0 {
		return errs
	}
	if err := sys.factor(); err != nil {
		bad(len(m.Affinities)-1, "solve", "%v", err)
	}
	return errs
}

// project least-squares fits row i of c by the rows in basis and returns the
// coefficients and the relative residual norm.
func project(c *mat.Dense, basis []int, i int) ([]float64, float64) {
	_, n := c.Dims()
	b := mat.NewDense(n, len(basis), nil)
	for k, r := range basis {
		for j := 0; j < n; j++ {
			b.Set(j, k, c.At(r, j))
		}
	}
	target := mat.NewVecDense(n, mat.Row(nil, i, c))
	var y mat.VecDense
	if err := y.SolveVec(b, target); err != nil {
		return nil, math.Inf(1)
	}
	var fit mat.VecDense
	fit.MulVec(b, &y)
	fit.SubVec(&fit, target)
	return y.RawVector().Data, mat.Norm(&fit, 2) / math.Max(mat.Norm(target, 2), 1)
}

// buildSystem assembles the coefficients of the (already checked) affinity
// constraints.
func (m *Model) buildSystem() *affinitySystem {
	k := len(m.Affinities)
	coefs := make([]map[string]float64, k)
	set := map[string]bool{}
	for i, a := range m.Affinities {
		coefs[i], _ = m.cycleCoefficients(a)
		for name := range coefs[i] {
			set[name] = true
		}
	}
	sys := &affinitySystem{names: sortedKeys(set), col: map[string]int{}, v: make([]float64, k), solve: make([]int, k)}
	for j, name := range sys.names {
		sys.col[name] = j
	}
	sys.c = mat.NewDense(k, len(sys.names), nil)
	for i, a := range m.Affinities {
		for name, c := range coefs[i] {
			sys.c.Set(i, sys.col[name], c)
		}
		sys.v[i] = a.Value
		sys.solve[i] = sys.col[a.Solve]
	}
	return sys
}

// factor LU-factors C_S and reports when it is singular.
func (s *affinitySystem) factor() error {
	k := len(s.v)
	cs := mat.NewDense(k, k, nil)
	for i := 0; i < k; i++ {
		for j, col := range s.solve {
			cs.Set(i, j, s.c.At(i, col))
		}
	}
	s.lu.Factorize(cs)
	if cond := s.lu.Cond(); math.IsInf(cond, 0) || cond > 1e12 {
		var names []string
		for _, col := range s.solve {
			names = append(names, s.names[col])
		}
		return fmt.Errorf("the solved rates %s cannot all be computed from these constraints (they enter them in a linearly dependent way); choose other rates to solve", strings.Join(names, ", "))
	}
	return nil
}

// isSolved reports whether column j is a solved parameter.
func (s *affinitySystem) isSolved(j int) bool { return slices.Contains(s.solve, j) }

// apply computes the solved parameters from the others in val (which must
// hold every non-solved name of the system) and stores them in val.
func (s *affinitySystem) apply(val map[string]float64) error {
	k := len(s.v)
	rhs := mat.NewVecDense(k, append([]float64(nil), s.v...))
	for j, name := range s.names {
		if s.isSolved(j) {
			continue
		}
		a := math.Log(val[name])
		for i := 0; i < k; i++ {
			rhs.SetVec(i, rhs.AtVec(i)-s.c.At(i, j)*a)
		}
	}
	var y mat.VecDense
	if err := s.lu.SolveVecTo(&y, false, rhs); err != nil {
		return err
	}
	for i, col := range s.solve {
		w := math.Exp(y.AtVec(i))
		if !finitePositive(w) {
			return &SolveError{Index: i, Msg: fmt.Sprintf("solved rate %s = exp(%g) is out of floating-point range", s.names[col], y.AtVec(i))}
		}
		val[s.names[col]] = w
	}
	return nil
}

// values returns every parameter's value (declared and solved) for the
// free-parameter vector x.
func (m *Model) values(x []float64) (map[string]float64, error) {
	free := m.Free()
	if len(x) != len(free) {
		return nil, fmt.Errorf("model %s: %d free parameter values, want %d", m.Name, len(x), len(free))
	}
	val := map[string]float64{}
	k := 0
	for _, p := range m.Params {
		v := p.Value
		if !p.Fixed {
			v = x[k]
			k++
			if math.IsNaN(v) || math.IsInf(v, 0) || v <= 0 || (p.Kind == DetectParam && v > 1) {
				return nil, fmt.Errorf("model %s: parameter %s = %g is out of range", m.Name, p.Name, v)
			}
		}
		val[p.Name] = v
	}
	if len(m.Affinities) == 0 {
		return val, nil
	}
	sys := m.buildSystem()
	if err := sys.factor(); err != nil {
		return nil, fmt.Errorf("model %s: %w", m.Name, err)
	}
	if err := sys.apply(val); err != nil {
		return nil, fmt.Errorf("model %s: %w", m.Name, err)
	}
	return val, nil
}

// Values returns the value of every parameter, solved ones included, for
// the free-parameter vector x, by name.
func (m *Model) Values(x []float64) (map[string]float64, error) { return m.values(x) }

// Jacobian holds the derivatives of a model's network with respect to its
// free parameters x (in the order of Model.Free), for the chain rule from
// network-level gradients to parameter gradients:
//
//	d f/d x_j = sum_t (d f/d ln w_t) LogRate[t][j] / x_j + sum_l (d f/d p_l) Detect[l][j]
type Jacobian struct {
	// LogRate[2*e+d][j] = d ln w(edge e, direction d) / d ln x_j. Rows of
	// absent one-way directions are zero. For a tied rate the entry is 1,
	// for a fixed rate 0, and for an affinity-solved rate it is
	// -(C_S^{-1} C_R)_{s,j}: constant, because the constraints are linear
	// in log space.
	LogRate [][]float64
	// Detect[l][j] = d p_l / d x_j: 1 when label l's detection probability
	// is the free parameter j, else 0.
	Detect [][]float64
}

// Jacobian returns the derivatives of the network's log-rates and detection
// probabilities with respect to the free parameters. The log-rate part does
// not depend on x; x is checked as for Network.
func (m *Model) Jacobian(x []float64) (*Jacobian, error) {
	if _, err := m.values(x); err != nil {
		return nil, err
	}
	free := m.Free()
	fcol := map[string]int{}
	for j, name := range free {
		fcol[name] = j
	}
	// dlog[name][j] = d ln val(name) / d ln x_j
	dlog := map[string][]float64{}
	for _, name := range free {
		row := make([]float64, len(free))
		row[fcol[name]] = 1
		dlog[name] = row
	}
	if len(m.Affinities) > 0 {
		sys := m.buildSystem()
		if err := sys.factor(); err != nil {
			return nil, err
		}
		k := len(sys.v)
		rows := make([][]float64, k)
		for i := range rows {
			rows[i] = make([]float64, len(free))
		}
		for j, name := range sys.names {
			fj, isFree := fcol[name]
			if sys.isSolved(j) || !isFree {
				continue
			}
			col := mat.NewVecDense(k, mat.Col(nil, j, sys.c))
			var y mat.VecDense
			if err := sys.lu.SolveVecTo(&y, false, col); err != nil {
				return nil, err
			}
			for i := 0; i < k; i++ {
				rows[i][fj] = -y.AtVec(i)
			}
		}
		for i, col := range sys.solve {
			dlog[sys.names[col]] = rows[i]
		}
	}
	jac := &Jacobian{LogRate: make([][]float64, 2*len(m.Edges)), Detect: make([][]float64, len(m.Labels))}
	zero := make([]float64, len(free))
	for e, es := range m.Edges {
		for d := 0; d < 2; d++ {
			row := make([]float64, len(free))
			if !(d == 1 && es.OneWay) {
				if r, ok := dlog[es.Rates[d]]; ok {
					copy(row, r)
				}
			}
			jac.LogRate[2*e+d] = row
		}
	}
	for l, ls := range m.Labels {
		row := append([]float64(nil), zero...)
		if j, ok := fcol[ls.Param]; ok && ls.Param != "" {
			row[j] = 1
		}
		jac.Detect[l] = row
	}
	return jac, nil
}

// Bounds returns the lower and upper bounds of the free parameters, in the
// order of Free.
func (m *Model) Bounds() (lower, upper []float64) {
	for _, p := range m.Params {
		if !p.Fixed {
			lower = append(lower, p.Lower)
			upper = append(upper, p.Upper)
		}
	}
	return lower, upper
}
