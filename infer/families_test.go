package infer

import (
	"reflect"
	"strings"
	"testing"

	"edgewise/models"
)

// allFamilies asks for every family at sizes that exercise each rule.
var allFamilies = FamilyOptions{
	Rings: StateRange{3, 7}, Chords: StateRange{4, 7}, Loops: StateRange{3, 6},
	Chains: StateRange{2, 6}, Exhaustive: 5,
}

// TestFamiliesValid: every generated model survives the models package's
// checks (written as a spec and parsed back to an equal model, so its
// names, parameters and labels are valid; its network validates and is
// strongly connected), carries + on A->B and - on B->A, has distinct state
// and parameter names and two free rates per edge, and no two models share
// a name.
func TestFamiliesValid(t *testing.T) {
	ms, err := Families(allFamilies)
	if err != nil {
		t.Fatal(err)
	}
	names := map[string]bool{}
	for _, m := range ms {
		if names[m.Name] {
			t.Errorf("name %s repeated", m.Name)
		}
		names[m.Name] = true
		back, err := roundTrip(m)
		if err != nil {
			t.Fatalf("%s: %v", m.Name, err)
		}
		if !reflect.DeepEqual(back, m) {
			t.Errorf("%s: spec round trip changed the model:\n%+v\n%+v", m.Name, m, back)
		}
		net, err := m.Network(m.Start())
		if err != nil {
			t.Fatal(err)
		}
		if err := net.Validate(); err != nil {
			t.Errorf("%s: %v", m.Name, err)
		}
		if _, err := net.Stationary(); err != nil {
			t.Errorf("%s: %v", m.Name, err)
		}
		e0 := m.Edges[0]
		if e0.Between != [2]string{"A", "B"} || e0.Labels != [2]string{"+", "-"} {
			t.Errorf("%s: first edge %+v, want A-B with + and -", m.Name, e0)
		}
		for _, e := range m.Edges[1:] {
			if e.Labels != [2]string{} {
				t.Errorf("%s: hidden edge %v carries labels %v", m.Name, e.Between, e.Labels)
			}
		}
		if len(m.Params) != 2*len(m.Edges) || len(m.Free()) != len(m.Params) {
			t.Errorf("%s: %d parameters (%d free) for %d edges", m.Name, len(m.Params), len(m.Free()), len(m.Edges))
		}
		for _, p := range m.Params {
			if p.Value != 1 || p.Kind != models.RateParam {
				t.Errorf("%s: parameter %+v", m.Name, p)
			}
		}
	}
}

// TestFamilyCounts: sizes and shapes of each family. Rings: one per size,
// one cycle. Chords: k(k-3)/2 per size (every non-neighbour pair; the doc
// argues none are isomorphic, checked here by TopologyKey), two independent
// cycles, k + 1 edges. Loops: k - 2 per size (one per hidden hinge), two
// cycles. Chains: k - 1 per size (the position of the visible edge), no
// cycle. Within the families no two models share a topology.
func TestFamilyCounts(t *testing.T) {
	type want struct{ count, states, edges int }
	cases := []struct {
		o   FamilyOptions
		per func(k int) want
		r   StateRange
	}{
		{FamilyOptions{Rings: StateRange{3, 8}}, func(k int) want { return want{1, k, k} }, StateRange{3, 8}},
		{FamilyOptions{Chords: StateRange{4, 8}}, func(k int) want { return want{k * (k - 3) / 2, k, k + 1} }, StateRange{4, 8}},
		{FamilyOptions{Loops: StateRange{3, 7}}, func(k int) want { return want{k - 2, k + 2, k + 3} }, StateRange{3, 7}},
		{FamilyOptions{Loops: StateRange{4, 5}, LoopStates: 5}, func(k int) want { return want{k - 2, k + 4, k + 5} }, StateRange{4, 5}},
		{FamilyOptions{Chains: StateRange{2, 8}}, func(k int) want { return want{k - 1, k, k - 1} }, StateRange{2, 8}},
	}
	for _, c := range cases {
		ms, err := Families(c.o)
		if err != nil {
			t.Fatal(err)
		}
		keys := map[string]string{}
		i := 0
		for k := c.r.Min; k <= c.r.Max; k++ {
			w := c.per(k)
			for j := 0; j < w.count; j++ {
				if i >= len(ms) {
					t.Fatalf("%+v: only %d models", c.o, len(ms))
				}
				m := ms[i]
				i++
				if len(m.States) != w.states || len(m.Edges) != w.edges {
					t.Errorf("%s: %d states, %d edges; want %d, %d", m.Name, len(m.States), len(m.Edges), w.states, w.edges)
				}
				if w.states <= maxKeyStates {
					key, err := TopologyKey(m, "+")
					if err != nil {
						t.Fatal(err)
					}
					if other, dup := keys[key]; dup {
						t.Errorf("%s and %s are the same topology", m.Name, other)
					}
					keys[key] = m.Name
				}
			}
		}
		if i != len(ms) {
			t.Errorf("%+v: %d models, want %d", c.o, len(ms), i)
		}
	}
}

// TestFamilyNames: the documented names and state layouts.
func TestFamilyNames(t *testing.T) {
	ms, err := Families(FamilyOptions{Rings: StateRange{4, 4}, Chords: StateRange{5, 5}, Loops: StateRange{4, 4}, Chains: StateRange{4, 4}})
	if err != nil {
		t.Fatal(err)
	}
	var got []string
	for _, m := range ms {
		got = append(got, m.Name)
	}
	want := []string{
		"ring4",
		"ring5+chord(A,C)", "ring5+chord(A,D)", "ring5+chord(B,D)", "ring5+chord(B,E)", "ring5+chord(C,E)",
		"ring4+loop3@C", "ring4+loop3@D",
		"chain4(A-B-C-D)", "chain4(D-A-B-C)", "chain4(D-C-A-B)",
	}
	if strings.Join(got, " ") != strings.Join(want, " ") {
		t.Errorf("names\n%v\nwant\n%v", got, want)
	}
	// chain4(D-A-B-C): edges A-B (visible), D's side and C's side.
	ch := ms[9]
	pairs := map[[2]string]bool{}
	for _, e := range ch.Edges {
		pairs[e.Between] = true
	}
	if !pairs[[2]string{"A", "B"}] || !pairs[[2]string{"A", "D"}] || !pairs[[2]string{"B", "C"}] || len(pairs) != 3 {
		t.Errorf("chain4(D-A-B-C) edges %v", ch.Edges)
	}
	// ring4+loop3@D: the loop D-E-F-D.
	lp := ms[7]
	for _, e := range [][2]string{{"D", "E"}, {"E", "F"}, {"F", "D"}} {
		found := false
		for _, x := range lp.Edges {
			found = found || x.Between == e
		}
		if !found {
			t.Errorf("%s lacks edge %v", lp.Name, e)
		}
	}
}

// TestFamilyRingIsGraph: the families and the enumeration agree on shared
// topologies (ring4 is one of the graph4 topologies, chain3(C-A-B) one of
// graph3), and TopologyKey tells a direction change apart (the chain with
// the extra state on A's side is not the one with it on B's side).
func TestFamilyRingIsGraph(t *testing.T) {
	fam, err := Families(FamilyOptions{Rings: StateRange{3, 5}, Chords: StateRange{4, 5}, Loops: StateRange{3, 3}, Chains: StateRange{2, 5}})
	if err != nil {
		t.Fatal(err)
	}
	all, err := Families(FamilyOptions{Exhaustive: 5})
	if err != nil {
		t.Fatal(err)
	}
	keys := map[string]string{}
	for _, m := range all {
		k, err := TopologyKey(m, "+")
		if err != nil {
			t.Fatal(err)
		}
		if other, dup := keys[k]; dup {
			t.Fatalf("%s and %s share a key", m.Name, other)
		}
		keys[k] = m.Name
	}
	for _, m := range fam {
		k, err := TopologyKey(m, "+")
		if err != nil {
			t.Fatal(err)
		}
		if len(m.States) <= 5 && keys[k] == "" {
			t.Errorf("%s is not among the enumerated graphs", m.Name)
		}
	}
	// Reversing the visible direction of chain3(A-B-C) gives chain3(C-A-B).
	ch, _ := Families(FamilyOptions{Chains: StateRange{3, 3}})
	k1, _ := TopologyKey(ch[0], "+")
	k2, _ := TopologyKey(ch[0], "-")
	k3, _ := TopologyKey(ch[1], "+")
	if k1 == k3 || k2 != k3 {
		t.Errorf("chain keys %s %s %s: want the reversed chain3(A-B-C) to equal chain3(C-A-B)", k1, k2, k3)
	}
}

// TestFamilyOptionErrors: options that make no candidate, or are out of
// range, are refused with a message naming the family and the value.
func TestFamilyOptionErrors(t *testing.T) {
	cases := []struct {
		o    FamilyOptions
		want string
	}{
		{FamilyOptions{}, "no family selected"},
		{FamilyOptions{Rings: StateRange{2, 4}}, "rings 2-4: a ring needs at least 3 states"},
		{FamilyOptions{Rings: StateRange{5, 4}}, "rings 5-4: the smallest size is above the largest"},
		{FamilyOptions{Chords: StateRange{3, 3}}, "chords 3: a chord joins two ring states"},
		{FamilyOptions{Loops: StateRange{2, 3}}, "loops 2-3"},
		{FamilyOptions{Loops: StateRange{3, 3}, LoopStates: 2}, "loop states 2"},
		{FamilyOptions{Loops: StateRange{20, 24}, LoopStates: 4}, "27 states in all"},
		{FamilyOptions{Chains: StateRange{1, 3}}, "chains 1-3"},
		{FamilyOptions{Rings: StateRange{3, 27}}, "at most 26 states"},
		{FamilyOptions{Exhaustive: 6}, "exhaustive enumeration up to 6 states"},
		{FamilyOptions{Exhaustive: 1}, "want 2 to 5"},
		{FamilyOptions{Rings: StateRange{3, 3}, Rate: -1}, "start rate -1"},
		{FamilyOptions{Rings: StateRange{3, 3}, Plus: "x", Minus: "x"}, "both \"x\""},
		{FamilyOptions{Rings: StateRange{3, 3}, Plus: "a,b"}, "comma"},
		{FamilyOptions{Rings: StateRange{3, 3}, Plus: "end"}, "reserved"},
	}
	for _, c := range cases {
		_, err := Families(c.o)
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%+v: error %v, want it to mention %q", c.o, err, c.want)
		}
	}
	// Several problems are reported together.
	err := FamilyOptions{Rings: StateRange{2, 2}, Chords: StateRange{3, 3}}.Validate()
	if err == nil || !strings.Contains(err.Error(), "rings") || !strings.Contains(err.Error(), "chords") {
		t.Errorf("joined errors: %v", err)
	}
}

// TestFamilyLabelsAndRate: custom label names and start rate reach the
// model.
func TestFamilyLabelsAndRate(t *testing.T) {
	ms, err := Families(FamilyOptions{Rings: StateRange{3, 3}, Plus: "fwd", Minus: "bwd", Rate: 2.5})
	if err != nil {
		t.Fatal(err)
	}
	m := ms[0]
	if m.Edges[0].Labels != [2]string{"fwd", "bwd"} || m.Labels[0].Name != "bwd" || m.Labels[1].Name != "fwd" {
		t.Errorf("labels %+v %+v", m.Edges[0].Labels, m.Labels)
	}
	if m.Params[0].Value != 2.5 {
		t.Errorf("start %v", m.Params[0].Value)
	}
	if _, err := roundTrip(m); err != nil {
		t.Error(err)
	}
}

// TestParseStateRange: flag syntax.
func TestParseStateRange(t *testing.T) {
	for s, want := range map[string]StateRange{"4": {4, 4}, "3-6": {3, 6}, " 3 - 5 ": {3, 5}} {
		got, err := ParseStateRange(s)
		if err != nil || got != want {
			t.Errorf("%q: %v %v", s, got, err)
		}
	}
	for _, s := range []string{"", "a", "3-", "-3", "3-x", "3.5"} {
		if _, err := ParseStateRange(s); err == nil {
			t.Errorf("%q accepted", s)
		}
	}
	if (StateRange{3, 6}).String() != "3-6" || (StateRange{4, 4}).String() != "4" {
		t.Error("String")
	}
}

// FuzzParseStateRange: an accepted range prints back to a string that
// parses to the same range.
func FuzzParseStateRange(f *testing.F) {
	for _, s := range []string{"4", "3-6", " 3 - 5 ", "", "-3", "3-", "a", "9999999999999999999"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		r, err := ParseStateRange(s)
		if err != nil {
			return
		}
		back, err := ParseStateRange(r.String())
		if err != nil || back != r {
			t.Fatalf("%q -> %v -> %q -> %v (%v)", s, r, r.String(), back, err)
		}
	})
}
