//go:build long

package infer

import (
	"flag"
	"math/rand/v2"
	"testing"

	"edgewise/models"
)

var recoveryReps = flag.Int("recovery-reps", 20, "replicates per scheme of TestTopologyRecoveryLong")

// TestTopologyRecoveryLong: on records simulated from each of 4 schemes
// (3-ring, 4-ring, ring with a chord, ring with a side loop; 10^5 events,
// rates drawn log-uniformly over a factor 10 around 1 with a seeded
// generator), the generating topology ranks first by BIC among the family
// candidates (rings of 3-5 states, rings of 4-5 with a chord, rings of 3-4
// with a side loop, chains of 2-4) in at least 90% of the replicates.
// Run: go test -tags long -run TopologyRecoveryLong -v -timeout 300m ./infer -args -recovery-reps 20
func TestTopologyRecoveryLong(t *testing.T) {
	fams, err := Families(FamilyOptions{Rings: StateRange{Min: 3, Max: 5}, Chords: StateRange{Min: 4, Max: 5}, Loops: StateRange{Min: 3, Max: 4}, Chains: StateRange{Min: 2, Max: 4}})
	if err != nil {
		t.Fatal(err)
	}
	var cands []Candidate
	byName := map[string]*models.Model{}
	for _, m := range fams {
		cands = append(cands, Candidate{Name: m.Name, Model: m})
		byName[m.Name] = m
	}
	truths := []string{"ring3", "ring4", "ring4+chord(A,C)", "ring3+loop3@C"}
	for ti, name := range truths {
		tm, ok := byName[name]
		if !ok {
			t.Fatalf("no family member %q", name)
		}
		wins := 0
		for rep := 0; rep < *recoveryReps; rep++ {
			rng := rand.New(rand.NewPCG(uint64(ti), uint64(rep)))
			m := randomRatesModel(tm, rng)
			d := truthData(t, m, uint64(1000*ti+rep), 1, 100000)
			res, err := Compare(cands, d, CompareOptions{Fit: FitOptions{Starts: 4, Seed: uint64(rep)}})
			if err != nil {
				t.Fatal(err)
			}
			if res.Ranked[0].Name == name {
				wins++
			} else {
				t.Logf("%s rep %d: first by BIC is %s (dBIC of the truth %.2f)", name, rep, res.Ranked[0].Name, deltaOf(res, name))
			}
		}
		t.Logf("%s: first by BIC in %d of %d replicates", name, wins, *recoveryReps)
		if float64(wins) < 0.9*float64(*recoveryReps) {
			t.Errorf("%s recovered in %d of %d", name, wins, *recoveryReps)
		}
	}
}

func deltaOf(res *Ranking, name string) float64 {
	for _, r := range res.Ranked {
		if r.Name == name {
			return r.DeltaBIC
		}
	}
	return -1
}
