package models

import (
	"fmt"
	"math"
	"os"
	"strings"
	"testing"
	"time"
)

// FuzzSpecSimulate takes arbitrary specs through what describe computes
// and a bounded simulation: whatever Parse accepts gives a stationary law
// that is a probability vector, edge and cycle affinities that are finite
// numbers or the infinities of one-way edges (never NaN), an entropy
// production that is not NaN and not below zero beyond rounding, and a
// simulator that records the 200 requested events or stops with an error,
// with finite non-decreasing times, labels in range and a tie count equal
// to the zero gaps it wrote. Seeds in testdata/fuzz/FuzzSpecSimulate and
// the shipped specs run with go test.
func FuzzSpecSimulate(f *testing.F) {
	for _, name := range []string{"ring3", "ring4", "offedge", "shared-label", "balanced", "twocycle-stall"} {
		src, err := os.ReadFile("../testdata/" + name + ".toml")
		if err != nil {
			f.Fatal(err)
		}
		f.Add(string(src))
	}
	f.Add("states=[\"A\",\"B\",\"C\"]\n[[edge]]\nbetween=[\"A\",\"B\"]\nrates=[\"k\",\"m\"]\nlabels=[\"+\",\"-\"]\n[[edge]]\nbetween=[\"B\",\"C\"]\nrates=[\"big\",\"small\"]\n[[edge]]\nbetween=[\"C\",\"A\"]\nrates=[\"k\",\"m\"]\n[param.k]\nvalue=3\n[param.m]\nvalue=0.5\n[param.big]\nvalue=1e300\n[param.small]\nvalue=1e-300\n")
	f.Add("states=[\"A\",\"B\"]\n[[edge]]\nbetween=[\"A\",\"B\"]\none_way=true\nrates=[\"k\"]\nlabels=[\"+\"]\n[param.k]\nvalue=1\n")
	f.Fuzz(func(t *testing.T, s string) {
		// Bounded time: an input that takes 60 s ends the worker (its
		// text goes to a file in the temporary folder), and the fuzzer
		// keeps it as a failing case.
		defer time.AfterFunc(60*time.Second, func() {
			if f, err := os.CreateTemp("", "edgewise-fuzz-slow-*.txt"); err == nil {
				f.WriteString(s)
				f.Close()
			}
			panic(fmt.Sprintf("input took more than 60 s: %.300q", s))
		}).Stop()
		m, err := Parse(strings.NewReader(s), "fuzz.toml")
		if err != nil {
			return
		}
		net, err := m.Network(m.Start())
		if err != nil {
			t.Fatal(err)
		}
		pi, err := net.Stationary()
		if err != nil {
			t.Fatalf("stationary law of an accepted spec: %v", err)
		}
		sum := 0.0
		for _, p := range pi {
			if !(p >= 0) || p > 1 {
				t.Fatalf("stationary law %v", pi)
			}
			sum += p
		}
		if math.Abs(sum-1) > 1e-9 {
			t.Fatalf("stationary law sums to %v", sum)
		}
		for i := range net.Edges {
			if math.IsNaN(net.EdgeAffinity(i)) {
				t.Fatalf("edge %d: affinity NaN", i)
			}
		}
		for _, c := range net.CycleBasis() {
			a := net.Affinity(c)
			if math.IsNaN(a) {
				// Only a cycle through one-way edges in both senses.
				var pos, neg bool
				for _, st := range c.Steps {
					x := net.EdgeAffinity(st.Edge)
					if !st.Forward {
						x = -x
					}
					pos, neg = pos || math.IsInf(x, 1), neg || math.IsInf(x, -1)
				}
				if !pos || !neg {
					t.Fatalf("cycle %s: affinity NaN", c.Names(net.States))
				}
			}
		}
		sigma := net.EntropyProduction(pi)
		if math.IsNaN(sigma) || sigma < -1e-9*(1+math.Abs(sigma)) {
			t.Fatalf("entropy production %v", sigma)
		}
		sim, err := NewSimulator(net, 1)
		if err != nil {
			t.Fatalf("simulator of an accepted spec: %v", err)
		}
		sim.StartStationary()
		ev, _ := sim.Visible(200, nil)
		if sim.Err() == nil && len(ev) != 200 {
			t.Fatalf("%d events recorded without an error", len(ev))
		}
		zeros := 0
		for i, e := range ev {
			if math.IsNaN(e.Time) || math.IsInf(e.Time, 0) || (i > 0 && e.Time < ev[i-1].Time) {
				t.Fatalf("event %d: time %v", i, e.Time)
			}
			if e.Label < 0 || e.Label >= len(net.Labels) {
				t.Fatalf("event %d: label %d", i, e.Label)
			}
			if i > 0 && e.Time == ev[i-1].Time {
				zeros++
			}
		}
		if sim.Ties() != zeros {
			t.Fatalf("Ties() = %d, zero gaps %d", sim.Ties(), zeros)
		}
	})
}
