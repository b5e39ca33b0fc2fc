package infer

import (
	"math"
	"math/rand/v2"
	"testing"

	"edgewise/likelihood"
	"edgewise/models"

	"gonum.org/v1/gonum/integrate/quad"
	"gonum.org/v1/gonum/mat"
)

// flRing returns an n-state ring 0 -> 1 -> ... -> n-1 -> 0 with forward
// rates u[i] (i -> i+1) and backward rates w[i] (i+1 -> i); the edge 0-1
// carries "+" forward and "-" backward, detected with probability 1.
func flRing(u, w []float64) *models.Network {
	n := len(u)
	net := &models.Network{Labels: []models.Label{{Name: "+", Detect: 1}, {Name: "-", Detect: 1}}}
	for i := 0; i < n; i++ {
		net.States = append(net.States, string(rune('A'+i)))
		lab := [2]int{models.Hidden, models.Hidden}
		if i == 0 {
			lab = [2]int{0, 1}
		}
		net.Edges = append(net.Edges, models.Edge{From: i, To: (i + 1) % n, Rate: [2]float64{u[i], w[i]}, Label: lab})
	}
	return net
}

// flTwoCycle returns a four-state network with the visible edge A-B
// ("+" A->B, "-" B->A) on cycle A-B-C-A and a second, strongly driven
// cycle A-C-D-A (affinity ln(2.54*11.1*0.311/(0.34*0.093*0.121)) = 7.7)
// that avoids the visible edge. The rates were picked from a random search
// for a large fixed-time departure (about 5% of F at long times).
func flTwoCycle() *models.Network {
	h := models.Hidden
	return &models.Network{
		States: []string{"A", "B", "C", "D"},
		Labels: []models.Label{{Name: "+", Detect: 1}, {Name: "-", Detect: 1}},
		Edges: []models.Edge{
			{From: 0, To: 1, Rate: [2]float64{4.2, 6.33}, Label: [2]int{0, 1}},
			{From: 1, To: 2, Rate: [2]float64{19.0, 7.42}, Label: [2]int{h, h}},
			{From: 2, To: 0, Rate: [2]float64{0.34, 2.54}, Label: [2]int{h, h}},
			{From: 2, To: 3, Rate: [2]float64{11.1, 0.093}, Label: [2]int{h, h}},
			{From: 3, To: 0, Rate: [2]float64{0.121, 0.311}, Label: [2]int{h, h}},
		},
	}
}

// flSimulate draws records of events visible events each, every record
// started from the stationary law, as a likelihood.Data with labels
// named as in net.
func flSimulate(t testing.TB, net *models.Network, events, records int, seed uint64) *likelihood.Data {
	t.Helper()
	sim, err := models.NewSimulator(net, seed)
	if err != nil {
		t.Fatal(err)
	}
	d := &likelihood.Data{}
	for _, l := range net.Labels {
		d.Labels = append(d.Labels, l.Name)
	}
	buf := make([]models.Event, 0, events)
	for r := 0; r < records; r++ {
		sim.StartStationary()
		buf, _ = sim.Visible(events, buf[:0])
		rec := likelihood.Record{Time: make([]float64, len(buf)), Label: make([]uint8, len(buf)), End: math.NaN()}
		for i, e := range buf {
			rec.Time[i], rec.Label[i] = e.Time, uint8(e.Label)
		}
		d.Records = append(d.Records, rec)
	}
	return d
}

// flExact holds exact single-edge quantities of a network computed here by
// dense linear algebra (an independent route from the estimators): the
// embedded chain P(l'|l) = [(-D0)^{-1}]_{to(l), from(l')} w_{l'}, F, the
// visible current J and sigma.
type flExact struct {
	Ppp, Pmm, F, J, Sigma float64
	Rate                  [2]float64 // rates of + and - events, 1/time
}

func flExactOf(t testing.TB, net *models.Network) flExact {
	t.Helper()
	k, err := likelihood.NewKernels(net)
	if err != nil {
		t.Fatal(err)
	}
	pi, err := net.Stationary()
	if err != nil {
		t.Fatal(err)
	}
	plus, minus := k.Edges[0][0], k.Edges[1][0]
	var neg mat.Dense
	neg.Scale(-1, k.D0)
	var inv mat.Dense
	if err := inv.Inverse(&neg); err != nil {
		t.Fatal(err)
	}
	var e flExact
	e.Ppp = inv.At(plus.To, plus.From) * plus.Rate * k.Detect[0]
	e.Pmm = inv.At(minus.To, minus.From) * minus.Rate * k.Detect[1]
	e.F = math.Log(e.Ppp / e.Pmm)
	e.Rate = [2]float64{pi[plus.From] * plus.Rate * k.Detect[0], pi[minus.From] * minus.Rate * k.Detect[1]}
	e.J = e.Rate[0] - e.Rate[1]
	e.Sigma = net.EntropyProduction(pi)
	return e
}

// flFixedTime returns the exact law of the current c = n_+ - n_- over a
// window of duration T started from the stationary law, by uniformisation
// of the generator counted in c: with Lambda >= every exit rate, the
// jump chain M = I + L/Lambda splits into M0 + M_+ + M_-, and
// P_T(c) = sum_k Poisson(k; Lambda T) [pi (M0 + z M_+ + M_-/z)^k 1]_{z^c}.
// The returned slice holds P_T(c) at index c + offset.
func flFixedTime(t testing.TB, net *models.Network, T float64) (p []float64, offset int) {
	t.Helper()
	k, err := likelihood.NewKernels(net)
	if err != nil {
		t.Fatal(err)
	}
	pi, err := net.Stationary()
	if err != nil {
		t.Fatal(err)
	}
	n := k.N
	lam := 0.0
	for i := 0; i < n; i++ {
		lam = math.Max(lam, -k.L.At(i, i))
	}
	lam *= 1.01
	m0, mp, mm := mat.NewDense(n, n, nil), mat.NewDense(n, n, nil), mat.NewDense(n, n, nil)
	for i := 0; i < n; i++ {
		for j := 0; j < n; j++ {
			v := k.D0.At(i, j) / lam
			if i == j {
				v++
			}
			m0.Set(i, j, v)
			mp.Set(i, j, k.D[0].At(i, j)/lam)
			mm.Set(i, j, k.D[1].At(i, j)/lam)
		}
	}
	mean := lam * T
	kmax := int(mean + 12*math.Sqrt(mean) + 30)
	offset = kmax
	width := 2*kmax + 1
	cur := make([][]float64, width)
	nxt := make([][]float64, width)
	for c := range cur {
		cur[c] = make([]float64, n)
		nxt[c] = make([]float64, n)
	}
	copy(cur[offset], pi)
	p = make([]float64, width)
	logw := -mean // log Poisson weight of k = 0
	for step := 0; step <= kmax; step++ {
		w := math.Exp(logw)
		for c := range cur {
			s := 0.0
			for _, v := range cur[c] {
				s += v
			}
			p[c] += w * s
		}
		for c := range nxt {
			clear(nxt[c])
		}
		lo, hi := max(0, offset-step), min(width-1, offset+step)
		for c := lo; c <= hi; c++ {
			v := cur[c]
			for i, vi := range v {
				if vi == 0 {
					continue
				}
				for j := 0; j < n; j++ {
					nxt[c][j] += vi * m0.At(i, j)
					if c+1 < width {
						nxt[c+1][j] += vi * mp.At(i, j)
					}
					if c > 0 {
						nxt[c-1][j] += vi * mm.At(i, j)
					}
				}
			}
		}
		cur, nxt = nxt, cur
		logw += math.Log(mean) - math.Log(float64(step+1))
	}
	return p, offset
}

// flLimitSlope is the slope that the weighted fit of ln[P(c)/P(-c)]
// against c tends to with W windows drawn from p, and the slope's SE for
// W = 1 (it scales as W^(-1/2)): w_c = 1/(1/P(c) + 1/P(-c)) is W times the
// inverse delta-method variance of the log-ratio. Values of c with
// P(-c) < minP are left out, as a finite data set would miss them.
func flLimitSlope(p []float64, offset int, minP float64) (slope, se1 float64) {
	var sxy, sxx float64
	for c := 1; c <= offset; c++ {
		a, b := p[offset+c], p[offset-c]
		if a < minP || b < minP {
			continue
		}
		w := 1 / (1/a + 1/b)
		cf := float64(c)
		sxy += w * cf * math.Log(a/b)
		sxx += w * cf * cf
	}
	return sxy / sxx, 1 / math.Sqrt(sxx)
}

// flSCGF returns the scaled cumulant generating function of the visible
// current, lambda(z) = largest real eigenvalue of the tilted generator
// D0 + e^z D_+ + e^-z D_- (Lebowitz and Spohn, J. Stat. Phys. 95, 333
// (1999)), by gonum's nonsymmetric eigen decomposition.
func flSCGF(t testing.TB, k *likelihood.Kernels, z float64) float64 {
	t.Helper()
	var m mat.Dense
	m.CloneFrom(k.D0)
	var a, b mat.Dense
	a.Scale(math.Exp(z), k.D[0])
	b.Scale(math.Exp(-z), k.D[1])
	m.Add(&m, &a)
	m.Add(&m, &b)
	var eig mat.Eigen
	if !eig.Factorize(&m, mat.EigenNone) {
		t.Fatal("eigen decomposition failed")
	}
	best := math.Inf(-1)
	for _, v := range eig.Values(nil) {
		best = math.Max(best, real(v))
	}
	return best
}

// flExactWaitingKL returns the exact waiting-time part of the
// transition-based bound of a single visible edge, r++ KL(f++||f--) +
// r-- KL(f--||f++), with f_{l->l}(t) = [exp(D0 t)]_{to(l), from(l)} w_l /
// P(l|l) built with gonum's mat.Exp and the divergences by Gauss-Legendre
// quadrature (quad.Fixed) on u = ln t, and the two divergences.
func flExactWaitingKL(t testing.TB, net *models.Network) (wt float64, kl [2]float64) {
	t.Helper()
	k, err := likelihood.NewKernels(net)
	if err != nil {
		t.Fatal(err)
	}
	ex := flExactOf(t, net)
	tr := [2]models.Transition{k.Edges[0][0], k.Edges[1][0]}
	pll := [2]float64{ex.Ppp, ex.Pmm}
	fastest := 0.0
	for i := 0; i < k.N; i++ {
		fastest = math.Max(fastest, -k.D0.At(i, i))
	}
	var e, m mat.Dense
	dens := func(u float64) (a, b float64) {
		m.Scale(math.Exp(u), k.D0)
		e.Exp(&m)
		a = e.At(tr[0].To, tr[0].From) * tr[0].Rate * k.Detect[0] / pll[0]
		b = e.At(tr[1].To, tr[1].From) * tr[1].Rate * k.Detect[1] / pll[1]
		return a, b
	}
	lo, hi := math.Log(1e-9/fastest), math.Log(1e4/fastest)
	for s := 0; s < 2; s++ {
		f := func(u float64) float64 {
			a, b := dens(u)
			if s == 1 {
				a, b = b, a
			}
			if a*math.Exp(u) < 1e-250 || b <= 0 {
				return 0 // both densities have underflowed: no mass left
			}
			return a * math.Exp(u) * math.Log(a/b)
		}
		kl[s] = quad.Fixed(f, lo, hi, 3000, nil, 0)
	}
	wt = ex.Rate[0]*ex.Ppp*kl[0] + ex.Rate[1]*ex.Pmm*kl[1]
	return wt, kl
}

// flExactD returns the exact diffusion coefficient of the visible current,
// D = (d^2 lambda/dz^2 at z = 0)/2, by a central second difference of flSCGF with step
// 1e-3 (truncation error ~1e-7 relative; finite differences as an oracle
// only).
func flExactD(t testing.TB, net *models.Network) float64 {
	t.Helper()
	k, err := likelihood.NewKernels(net)
	if err != nil {
		t.Fatal(err)
	}
	const h = 1e-3
	return (flSCGF(t, k, h) - 2*flSCGF(t, k, 0) + flSCGF(t, k, -h)) / (2 * h * h)
}

// flRandomNetwork returns a random four-state network on the complete
// graph with log-uniform rates in [e^-2, e^2] and the visible edge A-B.
func flRandomNetwork(rng *rand.Rand) *models.Network {
	h := models.Hidden
	net := &models.Network{
		States: []string{"A", "B", "C", "D"},
		Labels: []models.Label{{Name: "+", Detect: 1}, {Name: "-", Detect: 1}},
	}
	for i := 0; i < 4; i++ {
		for j := i + 1; j < 4; j++ {
			lab := [2]int{h, h}
			if i == 0 && j == 1 {
				lab = [2]int{0, 1}
			}
			net.Edges = append(net.Edges, models.Edge{From: i, To: j, Rate: [2]float64{math.Exp(4*rng.Float64() - 2), math.Exp(4*rng.Float64() - 2)}, Label: lab})
		}
	}
	return net
}
