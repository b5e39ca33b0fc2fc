package models

import (
	"math"
	"math/cmplx"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// ring builds an N-state ring 0->1->...->N-1->0 with forward rates u and
// backward rates w (w[n] is the rate out of state n going backwards).
func ring(u, w []float64) *Network {
	n := len(u)
	net := &Network{States: make([]string, n)}
	for i := range net.States {
		net.States[i] = string(rune('A' + i))
	}
	for i := 0; i < n; i++ {
		j := (i + 1) % n
		net.Edges = append(net.Edges, Edge{From: i, To: j, Rate: [2]float64{u[i], w[j]}, Label: [2]int{Hidden, Hidden}})
	}
	return net
}

// randomNetwork builds a connected network of k states: a ring plus extra
// random chords, rates log-uniform over [10^-spread/2, 10^spread/2].
func randomNetwork(rng *rand.Rand, k int, spread float64) *Network {
	rate := func() float64 { return math.Pow(10, spread*(rng.Float64()-0.5)) }
	net := &Network{States: make([]string, k)}
	for i := range net.States {
		net.States[i] = string(rune('A' + i))
	}
	has := map[[2]int]bool{}
	add := func(a, b int) {
		key := [2]int{min(a, b), max(a, b)}
		if a == b || has[key] {
			return
		}
		has[key] = true
		net.Edges = append(net.Edges, Edge{From: a, To: b, Rate: [2]float64{rate(), rate()}, Label: [2]int{Hidden, Hidden}})
	}
	for i := 0; i < k; i++ {
		add(i, (i+1)%k)
	}
	for c := 0; c < k; c++ {
		add(rng.IntN(k), rng.IntN(k))
	}
	return net
}

// eigenStationary is the independent route: the left null vector of L from
// gonum's general eigen-decomposition (eigenvalue of smallest modulus).
func eigenStationary(t *testing.T, net *Network) []float64 {
	g := net.Generator()
	k := len(g)
	lt := mat.NewDense(k, k, nil)
	for i := 0; i < k; i++ {
		for j := 0; j < k; j++ {
			lt.Set(j, i, g[i][j]) // transpose: right eigenvector of L^T
		}
	}
	var eig mat.Eigen
	if !eig.Factorize(lt, mat.EigenRight) {
		t.Fatal("eigen decomposition failed")
	}
	vals := eig.Values(nil)
	var vecs mat.CDense
	eig.VectorsTo(&vecs)
	best := 0
	for i := range vals {
		if cmplx.Abs(vals[i]) < cmplx.Abs(vals[best]) {
			best = i
		}
	}
	pi := make([]float64, k)
	sum := 0.0
	for i := 0; i < k; i++ {
		pi[i] = real(vecs.At(i, best))
		sum += pi[i]
	}
	for i := range pi {
		pi[i] /= sum
	}
	return pi
}

// TestStationaryAgainstEigen: GTH against gonum's eigen-decomposition of the
// generator on random networks. Rates span two decades, so the eigen route
// is accurate to ~1e-12 relative; tolerance 1e-9.
func TestStationaryAgainstEigen(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	for trial := 0; trial < 50; trial++ {
		net := randomNetwork(rng, 3+rng.IntN(6), 2)
		pi, err := net.Stationary()
		if err != nil {
			t.Fatal(err)
		}
		ref := eigenStationary(t, net)
		for i := range pi {
			if math.Abs(pi[i]-ref[i]) > 1e-9*ref[i] {
				t.Fatalf("trial %d state %d: GTH %.15g eigen %.15g", trial, i, pi[i], ref[i])
			}
		}
	}
}

// TestStationaryStiff: a detailed-balance chain 0-1-...-k-1 whose rates span
// ten orders of magnitude. Its exact law is pi_{i+1}/pi_i = w(i->i+1)/w(i+1->i)
// (detailed balance, common practice, no source). GTH must hold every
// component to 1e-12 relative, including those near 1e-30.
func TestStationaryStiff(t *testing.T) {
	k := 8
	net := &Network{States: make([]string, k)}
	logpi := make([]float64, k)
	for i := 0; i < k-1; i++ {
		f := math.Pow(10, float64(5-i%11))
		b := math.Pow(10, float64(-5+(3*i)%11))
		net.Edges = append(net.Edges, Edge{From: i, To: i + 1, Rate: [2]float64{f, b}, Label: [2]int{Hidden, Hidden}})
		logpi[i+1] = logpi[i] + math.Log(f/b)
	}
	for i := range net.States {
		net.States[i] = string(rune('A' + i))
	}
	pi, err := net.Stationary()
	if err != nil {
		t.Fatal(err)
	}
	lz := math.Inf(-1)
	for _, l := range logpi {
		lz = math.Max(lz, l) + math.Log1p(math.Exp(-math.Abs(lz-l)))
	}
	for i := range pi {
		want := math.Exp(logpi[i] - lz)
		if math.Abs(pi[i]-want) > 1e-12*want {
			t.Errorf("state %d: %.15g want %.15g", i, pi[i], want)
		}
	}
}

// derridaVelocity is Derrida's closed form for the drift of a ring
// (J. Stat. Phys. 31, 433 (1983)): u_n forward, w_n backward rate out of n,
// r_n = (1/u_n)[1 + sum_{i=1}^{N-1} prod_{k=1}^{i} w_{n+k}/u_{n+k}],
// V = N [1 - prod_n w_n/u_n] / sum_n r_n.
func derridaVelocity(u, w []float64) float64 {
	n := len(u)
	prod := 1.0
	for i := 0; i < n; i++ {
		prod *= w[i] / u[i]
	}
	sum := 0.0
	for m := 0; m < n; m++ {
		r, p := 1.0, 1.0
		for i := 1; i < n; i++ {
			k := (m + i) % n
			p *= w[k] / u[k]
			r += p
		}
		sum += r / u[m]
	}
	return float64(n) * (1 - prod) / sum
}

// TestRingCurrentDerrida: every edge of a ring carries V/N; sigma = J*A
// (Schnakenberg, Rev. Mod. Phys. 48, 571 (1976)). Tolerance 1e-12 relative
// (both routes are a few dozen flops).
func TestRingCurrentDerrida(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	for trial := 0; trial < 30; trial++ {
		n := 3 + rng.IntN(5)
		u, w := make([]float64, n), make([]float64, n)
		for i := range u {
			u[i] = 0.1 + 5*rng.Float64()
			w[i] = 0.1 + 5*rng.Float64()
		}
		net := ring(u, w)
		pi, err := net.Stationary()
		if err != nil {
			t.Fatal(err)
		}
		want := derridaVelocity(u, w) / float64(n)
		for e, j := range net.Currents(pi) {
			if math.Abs(j-want) > 1e-12*math.Abs(want)+1e-15 {
				t.Fatalf("trial %d edge %d: J %.15g Derrida %.15g", trial, e, j, want)
			}
		}
		cycles := net.CycleBasis()
		if len(cycles) != 1 || len(cycles[0].States) != n {
			t.Fatalf("ring of %d: cycle basis %+v", n, cycles)
		}
		a := net.Affinity(cycles[0])
		wantA := 0.0
		for i := range u {
			wantA += math.Log(u[i] / w[i])
		}
		if math.Abs(math.Abs(a)-math.Abs(wantA)) > 1e-12*math.Abs(wantA) {
			t.Fatalf("affinity %g want +-%g", a, wantA)
		}
		sigma := net.EntropyProduction(pi)
		if math.Abs(sigma-want*wantA) > 1e-12*math.Abs(sigma) {
			t.Fatalf("sigma %g, J*A %g", sigma, want*wantA)
		}
	}
}

// TestCycleBasisAndSigma: on random networks each basis cycle is a closed
// walk over existing edges, there are |E|-|V|+1 of them, and the edge form
// of sigma equals the cycle form sum_C J_chord A_C (Schnakenberg 1976).
func TestCycleBasisAndSigma(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 6))
	for trial := 0; trial < 50; trial++ {
		checkCycleBasis(t, trial, randomNetwork(rng, 3+rng.IntN(6), 2), 3)
	}
}

// checkCycleBasis checks the cycle basis of net: |E| - |V| + 1 cycles of
// at least minLen states, each a closed walk that joins its states and
// runs along each edge once, and sigma = sum_C J_chord A_C (Schnakenberg,
// Rev. Mod. Phys. 48, 571 (1976), eq. 7.6) to 1e-9 relative.
func checkCycleBasis(t *testing.T, trial int, net *Network, minLen int) {
	t.Helper()
	cycles := net.CycleBasis()
	if got, want := len(cycles), len(net.Edges)-len(net.States)+1; got != want {
		t.Fatalf("trial %d: %d cycles, want %d", trial, got, want)
	}
	for _, c := range cycles {
		if len(c.States) != len(c.Steps) || len(c.States) < minLen {
			t.Fatalf("trial %d: malformed cycle %+v", trial, c)
		}
		seen := map[int]bool{}
		for i, s := range c.Steps {
			e := net.Edges[s.Edge]
			from, to := e.From, e.To
			if !s.Forward {
				from, to = to, from
			}
			if from != c.States[i] || to != c.States[(i+1)%len(c.States)] || seen[s.Edge] {
				t.Fatalf("trial %d: step %d of %s does not join its states or repeats an edge", trial, i, net.CycleName(c))
			}
			seen[s.Edge] = true
		}
	}
	pi, err := net.Stationary()
	if err != nil {
		t.Fatal(err)
	}
	j := net.Currents(pi)
	cyc := 0.0
	for _, c := range cycles {
		cyc += j[c.Chord] * net.Affinity(c)
	}
	sigma := net.EntropyProduction(pi)
	if sigma < 0 || math.Abs(sigma-cyc) > 1e-9*math.Abs(sigma)+1e-14 {
		t.Fatalf("trial %d: sigma %g, cycle form %g", trial, sigma, cyc)
	}
}

// TestDetailedBalance: rates built from an energy landscape
// w_ij = exp(-(B_ij - E_i)) satisfy detailed balance, so every cycle
// affinity and sigma vanish (Schnakenberg 1976; common practice).
func TestDetailedBalance(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 8))
	net := randomNetwork(rng, 6, 1)
	energy := make([]float64, 6)
	for i := range energy {
		energy[i] = 3 * rng.Float64()
	}
	for i := range net.Edges {
		e := &net.Edges[i]
		barrier := 4 + rng.Float64()
		e.Rate = [2]float64{math.Exp(-(barrier - energy[e.From])), math.Exp(-(barrier - energy[e.To]))}
	}
	ok, worst := net.DetailedBalance(1e-12)
	if !ok {
		t.Fatalf("detailed balance not detected: max |A| = %g", worst)
	}
	pi, _ := net.Stationary()
	if s := net.EntropyProduction(pi); math.Abs(s) > 1e-14 {
		t.Fatalf("sigma = %g at detailed balance", s)
	}
	net.Edges[len(net.Edges)-1].Rate[0] *= 3
	if ok, _ := net.DetailedBalance(1e-12); ok {
		t.Fatal("driven network reported as detailed balance")
	}
}

func TestValidate(t *testing.T) {
	net := ring([]float64{1, 1, 1}, []float64{1, 1, 1})
	if err := net.Validate(); err != nil {
		t.Fatal(err)
	}
	bad := net.Clone()
	bad.Edges[0].Rate[0] = math.NaN()
	if bad.Validate() == nil {
		t.Error("NaN rate accepted")
	}
	oneway := ring([]float64{1, 1, 1}, []float64{0, 0, 0})
	if err := oneway.Validate(); err != nil {
		t.Errorf("irreversible ring rejected: %v", err)
	}
	broken := &Network{States: []string{"A", "B", "C"}, Edges: []Edge{{From: 0, To: 1, Rate: [2]float64{1, 0}}, {From: 1, To: 2, Rate: [2]float64{1, 1}}}}
	if broken.Validate() == nil {
		t.Error("network that cannot return to A accepted")
	}
	if _, err := broken.Stationary(); err == nil {
		t.Error("stationary law of a non-ergodic network returned")
	}
}
