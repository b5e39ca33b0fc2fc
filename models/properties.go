package models

import (
	"fmt"
	"math"
	"strconv"
)

// Stationary returns the stationary distribution pi of the network
// (pi L = 0, sum pi = 1), computed by the Grassmann-Taksar-Heyman state
// reduction. GTH uses only additions, multiplications and divisions of
// non-negative numbers, so each pi_i is obtained to high relative accuracy
// even when rates span many orders of magnitude (no cancellation, unlike a
// solve with the diagonal of L). It fails when the network is not strongly
// connected. Cost O(n^3).
func (n *Network) Stationary() ([]float64, error) {
	k := len(n.States)
	if k == 0 {
		return nil, fmt.Errorf("stationary distribution: empty network")
	}
	a := make([][]float64, k)
	for i := range a {
		a[i] = make([]float64, k)
	}
	for _, t := range n.Transitions() {
		a[t.From][t.To] += t.Rate
	}
	pi, bad := GTH(a)
	if bad >= 0 {
		return nil, fmt.Errorf("stationary distribution: network is not strongly connected (state %s is absorbing after reduction)", n.States[bad])
	}
	if pi == nil {
		return nil, fmt.Errorf("stationary distribution: normalisation failed")
	}
	return pi, nil
}

// GTH returns the stationary law of the irreducible chain whose
// off-diagonal rates (or transition probabilities) are a[i][j] >= 0, i != j,
// by the Grassmann-Taksar-Heyman reduction; the diagonal is ignored and a
// is overwritten. Only additions, multiplications and divisions of
// non-negative numbers occur, so each entry has high relative accuracy.
// When the chain is not irreducible it returns nil and the index of a
// state left without exits by the reduction (or nil and -1 when the
// normalisation overflows). Cost O(n^3).
func GTH(a [][]float64) ([]float64, int) {
	k := len(a)
	for m := k - 1; m >= 1; m-- {
		s := 0.0
		for j := 0; j < m; j++ {
			s += a[m][j]
		}
		if !(s > 0) {
			return nil, m
		}
		for i := 0; i < m; i++ {
			a[i][m] /= s
		}
		for i := 0; i < m; i++ {
			aim := a[i][m]
			if aim == 0 {
				continue
			}
			for j := 0; j < m; j++ {
				if j != i {
					a[i][j] += aim * a[m][j]
				}
			}
		}
	}
	pi := make([]float64, k)
	pi[0] = 1
	total := 1.0
	for m := 1; m < k; m++ {
		s := 0.0
		for i := 0; i < m; i++ {
			s += pi[i] * a[i][m]
		}
		pi[m] = s
		total += s
	}
	if !(total > 0) || math.IsInf(total, 0) {
		return nil, -1
	}
	for i := range pi {
		pi[i] /= total
	}
	return pi, -1
}

// Currents returns the stationary probability current of each edge in the
// direction From->To: J_e = pi_From w(From->To) - pi_To w(To->From), in
// 1/time.
func (n *Network) Currents(pi []float64) []float64 {
	j := make([]float64, len(n.Edges))
	for i, e := range n.Edges {
		j[i] = pi[e.From]*e.Rate[0] - pi[e.To]*e.Rate[1]
	}
	return j
}

// EdgeAffinity returns ln(w(From->To)/w(To->From)) of edge e in k_B T:
// +Inf or -Inf on a one-way edge.
func (n *Network) EdgeAffinity(e int) float64 {
	r := n.Edges[e].Rate
	switch {
	case r[1] == 0 && r[0] == 0:
		return math.NaN()
	case r[1] == 0:
		return math.Inf(1)
	case r[0] == 0:
		return math.Inf(-1)
	}
	return math.Log(r[0]) - math.Log(r[1])
}

// Step is one traversal of an edge within a cycle.
type Step struct {
	Edge    int  // index into Network.Edges
	Forward bool // true when traversed From->To
}

// Cycle is a closed path of the network, given as its states in order
// (the last state connects back to the first) and the edge steps between
// them. Steps[i] goes from States[i] to States[(i+1) % len].
type Cycle struct {
	States []int
	Steps  []Step
	Chord  int // the edge outside the spanning tree that closes the cycle, or -1
}

// Affinity returns the cycle affinity (Schnakenberg) in k_B T:
// A_C = sum over steps of ln(w_forward/w_backward) = ln(prod forward rates /
// prod backward rates). It is +-Inf when the cycle passes a one-way edge
// (NaN if it passes one-way edges in both senses).
func (n *Network) Affinity(c Cycle) float64 {
	a := 0.0
	for _, s := range c.Steps {
		x := n.EdgeAffinity(s.Edge)
		if !s.Forward {
			x = -x
		}
		a += x
	}
	return a
}

// Names returns the cycle's state names joined as "A-B-C-A".
func (c Cycle) Names(states []string) string {
	s := ""
	for _, i := range c.States {
		s += states[i] + "-"
	}
	if len(c.States) > 0 {
		s += states[c.States[0]]
	}
	return s
}

// EdgeIndices returns the edge index of every step of the cycle, in order.
// With parallel edges the states alone do not fix a cycle; the states and
// these indices do (AffinitySpec.Edges takes them).
func (c Cycle) EdgeIndices() []int {
	out := make([]int, len(c.Steps))
	for i, s := range c.Steps {
		out[i] = s.Edge
	}
	return out
}

// Parallel returns the indices of the other edges that join the same two
// states as edge e (none for a simple edge).
func (n *Network) Parallel(e int) []int {
	a, b := n.Edges[e].From, n.Edges[e].To
	var out []int
	for i, f := range n.Edges {
		if i != e && ((f.From == a && f.To == b) || (f.From == b && f.To == a)) {
			out = append(out, i)
		}
	}
	return out
}

// CyclePath returns the cycle as a closed list of state names
// [s0, s1, ..., s0] and, when a step runs along one of several parallel
// edges (so that the states alone are ambiguous), the edge index of every
// step, else nil: the Cycle and Edges of an AffinitySpec that names this
// cycle (a Model's edges and its Network's share their indices).
func (n *Network) CyclePath(c Cycle) (states []string, edges []int) {
	for _, i := range c.States {
		states = append(states, n.States[i])
	}
	if len(c.States) > 0 {
		states = append(states, n.States[c.States[0]])
	}
	for _, st := range c.Steps {
		if len(n.Parallel(st.Edge)) > 0 {
			return states, c.EdgeIndices()
		}
	}
	return states, nil
}

// CycleName returns the cycle's state names joined as "A-B-C-A" and, when
// a step runs along one of several parallel edges (so that the states
// alone are ambiguous), the edge index of every step: "A-B-A via edges 0, 2".
func (n *Network) CycleName(c Cycle) string {
	states, edges := n.CyclePath(c)
	return AffinitySpec{Cycle: states, Edges: edges}.CycleName()
}

// joinInts writes xs as "0, 2, 1".
func joinInts(xs []int) string {
	s := ""
	for i, x := range xs {
		if i > 0 {
			s += ", "
		}
		s += strconv.Itoa(x)
	}
	return s
}

// CycleBasis returns a basis of fundamental cycles: a breadth-first spanning
// tree of the undirected graph is grown from state 0 and each edge outside
// it (a chord) closes one cycle, oriented along the chord's From->To
// direction. There are |E| - |V| + 1 cycles for a connected graph
// (Schnakenberg, Rev. Mod. Phys. 48, 571 (1976), section V); parallel
// edges count, each parallel pair closing a cycle of two states.
func (n *Network) CycleBasis() []Cycle {
	k := len(n.States)
	adj := make([][]Step, k) // step leaving each state
	for i, e := range n.Edges {
		adj[e.From] = append(adj[e.From], Step{Edge: i, Forward: true})
		adj[e.To] = append(adj[e.To], Step{Edge: i, Forward: false})
	}
	parent := make([]Step, k) // step from parent to the state
	depth := make([]int, k)
	for i := range depth {
		depth[i] = -1
	}
	inTree := make([]bool, len(n.Edges))
	depth[0] = 0
	queue := []int{0}
	for len(queue) > 0 {
		s := queue[0]
		queue = queue[1:]
		for _, st := range adj[s] {
			t := n.other(st, s)
			if depth[t] >= 0 {
				continue
			}
			depth[t] = depth[s] + 1
			parent[t] = st
			inTree[st.Edge] = true
			queue = append(queue, t)
		}
	}
	var cycles []Cycle
	for i, e := range n.Edges {
		if inTree[i] || depth[e.From] < 0 || depth[e.To] < 0 {
			continue
		}
		// Path To -> ... -> lca -> ... -> From, then the chord From->To.
		a, b := e.To, e.From
		var up []Step   // steps from To going up to lca (reversed tree steps)
		var down []Step // tree steps from lca down to From, collected upwards
		upStates := []int{}
		downStates := []int{}
		for a != b {
			if depth[a] >= depth[b] {
				st := parent[a]
				upStates = append(upStates, a)
				up = append(up, Step{Edge: st.Edge, Forward: !st.Forward})
				a = n.other(st, a)
			} else {
				st := parent[b]
				downStates = append(downStates, b)
				down = append(down, st)
				b = n.other(st, b)
			}
		}
		c := Cycle{Chord: i}
		// States: From first, then chord to To, then up to lca, then down to From.
		c.States = append(c.States, e.From)
		c.Steps = append(c.Steps, Step{Edge: i, Forward: true})
		c.States = append(c.States, upStates...)
		c.Steps = append(c.Steps, up...)
		c.States = append(c.States, a) // lca
		for j := len(down) - 1; j >= 0; j-- {
			c.Steps = append(c.Steps, down[j])
			if j > 0 {
				c.States = append(c.States, downStates[j])
			}
		}
		// The lca equals From when From is an ancestor of To: drop the repeat.
		if c.States[len(c.States)-1] == e.From && len(c.States) > 1 {
			c.States = c.States[:len(c.States)-1]
		}
		cycles = append(cycles, c)
	}
	return cycles
}

// other returns the endpoint of the step's edge that is not s.
func (n *Network) other(st Step, s int) int {
	e := n.Edges[st.Edge]
	if e.From == s {
		return e.To
	}
	return e.From
}

// EntropyProduction returns the stationary entropy production rate in
// k_B per unit time, in Schnakenberg's form
// sigma = sum_e J_e ln(w(From->To)/w(To->From)) >= 0
// (Rev. Mod. Phys. 48, 571 (1976), eq. 7.6). At stationarity it equals
// sum_e J_e ln(pi_From w / (pi_To w')) and sum over fundamental cycles of
// J_chord A_C. A one-way edge carrying current gives +Inf.
func (n *Network) EntropyProduction(pi []float64) float64 {
	j := n.Currents(pi)
	s := 0.0
	for i := range n.Edges {
		if j[i] == 0 {
			continue
		}
		s += j[i] * n.EdgeAffinity(i)
	}
	return s
}

// DetailedBalance reports whether every fundamental cycle has |affinity| <=
// tol (Kolmogorov's criterion), and returns the largest |affinity|.
func (n *Network) DetailedBalance(tol float64) (bool, float64) {
	worst := 0.0
	for _, c := range n.CycleBasis() {
		a := math.Abs(n.Affinity(c))
		if math.IsNaN(a) || a > worst {
			worst = a
		}
	}
	return worst <= tol, worst
}
