package models

import (
	"math"
	"math/rand/v2"
	"os"
	"strings"
	"testing"
)

func parseFile(t *testing.T, path string) *Model {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	m, err := Parse(f, path)
	if err != nil {
		t.Fatal(err)
	}
	return m
}

// cycleAffinity computes ln(prod forward / prod backward) along a
// constraint's closed state sequence directly from the numeric network: a
// route independent of the log-space linear system that enforces the
// constraint. With a.Edges the step i runs along edge a.Edges[i] (which
// must join its states); without, along the one edge joining them.
func cycleAffinity(t *testing.T, net *Network, a AffinitySpec) float64 {
	t.Helper()
	idx := map[string]int{}
	for i, s := range net.States {
		idx[s] = i
	}
	cycle := a.Cycle
	sum := 0.0
	for i := 0; i+1 < len(cycle); i++ {
		u, v := idx[cycle[i]], idx[cycle[i+1]]
		found := 0
		for k, e := range net.Edges {
			if a.Edges != nil && a.Edges[i] != k {
				continue
			}
			switch {
			case e.From == u && e.To == v:
				sum += math.Log(e.Rate[0] / e.Rate[1])
				found++
			case e.From == v && e.To == u:
				sum += math.Log(e.Rate[1] / e.Rate[0])
				found++
			}
		}
		if found != 1 {
			t.Fatalf("%d edges for the step %s-%s", found, cycle[i], cycle[i+1])
		}
	}
	return sum
}

// TestAffinityConstraintsHold: for random free-parameter vectors spanning
// six decades, every constraint of the shipped specs holds to 1e-12
// (absolute, in k_BT: the log-space solve loses only a few ulps of the
// ln-rates, each |ln w| < 30 here).
func TestAffinityConstraintsHold(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	for _, path := range []string{"../testdata/offedge.toml", "../testdata/balanced.toml", "../testdata/ring3-slip.toml"} {
		m := parseFile(t, path)
		if len(m.Affinities) == 0 {
			t.Fatalf("%s: no constraints", path)
		}
		for trial := 0; trial < 50; trial++ {
			x := m.Start()
			for i := range x {
				x[i] *= math.Pow(10, 6*rng.Float64()-3)
			}
			net, err := m.Network(x)
			if err != nil {
				t.Fatal(err)
			}
			for _, a := range m.Affinities {
				if got := cycleAffinity(t, net, a); math.Abs(got-a.Value) > 1e-12 {
					t.Fatalf("%s: cycle %v affinity %.15g, want %g", path, a.Cycle, got, a.Value)
				}
			}
		}
	}
	// The detailed-balance spec must give a reversible network at any x
	// (Kolmogorov's criterion: zero affinity on the only cycle).
	m := parseFile(t, "../testdata/balanced.toml")
	net, _ := m.Network(m.Start())
	if ok, worst := net.DetailedBalance(1e-12); !ok {
		t.Fatalf("balanced spec not at detailed balance: worst %g", worst)
	}
}

// TestJacobianFiniteDifferences: d ln w / d ln x_j from Jacobian against
// central differences of ln w in ln x_j. ln w is linear in ln x (ties are
// identities, solved rates are linear in log space), so the differences
// are exact up to rounding: tolerance 1e-8 with step 1e-4.
func TestJacobianFiniteDifferences(t *testing.T) {
	for _, path := range []string{"../testdata/offedge.toml", "../testdata/shared-label.toml", "../testdata/ring3.toml", "../testdata/ring3-slip.toml"} {
		m := parseFile(t, path)
		x := m.Start()
		jac, err := m.Jacobian(x)
		if err != nil {
			t.Fatal(err)
		}
		const h = 1e-4
		for j := range x {
			up, dn := append([]float64(nil), x...), append([]float64(nil), x...)
			isDetect := false
			for _, p := range m.Params {
				if p.Name == m.Free()[j] && p.Kind == DetectParam {
					isDetect = true
				}
			}
			if isDetect {
				up[j], dn[j] = x[j]+h/10, x[j]-h/10
			} else {
				up[j], dn[j] = x[j]*math.Exp(h), x[j]*math.Exp(-h)
			}
			nu, err1 := m.Network(up)
			nd, err2 := m.Network(dn)
			if err1 != nil || err2 != nil {
				t.Fatal(err1, err2)
			}
			for e := range nu.Edges {
				for d := 0; d < 2; d++ {
					if nu.Edges[e].Rate[d] == 0 {
						continue
					}
					fd := (math.Log(nu.Edges[e].Rate[d]) - math.Log(nd.Edges[e].Rate[d])) / (2 * h)
					if isDetect {
						fd = 0 // rates do not depend on a detection parameter
						if nu.Edges[e].Rate[d] != nd.Edges[e].Rate[d] {
							t.Fatalf("%s: rate depends on detection parameter", path)
						}
					}
					if got := jac.LogRate[2*e+d][j]; math.Abs(got-fd) > 1e-8 {
						t.Errorf("%s: d ln w[%d,%d]/d ln %s = %g, differences give %g", path, e, d, m.Free()[j], got, fd)
					}
				}
			}
			for l := range nu.Labels {
				fd := (nu.Labels[l].Detect - nd.Labels[l].Detect) / (2 * h / 10)
				if got := jac.Detect[l][j]; math.Abs(got-fd) > 1e-8 {
					t.Errorf("%s: d p[%s]/d %s = %g, differences give %g", path, nu.Labels[l].Name, m.Free()[j], got, fd)
				}
			}
		}
	}
}

// TestAffinityConstraintErrors: each bad constraint is reported with file,
// line and key.
func TestAffinityConstraintErrors(t *testing.T) {
	base, err := os.ReadFile("../testdata/offedge.toml")
	if err != nil {
		t.Fatal(err)
	}
	// Strip the shipped constraints; each case appends its own.
	src := string(base[:strings.Index(string(base), "[[affinity]]")])
	// offedge.toml gives kbo and kco no [param] table (they are solved): a
	// case declares what it does not solve, and drops the declarations of
	// the rates it does solve.
	drop := func(s string, names ...string) string {
		for _, n := range names {
			i := strings.Index(s, "[param."+n+"]\n")
			j := i + strings.Index(s[i:], "\n[") + 1
			s = s[:i] + s[j:]
		}
		return s
	}
	kco := "[param.kco]\nvalue = 1.0\n"
	both := kco + "[param.kbo]\nvalue = 1.0\n"
	aff := func(cycle string, value, solve string) string {
		return "[[affinity]]\ncycle = [" + cycle + "]\nvalue = " + value + "\nsolve = \"" + solve + "\"\n"
	}
	osbo := `"Open", "Shut", "Bound", "Open"`
	cases := []struct {
		drop  []string
		extra string
		want  string
	}{
		{nil, kco + aff(`"Open", "Shut", "Charged", "Open"`, "1", "kbo"),
			"affinity[0].cycle: states [Open Shut Charged Open] do not form a cycle: no edge joins Shut and Charged"},
		{nil, kco + aff(`"Open", "Shut", "Open"`, "1", "kbo"), "affinity[0].cycle: states [Open Shut Open] do not form a cycle: a cycle of two states needs two parallel edges"},
		{nil, kco + aff(`"Open"`, "1", "kbo"), "need at least two distinct states"},
		{nil, kco + aff(`"Open", "Shut", "Bound", "Shut", "Open"`, "1", "kbo"), "\"Shut\" is visited twice"},
		{nil, kco + aff(`"Open", "Shut", "Nowhere", "Open"`, "1", "kbo"), "unknown state \"Nowhere\""},
		{nil, both + "[[affinity]]\ncycle = [" + osbo + "]\nvalue = 1\n",
			"affinity[0].solve: missing: name the rate this constraint determines (one of kbo, kbs, kob, kos, ksb, kso)"},
		{nil, both + aff(osbo, "1", "zz"), "\"zz\" is not a rate of this cycle"},
		{[]string{"kso"}, kco + aff(osbo, "1", "kso") + aff(`"Bound", "Open", "Shut", "Bound"`, "1", "kbo"),
			"affinity[1].cycle: repeats affinity[0]"},
		{[]string{"kso"}, kco + aff(osbo, "1", "kso") + aff(`"Open", "Bound", "Shut", "Open"`, "1", "kbo"),
			"affinity[1].value: contradicts affinity[0]: that fixes this cycle's affinity at -1 k_BT, not 1"},
		// The outer cycle is the sum of the two inner ones: 1 + 4 = 5.
		{[]string{"kbs"}, aff(osbo, "1", "kbo") + aff(`"Bound", "Charged", "Open", "Bound"`, "4", "kco") + aff(`"Open", "Shut", "Bound", "Charged", "Open"`, "6", "kbs"),
			"affinity[2].value: contradicts affinity[0], affinity[1]: that fixes this cycle's affinity at 5 k_BT, not 6"},
		{nil, both + aff(osbo, "1", "kbo"), "param.kbo: parameter is solved from affinity[0] and takes no [param] table"},
		{nil, kco + aff(osbo, "1", "kbo") + aff(`"Open", "Bound", "Charged", "Open"`, "-4", "kbo"),
			"affinity[1].solve: \"kbo\" is already solved by affinity[0]"},
	}
	for _, c := range cases {
		_, err := Parse(strings.NewReader(drop(src, c.drop...)+c.extra), "x.toml")
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("want error containing %q, got %v", c.want, err)
			continue
		}
		if !strings.Contains(err.Error(), "x.toml:") {
			t.Errorf("error without a line: %v", err)
		}
	}
	// The three-constraint system is fine when it is consistent; the third
	// then repeats the first two.
	_, err = Parse(strings.NewReader(drop(src, "kbs")+aff(osbo, "1", "kbo")+aff(`"Bound", "Charged", "Open", "Bound"`, "4", "kco")+aff(`"Open", "Shut", "Bound", "Charged", "Open"`, "5", "kbs")), "x.toml")
	if err == nil || !strings.Contains(err.Error(), "affinity[2].cycle: repeats affinity[0], affinity[1]") {
		t.Errorf("consistent dependent constraint: got %v", err)
	}
	// A constraint through a one-way edge.
	oneway := "states=[\"A\",\"B\",\"C\"]\n[[edge]]\nbetween=[\"A\",\"B\"]\nrates=[\"k\",\"m\"]\nlabels=[\"+\",\"-\"]\n[[edge]]\nbetween=[\"B\",\"C\"]\none_way=true\nrates=[\"u\"]\n[[edge]]\nbetween=[\"C\",\"A\"]\nrates=[\"v\",\"w\"]\n[param.k]\nvalue=1\n[param.m]\nvalue=1\n[param.u]\nvalue=1\n[param.v]\nvalue=1\n[[affinity]]\ncycle=[\"A\",\"B\",\"C\",\"A\"]\nvalue=2\nsolve=\"w\"\n"
	_, err = Parse(strings.NewReader(oneway), "x.toml")
	if err == nil || !strings.Contains(err.Error(), "affinity[0].cycle: the cycle runs through the one-way edge B-C") {
		t.Errorf("one-way constraint: got %v", err)
	}
}

// TestBoundsAndDetectionParams: bounds and fitted detection probabilities
// parse, reach the network and survive the round trip.
func TestBoundsAndDetectionParams(t *testing.T) {
	m := parseFile(t, "../testdata/shared-label.toml")
	free := m.Free()
	lo, hi := m.Bounds()
	for i, name := range free {
		if name == "eff" && (lo[i] != 0.5 || hi[i] != 1) {
			t.Errorf("eff bounds [%g, %g], want [0.5, 1]", lo[i], hi[i])
		}
		if name == "a1" && (lo[i] != 0 || !math.IsInf(hi[i], 1)) {
			t.Errorf("a1 bounds [%g, %g], want [0, inf]", lo[i], hi[i])
		}
	}
	x := m.Start()
	for i, name := range free {
		if name == "eff" {
			x[i] = 0.8
		}
	}
	net, err := m.Network(x)
	if err != nil {
		t.Fatal(err)
	}
	for _, l := range net.Labels {
		if l.Detect != 0.8 {
			t.Errorf("label %s detection %g, want 0.8", l.Name, l.Detect)
		}
	}
	checkRoundTrip(t, m)
	for _, path := range []string{"../testdata/offedge.toml", "../testdata/balanced.toml", "../testdata/ring4.toml", "../testdata/twocycle-stall.toml"} {
		checkRoundTrip(t, parseFile(t, path))
	}
	bad := []struct{ edit, want string }{
		{"[param.eff]\nvalue = 0.9\nlower = 0.5\n", ""},
		{"[param.eff]\nvalue = 1.5\n", "param.eff.value: detection probability 1.5 is not in (0, 1]"},
		{"[param.eff]\nvalue = 0.9\nupper = 2\n", "param.eff.upper: upper bound 2 is not above the lower bound 0 and at most 1"},
		{"[param.eff]\nvalue = 0.4\nlower = 0.5\n", "param.eff.value: start value 0.4 is outside the bounds [0.5, 1]"},
		{"[param.eff]\nvalue = 0.9\nlower = -1\n", "param.eff.lower: lower bound -1 is not a finite number >= 0"},
	}
	base, _ := os.ReadFile("../testdata/shared-label.toml")
	for _, b := range bad {
		src := strings.Replace(string(base), "[param.eff]\nvalue = 0.9\nlower = 0.5\n", b.edit, 1)
		_, err := Parse(strings.NewReader(src), "x.toml")
		if b.want == "" {
			if err != nil {
				t.Errorf("unchanged spec rejected: %v", err)
			}
			continue
		}
		if err == nil || !strings.Contains(err.Error(), b.want) {
			t.Errorf("want error containing %q, got %v", b.want, err)
		}
	}
	// A parameter cannot be both a rate and a detection probability.
	src := strings.Replace(string(base), "detect = \"eff\"\n[label.out]", "detect = \"a1\"\n[label.out]", 1)
	if _, err := Parse(strings.NewReader(src), "x.toml"); err == nil || !strings.Contains(err.Error(), "label.in.detect: parameter \"a1\" is already a rate") {
		t.Errorf("rate as detection: got %v", err)
	}
}
