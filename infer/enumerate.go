package infer

import (
	"fmt"
	"math/bits"
	"slices"
	"strings"

	"edgewise/models"
)

// Exhaustive enumeration of topologies around one visible edge.
//
// A topology is a connected simple graph on n states with one marked
// directed edge (the visible edge, + from its tail A to its head B). Two
// topologies are the same when a bijection of the states maps the edges of
// one onto the edges of the other and maps A to A and B to B, so that the
// visible edge keeps its direction (+ stays A->B). The graphs are counted
// as orbits of the group of permutations of the states that fix A and B
// (the stabiliser of the ordered pair (A, B), (n-2)! elements) acting on
// the labelled graphs that contain the edge A-B.
//
// Each orbit is represented by its smallest member in a fixed bit code of
// the edges (bit j(j-1)/2 + i for the pair i < j of state indices, A = 0,
// B = 1), found by applying every permutation of the states C, D, ...;
// for n <= 5 that is at most 6 permutations of at most 2^9 labelled graphs.
// With the visible edge forgotten, the enumerated graphs fall into the
// classes of connected graphs with at least one edge: 1, 2, 6, 21 for 2..5
// states (OEIS A001349); the tests check both counts against independent
// brute-force ones (Burnside's lemma).

// MaxEnumerateStates is the largest number of states of the exhaustive
// enumeration.
const MaxEnumerateStates = 5

// maxKeyStates bounds TopologyKey: (n-2)! permutations per key.
const maxKeyStates = 9

// pairBit returns the code bit of the unordered pair {i, j}, i != j.
func pairBit(i, j int) uint64 {
	if i > j {
		i, j = j, i
	}
	return 1 << uint(j*(j-1)/2+i)
}

// codePairs lists the pairs {i, j} set in code, as (i, j) with i < j.
func codePairs(code uint64) [][2]int {
	var out [][2]int
	for j := 1; code>>uint(j*(j-1)/2) != 0; j++ {
		for i := 0; i < j; i++ {
			if code&pairBit(i, j) != 0 {
				out = append(out, [2]int{i, j})
			}
		}
	}
	return out
}

// connectedCode reports whether the graph on states 0..n-1 with edge code
// is connected.
func connectedCode(code uint64, n int) bool {
	var adj [64]uint64
	for _, p := range codePairs(code) {
		adj[p[0]] |= 1 << uint(p[1])
		adj[p[1]] |= 1 << uint(p[0])
	}
	seen, front := uint64(1), uint64(1)
	for front != 0 {
		next := uint64(0)
		for f := front; f != 0; f &= f - 1 {
			next |= adj[bits.TrailingZeros64(f)]
		}
		front = next &^ seen
		seen |= next
	}
	return seen == 1<<uint(n)-1
}

// permutations returns every permutation of 0..n-1 that fixes the first
// `fixed` states, in lexicographic order.
func permutations(n, fixed int) [][]int {
	p := make([]int, n)
	for i := range p {
		p[i] = i
	}
	var out [][]int
	var rec func(k int)
	rec = func(k int) {
		if k == n {
			out = append(out, slices.Clone(p))
			return
		}
		for i := k; i < n; i++ {
			p[k], p[i] = p[i], p[k]
			rec(k + 1)
			p[k], p[i] = p[i], p[k]
		}
	}
	rec(fixed)
	slices.SortFunc(out, slices.Compare)
	return out
}

// permuteCode returns the code of the graph with every state s renamed
// perm[s].
func permuteCode(pairs [][2]int, perm []int) uint64 {
	c := uint64(0)
	for _, p := range pairs {
		c |= pairBit(perm[p[0]], perm[p[1]])
	}
	return c
}

// canonicalCode returns the smallest code of the orbit of code under perms.
func canonicalCode(code uint64, perms [][]int) uint64 {
	pairs := codePairs(code)
	best := code
	for _, p := range perms {
		best = min(best, permuteCode(pairs, p))
	}
	return best
}

// enumerateCodes returns the canonical codes of the connected graphs on n
// states that contain the edge {0, 1}, one per orbit under the
// permutations that fix 0 and 1, ordered by number of edges, then code.
func enumerateCodes(n int) []uint64 {
	perms := permutations(n, 2)
	var free []uint64 // every pair but {0, 1}
	for j := 1; j < n; j++ {
		for i := 0; i < j; i++ {
			if j > 1 {
				free = append(free, pairBit(i, j))
			}
		}
	}
	var out []uint64
	for sub := 0; sub < 1<<uint(len(free)); sub++ {
		code := pairBit(0, 1)
		for b, f := range free {
			if sub>>uint(b)&1 == 1 {
				code |= f
			}
		}
		if connectedCode(code, n) && canonicalCode(code, perms) == code {
			out = append(out, code)
		}
	}
	slices.SortFunc(out, func(a, b uint64) int {
		if d := bits.OnesCount64(a) - bits.OnesCount64(b); d != 0 {
			return d
		}
		return compareUint(a, b)
	})
	return out
}

func compareUint(a, b uint64) int {
	switch {
	case a < b:
		return -1
	case a > b:
		return 1
	}
	return 0
}

// enumerateFamily returns the graphs of the exhaustive enumeration on 2..N
// states, named graphN#i (i counts from 1 within each N in the order of
// enumerateCodes, which is fixed by the code and so stable across runs
// and versions).
func enumerateFamily(maxStates int) []familyGraph {
	var out []familyGraph
	for n := 2; n <= maxStates; n++ {
		for i, code := range enumerateCodes(n) {
			g := familyGraph{name: fmt.Sprintf("graph%d#%d", n, i+1), n: n}
			var names []string
			for _, p := range codePairs(code) {
				names = append(names, stateName(p[0])+"-"+stateName(p[1]))
				if p != [2]int{0, 1} {
					g.edges = append(g.edges, p)
				}
			}
			cycles := len(names) - n + 1
			g.desc = fmt.Sprintf("%d states, %d edge%s (%s), %d independent cycle%s", n, len(names), plural(len(names)), strings.Join(names, " "), cycles, plural(cycles))
			out = append(out, g)
		}
	}
	return out
}

func plural(n int) string {
	if n == 1 {
		return ""
	}
	return "s"
}

// TopologyKey returns a string that two models share exactly when their
// graphs are the same topology around the visible edge: an isomorphism of
// the undirected graphs (rates, labels other than plus, one-way
// declarations and constraints ignored) that maps the tail of the edge
// carrying plus to the tail and its head to the head. It fails when plus
// is not on exactly one edge, when two edges join the same states, or
// beyond 9 states (the key tries every permutation of the other states).
func TopologyKey(m *models.Model, plus string) (string, error) {
	n := len(m.States)
	if n < 2 || n > maxKeyStates {
		return "", fmt.Errorf("topology key of %s: %d states, want 2 to %d", m.Name, n, maxKeyStates)
	}
	tail, head, err := visibleEnds(m, plus)
	if err != nil {
		return "", err
	}
	// Index: tail 0, head 1, the others in model order.
	idx := map[string]int{m.States[tail]: 0, m.States[head]: 1}
	for _, s := range m.States {
		if _, ok := idx[s]; !ok {
			idx[s] = len(idx)
		}
	}
	code := uint64(0)
	for _, e := range m.Edges {
		b := pairBit(idx[e.Between[0]], idx[e.Between[1]])
		if code&b != 0 {
			return "", fmt.Errorf("topology key of %s: two edges join %s and %s (parallel edges); topology keys cover graphs without parallel edges", m.Name, e.Between[0], e.Between[1])
		}
		code |= b
	}
	return fmt.Sprintf("%d:%x", n, canonicalCode(code, permutations(n, 2))), nil
}

// visibleEnds returns the state indices of the tail and head of the one
// directed edge of m that carries label plus.
func visibleEnds(m *models.Model, plus string) (tail, head int, err error) {
	idx := map[string]int{}
	for i, s := range m.States {
		idx[s] = i
	}
	found := 0
	for _, e := range m.Edges {
		for d := 0; d < 2; d++ {
			if e.Labels[d] == plus {
				found++
				tail, head = idx[e.Between[d]], idx[e.Between[1-d]]
			}
		}
	}
	switch found {
	case 0:
		return 0, 0, fmt.Errorf("model %s: no edge carries the label %q", m.Name, plus)
	case 1:
		return tail, head, nil
	}
	return 0, 0, fmt.Errorf("model %s: the label %q sits on %d directed edges; one visible edge is needed", m.Name, plus, found)
}
