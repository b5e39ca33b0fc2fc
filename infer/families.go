package infer

import (
	"bytes"
	"errors"
	"fmt"
	"math"
	"slices"
	"strconv"
	"strings"

	"edgewise/models"
)

// Candidate families: hidden-state networks generated without a spec file,
// each around one visible edge whose forward direction carries the plus
// label and whose backward direction carries the minus label.
//
// Conventions shared by every generated model:
//
//   - states are named by capital letters; A and B are always the tail and
//     the head of the visible edge, so "+" is the jump A->B and "-" the jump
//     B->A (label names configurable);
//   - every edge has two free rate parameters named after the jump they
//     govern, kXY for X->Y (1/time);
//   - every rate starts at the same value (FamilyOptions.Rate, default 1 per
//     unit time): the start is at detailed balance, every cycle affinity 0,
//     so a fit begins at the equilibrium member of the family and the data
//     choose the direction of the drive. A start at 1 is in the right range
//     only when the records' time unit is near the mean gap; the fitter is
//     expected to rescale all rates by the data's event rate before it starts;
//   - bounds are the models package's defaults (0 < rate < inf), labels are
//     detected with probability 1 (set LabelSpec.Detect, or a detection
//     parameter, on the returned model to describe missed events);
//   - every model passes the models package's checks (its network is valid
//     and strongly connected, both labels are present) and writes as a spec
//     that parses back to an equal model.

// MaxFamilyStates is the largest number of states of a generated model
// (one capital letter per state).
const MaxFamilyStates = 26

// StateRange is an inclusive range of state counts; the zero value means
// "not requested".
type StateRange struct{ Min, Max int }

// Off reports whether the range is the zero value (family not requested).
func (r StateRange) Off() bool { return r == StateRange{} }

func (r StateRange) String() string {
	if r.Min == r.Max {
		return strconv.Itoa(r.Min)
	}
	return fmt.Sprintf("%d-%d", r.Min, r.Max)
}

// ParseStateRange reads a state range written "K" (exactly K states) or
// "K-M" (K to M states), as a command-line flag would give it.
func ParseStateRange(s string) (StateRange, error) {
	lo, hi, found := strings.Cut(strings.TrimSpace(s), "-")
	a, err := strconv.Atoi(strings.TrimSpace(lo))
	if err != nil {
		return StateRange{}, fmt.Errorf("state range %q: want K or K-M with whole numbers of states", s)
	}
	b := a
	if found {
		if b, err = strconv.Atoi(strings.TrimSpace(hi)); err != nil {
			return StateRange{}, fmt.Errorf("state range %q: want K or K-M with whole numbers of states", s)
		}
	}
	return StateRange{a, b}, nil
}

// FamilyOptions selects candidate families. It holds no instrument
// settings (detection probability, dead time, frames): those belong to the
// fit and apply to every candidate alike.
type FamilyOptions struct {
	// Plus and Minus are the labels of the visible edge's forward (A->B)
	// and backward (B->A) jumps, as named in the records; default "+"
	// and "-".
	Plus, Minus string
	// Rings: unicyclic rings of Min..Max states through the visible edge
	// (at least 3 states). Names "ring4".
	Rings StateRange
	// Chords: rings of Min..Max states with one chord (two independent
	// cycles), every chord placement (at least 4 states). Names
	// "ring5+chord(B,D)".
	Chords StateRange
	// Loops: rings of Min..Max states (at least 3) with a side loop of
	// LoopStates states (the hinge included) hung on one hidden ring state
	// (not A or B), every hinge position. The loop is a cycle that avoids
	// the visible edge, free to be driven. Names "ring4+loop3@C".
	Loops StateRange
	// LoopStates is the number of states on the side loop, its hinge
	// included (default 3: a triangle; at least 3).
	LoopStates int
	// Chains: linear chains of Min..Max states (at least 2) containing the
	// visible edge, every position of the edge along the chain. A chain
	// has no cycle, so it is at equilibrium by construction and its
	// labels strictly alternate (+ - + -). Names "chain4(D-A-B-C)", the
	// states in line order.
	Chains StateRange
	// Exhaustive, when N > 0, adds every connected graph of 2..N states
	// (N <= MaxEnumerateStates) that contains the visible edge, up to
	// isomorphisms that keep the visible edge and its direction (see
	// EnumerateGraphs). Names "graph5#17".
	Exhaustive int
	// Rate is the start value of every rate (1/time); default 1.
	Rate float64
}

// withDefaults returns o with empty fields set to their defaults.
func (o FamilyOptions) withDefaults() FamilyOptions {
	if o.Plus == "" {
		o.Plus = "+"
	}
	if o.Minus == "" {
		o.Minus = "-"
	}
	if o.LoopStates == 0 {
		o.LoopStates = 3
	}
	if o.Rate == 0 {
		o.Rate = 1
	}
	return o
}

// Validate checks the options and reports every problem, each naming the
// family and the value. A requested family that would make no candidate
// (a ring of 2 states, a chord on a triangle) is an error, not an empty
// result; so is a selection with no family at all.
func (o FamilyOptions) Validate() error {
	o = o.withDefaults()
	var errs []error
	bad := func(format string, a ...any) { errs = append(errs, fmt.Errorf("families: "+format, a...)) }
	check := func(name string, r StateRange, least int, why string) {
		if r.Off() {
			return
		}
		switch {
		case r.Min > r.Max:
			bad("%s %v: the smallest size is above the largest", name, r)
		case r.Min < least:
			bad("%s %v: %s, so sizes below %d make no candidate", name, r, why, least)
		case r.Max > MaxFamilyStates:
			bad("%s %v: at most %d states", name, r, MaxFamilyStates)
		}
	}
	check("rings", o.Rings, 3, "a ring needs at least 3 states (2 states are the visible edge alone: a chain)")
	check("chords", o.Chords, 4, "a chord joins two ring states that are not neighbours, which needs at least 4 states")
	check("loops", o.Loops, 3, "the loop hangs on a ring state other than the visible edge's two ends, which needs at least 3 states")
	check("chains", o.Chains, 2, "a chain containing the visible edge has at least its 2 states")
	if !o.Loops.Off() {
		switch {
		case o.LoopStates < 3:
			bad("loop states %d: a side loop is a cycle of at least 3 states, its hinge included", o.LoopStates)
		case o.Loops.Max+o.LoopStates-1 > MaxFamilyStates:
			bad("loops %v with %d loop states: %d states in all, at most %d", o.Loops, o.LoopStates, o.Loops.Max+o.LoopStates-1, MaxFamilyStates)
		}
	}
	if o.Exhaustive != 0 && (o.Exhaustive < 2 || o.Exhaustive > MaxEnumerateStates) {
		bad("exhaustive enumeration up to %d states: want 2 to %d (the number of graphs grows too fast beyond)", o.Exhaustive, MaxEnumerateStates)
	}
	if math.IsNaN(o.Rate) || math.IsInf(o.Rate, 0) || o.Rate <= 0 {
		bad("start rate %v: want a finite positive rate", o.Rate)
	}
	if o.Rings.Off() && o.Chords.Off() && o.Loops.Off() && o.Chains.Off() && o.Exhaustive == 0 {
		bad("no family selected (rings, chords, loops, chains or exhaustive)")
	}
	if o.Plus == o.Minus {
		bad("the forward and backward labels are both %q; they must differ", o.Plus)
	} else if err := checkLabels(o.Plus, o.Minus); err != nil {
		errs = append(errs, err)
	}
	return errors.Join(errs...)
}

// checkLabels applies the models package's rules for label names, by
// writing the two-state chain with these labels and parsing it back.
func checkLabels(plus, minus string) error {
	m, err := buildFamilyModel(familyGraph{name: "labels", n: 2}, plus, minus, 1)
	if err != nil {
		return err
	}
	if _, err := roundTrip(m); err != nil {
		return fmt.Errorf("families: labels %q and %q: %w", plus, minus, err)
	}
	return nil
}

// roundTrip writes m as a spec and parses it back, which runs every check
// of the models package.
func roundTrip(m *models.Model) (*models.Model, error) {
	var buf bytes.Buffer
	if err := m.Write(&buf); err != nil {
		return nil, err
	}
	return models.Parse(&buf, m.Name)
}

// Families returns the candidates the options ask for, in a fixed order:
// rings, rings with a chord, rings with a side loop, chains, then the
// exhaustive enumeration, each by increasing size. The same topology can
// appear in several families (the enumeration contains every ring); use
// TopologyKey to spot repeats.
func Families(o FamilyOptions) ([]*models.Model, error) {
	if err := o.Validate(); err != nil {
		return nil, err
	}
	o = o.withDefaults()
	var gs []familyGraph
	span := func(r StateRange, f func(k int) []familyGraph) {
		if r.Off() {
			return
		}
		for k := r.Min; k <= r.Max; k++ {
			gs = append(gs, f(k)...)
		}
	}
	span(o.Rings, func(k int) []familyGraph { return []familyGraph{ringGraph(k)} })
	span(o.Chords, chordGraphs)
	span(o.Loops, func(k int) []familyGraph { return loopGraphs(k, o.LoopStates) })
	span(o.Chains, chainGraphs)
	if o.Exhaustive > 0 {
		gs = append(gs, enumerateFamily(o.Exhaustive)...)
	}
	out := make([]*models.Model, 0, len(gs))
	for _, g := range gs {
		m, err := buildFamilyModel(g, o.Plus, o.Minus, o.Rate)
		if err != nil {
			return nil, err
		}
		out = append(out, m)
	}
	return out, nil
}

// familyGraph is a simple undirected graph on states 0..n-1 whose visible
// edge is (0, 1), + being 0->1. Edges other than the visible one are
// listed with direction 0 first; order is kept in the model.
type familyGraph struct {
	name, desc string
	n          int
	edges      [][2]int // without the visible edge
}

// stateName returns the letter of state i.
func stateName(i int) string { return string(rune('A' + i)) }

// ringGraph is the ring A -> B -> C -> ... -> A of k states.
func ringGraph(k int) familyGraph {
	g := familyGraph{name: fmt.Sprintf("ring%d", k), n: k}
	for i := 1; i < k; i++ {
		g.edges = append(g.edges, [2]int{i, (i + 1) % k})
	}
	g.desc = fmt.Sprintf("unicyclic ring %s-%s", ringPath(k), stateName(0))
	return g
}

// ringPath returns "A-B-C-D" for a ring of k states.
func ringPath(k int) string {
	names := make([]string, k)
	for i := range names {
		names[i] = stateName(i)
	}
	return strings.Join(names, "-")
}

// chordGraphs returns the ring of k states with one chord, for every pair
// of ring states that are not neighbours: k(k-3)/2 graphs. No two are
// isomorphic under a map that keeps A and B: the ring is the only cycle
// through all k states (a Hamiltonian cycle of ring + chord must drop one
// edge, and dropping a ring edge leaves a chord end of degree 3), so such
// a map keeps the ring, and a map of a ring that fixes two neighbours is
// the identity.
func chordGraphs(k int) []familyGraph {
	var out []familyGraph
	for i := 0; i < k; i++ {
		for j := i + 2; j < k; j++ {
			if i == 0 && j == k-1 {
				continue // neighbours across the ring's closing edge
			}
			g := ringGraph(k)
			g.name = fmt.Sprintf("ring%d+chord(%s,%s)", k, stateName(i), stateName(j))
			g.desc = fmt.Sprintf("ring %s-%s with chord %s-%s (two independent cycles)", ringPath(k), stateName(0), stateName(i), stateName(j))
			g.edges = append(g.edges, [2]int{i, j})
			out = append(out, g)
		}
	}
	return out
}

// loopGraphs returns the ring of k states with a side loop of m states
// (hinge included) hung on each hidden ring state C, D, ...: k - 2 graphs,
// no two isomorphic (a map keeping A and B keeps the ring, the only cycle
// through the visible edge, and fixes it pointwise, so it fixes the hinge).
func loopGraphs(k, m int) []familyGraph {
	var out []familyGraph
	for h := 2; h < k; h++ {
		g := ringGraph(k)
		g.n = k + m - 1
		g.name = fmt.Sprintf("ring%d+loop%d@%s", k, m, stateName(h))
		loop := []string{stateName(h)}
		prev := h
		for s := k; s < k+m-1; s++ {
			g.edges = append(g.edges, [2]int{prev, s})
			loop = append(loop, stateName(s))
			prev = s
		}
		g.edges = append(g.edges, [2]int{prev, h})
		g.desc = fmt.Sprintf("ring %s-%s with side loop %s-%s on the hidden state %s", ringPath(k), stateName(0), strings.Join(loop, "-"), stateName(h), stateName(h))
		out = append(out, g)
	}
	return out
}

// chainGraphs returns the linear chains of k states that contain the
// visible edge A-B, one per number a = 0..k-2 of states on A's side (the
// other k-2-a hang on B's side): k - 1 graphs. The line is named in order;
// states on B's side are C, D, ... outward, then A's side continues the
// letters outward from A. A map that keeps A and B keeps each side, so
// different a are not isomorphic.
func chainGraphs(k int) []familyGraph {
	var out []familyGraph
	for a := 0; a <= k-2; a++ {
		b := k - 2 - a
		g := familyGraph{n: k}
		line := []int{}
		// A's side, outermost first: states 2+b .. 2+b+a-1, outward from A.
		for s := a - 1; s >= 0; s-- {
			line = append(line, 2+b+s)
		}
		line = append(line, 0, 1)
		for s := 0; s < b; s++ {
			line = append(line, 2+s)
		}
		names := make([]string, len(line))
		for i, s := range line {
			names[i] = stateName(s)
			if i > 0 && !(line[i-1] == 0 && s == 1) {
				// Direction 0 points away from the visible edge on both sides.
				if i <= a {
					g.edges = append(g.edges, [2]int{s, line[i-1]})
				} else {
					g.edges = append(g.edges, [2]int{line[i-1], s})
				}
			}
		}
		path := strings.Join(names, "-")
		g.name = fmt.Sprintf("chain%d(%s)", k, path)
		g.desc = fmt.Sprintf("linear chain %s: no cycle, equilibrium by construction, labels alternate", path)
		out = append(out, g)
	}
	return out
}

// buildFamilyModel turns a graph into a model with free rates kXY, all
// starting at rate, and the visible labels on A-B. It checks the result
// with the models package (a valid, strongly connected network).
func buildFamilyModel(g familyGraph, plus, minus string, rate float64) (*models.Model, error) {
	if g.n < 2 || g.n > MaxFamilyStates {
		return nil, fmt.Errorf("families: %s: %d states, want 2 to %d", g.name, g.n, MaxFamilyStates)
	}
	m := &models.Model{Name: g.name, Description: g.desc}
	for i := 0; i < g.n; i++ {
		m.States = append(m.States, stateName(i))
	}
	add := func(a, b int, labels [2]string) {
		x, y := stateName(a), stateName(b)
		m.Edges = append(m.Edges, models.EdgeSpec{Between: [2]string{x, y}, Rates: [2]string{"k" + x + y, "k" + y + x}, Labels: labels})
		for _, p := range []string{"k" + x + y, "k" + y + x} {
			m.Params = append(m.Params, models.Param{Name: p, Kind: models.RateParam, Value: rate, Lower: 0, Upper: math.Inf(1)})
		}
	}
	add(0, 1, [2]string{plus, minus})
	for _, e := range g.edges {
		add(e[0], e[1], [2]string{})
	}
	slices.SortFunc(m.Params, func(a, b models.Param) int { return strings.Compare(a.Name, b.Name) })
	m.Labels = []models.LabelSpec{{Name: plus, Detect: 1}, {Name: minus, Detect: 1}}
	slices.SortFunc(m.Labels, func(a, b models.LabelSpec) int { return strings.Compare(a.Name, b.Name) })
	net, err := m.Network(m.Start())
	if err == nil {
		err = net.Validate()
	}
	if err != nil {
		return nil, fmt.Errorf("families: %s: %w", g.name, err)
	}
	return m, nil
}
