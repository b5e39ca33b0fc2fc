package models

import (
	"errors"
	"fmt"
	"math"
)

// Hidden is the label index of a directed transition that the instrument
// does not see.
const Hidden = -1

// Network is a continuous-time Markov chain with numeric rates: the object
// every computation in edgewise works on. It is produced from a Model by
// Model.Network (which applies ties, fixed values and affinity constraints),
// or built directly.
//
// Each undirected edge joins two states and carries two directed rates in
// units of 1/time (the time unit of the records). A rate is zero only on a
// declared one-way edge. Each direction may carry a visible label.
type Network struct {
	States []string // state names, index = state number
	Edges  []Edge   // undirected edges; two may join the same pair (parallel channels)
	Labels []Label  // visible labels; Edge.Label indexes this slice
}

// Edge is one undirected edge of a Network.
type Edge struct {
	From, To int        // the two state indices; direction 0 is From->To
	Rate     [2]float64 // Rate[0] = w(From->To), Rate[1] = w(To->From), 1/time
	Label    [2]int     // label index of each direction, or Hidden
}

// Label is a visible label with its detection probability p in (0, 1]:
// each transition carrying the label is recorded with probability p and is
// otherwise a hidden transition.
type Label struct {
	Name   string
	Detect float64
}

// Transition is one directed transition of a Network.
type Transition struct {
	From, To int     // states
	Rate     float64 // 1/time
	Label    int     // label index, or Hidden
	Edge     int     // index into Network.Edges
	Dir      int     // 0 when From == Edges[Edge].From, else 1
}

// Transitions lists the directed transitions with a positive rate, in edge
// order, direction 0 before direction 1.
func (n *Network) Transitions() []Transition {
	ts := make([]Transition, 0, 2*len(n.Edges))
	for i, e := range n.Edges {
		for d := 0; d < 2; d++ {
			if e.Rate[d] == 0 {
				continue
			}
			from, to := e.From, e.To
			if d == 1 {
				from, to = to, from
			}
			ts = append(ts, Transition{From: from, To: to, Rate: e.Rate[d], Label: e.Label[d], Edge: i, Dir: d})
		}
	}
	return ts
}

// NumStates returns the number of states.
func (n *Network) NumStates() int { return len(n.States) }

// Generator returns the generator L as a dense row-major n x n slice:
// L[i][j] = w(i->j) for i != j and L[i][i] = -sum_j w(i->j).
func (n *Network) Generator() [][]float64 {
	k := len(n.States)
	g := make([][]float64, k)
	for i := range g {
		g[i] = make([]float64, k)
	}
	for _, t := range n.Transitions() {
		g[t.From][t.To] += t.Rate
		g[t.From][t.From] -= t.Rate
	}
	return g
}

// LabelIndex returns the index of the label with the given name, or -1.
func (n *Network) LabelIndex(name string) int {
	for i, l := range n.Labels {
		if l.Name == name {
			return i
		}
	}
	return -1
}

// Clone returns a deep copy of n.
func (n *Network) Clone() *Network {
	c := &Network{
		States: append([]string(nil), n.States...),
		Edges:  append([]Edge(nil), n.Edges...),
		Labels: append([]Label(nil), n.Labels...),
	}
	return c
}

// Validate checks that the network is well formed: at least two states,
// edge endpoints in range, no self-loops, finite
// non-negative rates with at least one direction positive per edge, label
// indices in range, detection probabilities in (0, 1], and a strongly
// connected graph of positive rates (so that the stationary law is unique
// and positive). Parallel edges (two edges joining the same states) are
// allowed: each is its own channel with its own rates and labels. It
// returns all problems found, joined.
func (n *Network) Validate() error {
	var errs []error
	k := len(n.States)
	if k < 2 {
		errs = append(errs, fmt.Errorf("network has %d states; need at least 2", k))
	}
	for i, e := range n.Edges {
		if e.From < 0 || e.From >= k || e.To < 0 || e.To >= k {
			errs = append(errs, fmt.Errorf("edge[%d]: state index out of range", i))
			continue
		}
		if e.From == e.To {
			errs = append(errs, fmt.Errorf("edge[%d]: self-loop at state %s", i, n.States[e.From]))
		}
		for d := 0; d < 2; d++ {
			r := e.Rate[d]
			if math.IsNaN(r) || math.IsInf(r, 0) || r < 0 {
				errs = append(errs, fmt.Errorf("edge[%d] (%s-%s): rate %g is not a finite non-negative number", i, n.States[e.From], n.States[e.To], r))
			}
			if l := e.Label[d]; l != Hidden && (l < 0 || l >= len(n.Labels)) {
				errs = append(errs, fmt.Errorf("edge[%d]: label index %d out of range", i, l))
			}
		}
		if e.Rate[0] == 0 && e.Rate[1] == 0 {
			errs = append(errs, fmt.Errorf("edge[%d] (%s-%s): both rates are zero", i, n.States[e.From], n.States[e.To]))
		}
	}
	for _, l := range n.Labels {
		if !(l.Detect > 0 && l.Detect <= 1) {
			errs = append(errs, fmt.Errorf("label %q: detection probability %g is not in (0, 1]", l.Name, l.Detect))
		}
	}
	if len(errs) == 0 {
		if bad := n.unreachable(); len(bad) > 0 {
			errs = append(errs, fmt.Errorf("network is not strongly connected: %v", bad))
		}
	}
	return errors.Join(errs...)
}

// unreachable describes the first failure of strong connectivity: states not
// reachable from state 0, or states from which state 0 cannot be reached.
func (n *Network) unreachable() []string {
	k := len(n.States)
	fwd := make([][]int, k)
	bwd := make([][]int, k)
	for _, t := range n.Transitions() {
		fwd[t.From] = append(fwd[t.From], t.To)
		bwd[t.To] = append(bwd[t.To], t.From)
	}
	reach := func(adj [][]int) []bool {
		seen := make([]bool, k)
		stack := []int{0}
		seen[0] = true
		for len(stack) > 0 {
			s := stack[len(stack)-1]
			stack = stack[:len(stack)-1]
			for _, t := range adj[s] {
				if !seen[t] {
					seen[t] = true
					stack = append(stack, t)
				}
			}
		}
		return seen
	}
	var out []string
	f, b := reach(fwd), reach(bwd)
	for i := 0; i < k; i++ {
		if !f[i] {
			out = append(out, fmt.Sprintf("%s cannot be reached from %s", n.States[i], n.States[0]))
		} else if !b[i] {
			out = append(out, fmt.Sprintf("%s cannot be reached from %s", n.States[0], n.States[i]))
		}
	}
	return out
}
