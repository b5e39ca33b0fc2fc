package infer_test

import (
	"fmt"
	"strings"

	"edgewise/infer"
)

// Generating candidate networks around one visible edge whose labels in
// the records are "fwd" and "bwd": rings of 3 and 4 states, rings of 4
// states with one chord, and the exhaustive enumeration up to 4 states
// (1 + 3 + 15 topologies).
func ExampleFamilies() {
	ms, err := infer.Families(infer.FamilyOptions{
		Plus: "fwd", Minus: "bwd",
		Rings:      infer.StateRange{Min: 3, Max: 4},
		Chords:     infer.StateRange{Min: 4, Max: 4},
		Exhaustive: 4,
	})
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println(len(ms), "candidates")
	for _, m := range ms[:4] {
		fmt.Printf("%-17s %d free rates  %s\n", m.Name, len(m.Free()), m.Description)
	}
	// A family option that makes no candidate is an error.
	_, err = infer.Families(infer.FamilyOptions{Chords: infer.StateRange{Min: 3, Max: 3}})
	fmt.Println(strings.SplitN(err.Error(), ",", 2)[0])
	// Output:
	// 23 candidates
	// ring3             6 free rates  unicyclic ring A-B-C-A
	// ring4             8 free rates  unicyclic ring A-B-C-D-A
	// ring4+chord(A,C)  10 free rates  ring A-B-C-D-A with chord A-C (two independent cycles)
	// ring4+chord(B,D)  10 free rates  ring A-B-C-D-A with chord B-D (two independent cycles)
	// families: chords 3: a chord joins two ring states that are not neighbours
}

// Imposing a known driving force under the tight-coupling assumption:
// every cycle that crosses the visible edge once forward has affinity
// 4 k_BT. A ring with a chord has two such cycles; the third cycle (chord
// plus far side) is then at affinity 0.
func ExampleTightCoupling() {
	ms, err := infer.Families(infer.FamilyOptions{Chords: infer.StateRange{Min: 5, Max: 5}})
	if err != nil {
		fmt.Println(err)
		return
	}
	m := ms[2] // ring5+chord(B,D)
	cycles, _ := infer.VisibleCycles(m, "+")
	fmt.Println(m.Name, "crossing cycles:", cycles)
	tc, err := infer.TightCoupling(m, "+", 4)
	if err != nil {
		fmt.Println(err)
		return
	}
	for _, a := range tc.Affinities {
		fmt.Printf("cycle %v = %g k_BT, solving %s\n", a.Cycle, a.Value, a.Solve)
	}
	fmt.Println(len(tc.Free()), "free rates left of", len(m.Free()))
	// Output:
	// ring5+chord(B,D) crossing cycles: [[A B D E A] [A B C D E A]]
	// cycle [A B D E A] = 4 k_BT, solving kAE
	// cycle [A B C D E A] = 4 k_BT, solving kDC
	// 10 free rates left of 12
}
