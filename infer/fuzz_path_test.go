package infer

import (
	"fmt"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"sync"
	"testing"
	"time"

	"edgewise/likelihood"
	"edgewise/models"
)

// fuzzModel is the fixed model of FuzzRecordsPath: the shipped 3-state
// ring (labels + and -), its evaluator and predictor, built once.
var fuzzModel = sync.OnceValues(func() (*likelihood.Evaluator, *likelihood.Predictor) {
	src, err := os.Open("../testdata/ring3.toml")
	if err != nil {
		panic(err)
	}
	defer src.Close()
	m, err := models.Parse(src, "ring3.toml")
	if err != nil {
		panic(err)
	}
	net, err := m.Network(m.Start())
	if err != nil {
		panic(err)
	}
	ev, err := likelihood.NewNetworkEvaluator(net, likelihood.Options{Workers: 1})
	if err != nil {
		panic(err)
	}
	k, err := likelihood.NewKernels(net)
	if err != nil {
		panic(err)
	}
	p, err := likelihood.NewPredictor(k, likelihood.Instrument{})
	if err != nil {
		panic(err)
	}
	return ev, p
})

// fuzzEstimate fails when an estimate breaks the rules every statistic
// keeps: no infinite SE; a finite value lies inside a finite interval
// (1e-9 relative slack for rounding); a non-negative quantity (rate,
// activity, probability) has no negative bound.
func fuzzEstimate(t *testing.T, name string, e Estimate, nonNegative bool) {
	t.Helper()
	if math.IsInf(e.SE, 0) || e.SE < 0 {
		t.Fatalf("%s: SE %v (%+v)", name, e.SE, e)
	}
	if math.IsInf(e.Lo, 1) || math.IsInf(e.Hi, -1) || e.Lo > e.Hi {
		t.Fatalf("%s: interval [%v, %v] (%+v)", name, e.Lo, e.Hi, e)
	}
	v := e.Value
	if !math.IsNaN(v) && !math.IsInf(v, 0) {
		slack := 1e-9 * (1 + math.Abs(v))
		if (!math.IsNaN(e.Lo) && e.Lo > v+slack) || (!math.IsNaN(e.Hi) && e.Hi < v-slack) {
			t.Fatalf("%s: value %v outside [%v, %v]", name, v, e.Lo, e.Hi)
		}
	}
	if nonNegative && (v < 0 || e.Lo < 0) {
		t.Fatalf("%s: negative value or bound (%+v)", name, e)
	}
}

// fuzzDeadline bounds the time of one fuzz input: after 60 s it writes the
// input to a file in the temporary folder (a worker's output is not
// shown) and panics, which ends the worker; the fuzzer keeps the input as
// a failing case. Call the returned function when the input is done.
func fuzzDeadline(input string) func() {
	t := time.AfterFunc(60*time.Second, func() {
		f, err := os.CreateTemp("", "edgewise-fuzz-slow-*.txt")
		if err == nil {
			f.WriteString(input)
			f.Close()
		}
		panic(fmt.Sprintf("input took more than 60 s: %.300q", input))
	})
	return func() { t.Stop() }
}

// FuzzRecordsPath takes arbitrary records through the whole model-free
// path and a fixed model: whatever the reader accepts, the summary (with
// bootstraps), the fluctuation test (count-stopped, post-selected and
// fixed-time windows), the entropy bounds, the log-likelihood of the
// 3-state ring and the model checks either return an error or numbers that
// keep the rules of fuzzEstimate: no panic, no infinite SE or z, no
// negative rate, no NaN ln L without an error. (Item 3 of the reliability
// issue, a panic on an overflowing span in the diffusion fit, is the kind
// of failure it finds.) Seeds in testdata/fuzz/FuzzRecordsPath run with go
// test.
func FuzzRecordsPath(f *testing.F) {
	for _, s := range []string{
		"record,time,label\n1,0.5,+\n1,0.7,-\n2,0.1,+\n2,0.3,+\n2,0.9,-\n",
		"time,label\n0,+\n1,+\n1,-\n2,+\n3,-\n3.5,-\n4,end\n",
		"time,label\n-1e308,+\n1e308,-\n",
		"time,label\n0,+\n4.9e-324,-\n1e-320,+\n",
		"time,label\n1,+\n2,+\n",
		"time,label\n1,+\n",
		"time,state\n0,A\n1,B\n2,C\n3,A\n4,B\n",
		"time,label\n0,a\n1,b\n2,a\n3,c\n4,b\n5,a\n",
	} {
		f.Add(s)
	}
	if src, err := os.ReadFile(filepath.Join("..", "testdata", "ring3-demo.csv")); err == nil {
		f.Add(string(src[:min(len(src), 4000)]))
	}
	f.Fuzz(func(t *testing.T, src string) {
		defer fuzzDeadline(src)()
		d, _, err := ReadRecords(strings.NewReader(src), "fuzz.csv", ReadOptions{})
		if err != nil {
			return
		}
		s, err := Summarize(d, SummaryOptions{Seed: 1, DiffusionBoot: 20, Bootstrap: 20})
		if err != nil {
			t.Fatalf("summary refused what the reader accepted: %v", err)
		}
		p := &s.Pooled
		for l, e := range p.Rates {
			fuzzEstimate(t, "rate of "+d.Labels[l], e, true)
		}
		for a := range p.Next {
			for b, e := range p.Next[a] {
				fuzzEstimate(t, "P(next|last)", e, true)
				if e.Value > 1 || e.Hi > 1 {
					t.Fatalf("P(%d|%d) above 1: %+v", b, a, e)
				}
			}
		}
		fuzzEstimate(t, "activity", p.Activity, true)
		fuzzEstimate(t, "J", p.Current, false)
		fuzzEstimate(t, "D", p.Diffusion, true)
		fuzzEstimate(t, "F", p.Affinity, false)
		fuzzEstimate(t, "Fano", p.Fano, false)
		if len(d.Labels) < 2 {
			return
		}
		edge := EdgeLabels{Forward: d.Labels[0], Backward: d.Labels[1]}
		if fr, err := FluctuationTest(d, []int{1, 2, 5}, FluctOptions{Labels: edge, Boot: 20, Seed: 1, FixedTime: true}); err == nil {
			for _, x := range fr {
				kinds := []Symmetry{x.Raw, x.PostSelected}
				if x.FixedTime != nil {
					kinds = append(kinds, *x.FixedTime)
				}
				for _, k := range kinds {
					fuzzEstimate(t, k.Kind+" slope", k.Slope, false)
					if math.IsInf(k.Versus.Z, 0) || k.Versus.P < 0 || k.Versus.P > 1 {
						t.Fatalf("%s: z %v, p %v", k.Kind, k.Versus.Z, k.Versus.P)
					}
				}
			}
		}
		if b, err := EntropyBounds(d, BoundOptions{Labels: edge, Seed: 1}); err == nil {
			for name, e := range map[string]Estimate{"F*J": b.FJ, "TUR": b.TUR, "D": b.D, "J": b.J, "waiting time": b.WaitingTime, "transition": b.Transition} {
				fuzzEstimate(t, name, e, false)
			}
		}
		// The fixed model: only data whose labels are its own.
		if slices.ContainsFunc(d.Labels, func(l string) bool { return l != "+" && l != "-" }) {
			return
		}
		ev, pred := fuzzModel()
		ll, err := ev.LogLik(d)
		switch {
		case err != nil && !strings.Contains(err.Error(), "record"):
			t.Fatalf("ln L error names no record: %v", err)
		case err == nil && (math.IsNaN(ll) || math.IsInf(ll, 0)):
			t.Fatalf("ln L = %v without an error", ll)
		}
		if len(d.Labels) != 2 {
			return
		}
		// The data's label order must be the model's (+, -).
		if err := d.PutFirst("+", "-"); err != nil {
			t.Fatal(err)
		}
		rows, _, err := AgainstModel(d, pred, AgainstOptions{Plus: 0, Minus: 1, Windows: []int{2, 5}, FixedTime: true})
		if err != nil {
			return
		}
		for _, a := range rows {
			if math.IsInf(a.Test.Z, 0) || a.Test.P < 0 || a.Test.P > 1 {
				t.Fatalf("%s: z %v, p %v (%s)", a.Quantity, a.Test.Z, a.Test.P, a.Test.Note)
			}
		}
	})
}
