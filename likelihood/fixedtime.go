package likelihood

import (
	"fmt"
	"math"
)

// fixedTimeTail bounds the Poisson mass left out by the uniformisation sum.
const fixedTimeTail = 1e-16

// fixedTimeMaxJumps caps the number of uniformised jumps (cost grows as its
// square).
const fixedTimeMaxJumps = 200000

// FixedTime returns the exact law of the current c(t) = sum_l q_l N_l(t)
// accumulated over a window of fixed duration t (time units) that starts
// in the stationary law pi of the network, with no event at its start: the
// count-stopped law's contrast at a fixed clock time. Its generating
// function is pi exp(t L(s)) 1 with L(s) = D0 + sum_l e^{s q_l} D_l.
//
// The law is computed by uniformisation: with Lambda = max_i |L_ii|,
// P0 = I + D0/Lambda and P_l = D_l/Lambda,
//
//	Pr(c) = sum_k Poisson(k; Lambda t) [pi (P0 + sum_l z^{q_l} P_l)^k 1]_{z^c},
//
// a dynamic programme over (state, c) with non-negative terms only. The sum
// stops when the Poisson tail is below 1e-16, which bounds the absolute
// error of every probability (far tails below that level carry no relative
// accuracy). Cost O(K^2 (qmax - qmin) nnz(L)) with K ~ Lambda t.
//
// With a dead time delta > 0 the window starts in the stationary law of
// the detection process (live, or inside the dead period of an earlier
// event with the stationary remaining dead time), and the same
// uniformisation runs over the time spent outside dead periods, with the
// number k of detected events as an extra index of the programme (the live
// time is t - k delta up to the final dead period, whose part inside the
// window is integrated exactly through Gamma distribution functions).
// Differences of those functions limit the absolute accuracy to about
// 1e-12. Cost grows by the number of event counts carried (those with
// total probability above 1e-40; the rest, and Poisson weights below
// 1e-40, are dropped).
//
// Every result is checked to carry total probability 1 within 1e-9; a
// failure is reported as an error, never hidden by normalisation.
func (p *Predictor) FixedTime(t float64, q []int) (CountDist, error) {
	if math.IsNaN(t) || math.IsInf(t, 0) || t < 0 {
		return CountDist{}, fmt.Errorf("likelihood: fixed-time law: t = %v, want a finite value >= 0", t)
	}
	if len(q) != p.nl {
		return CountDist{}, fmt.Errorf("likelihood: fixed-time law: %d label weights for %d labels", len(q), p.nl)
	}
	qlo, qhi := 0, 0
	for _, x := range q {
		qlo, qhi = min(qlo, x), max(qhi, x)
	}
	n := p.n
	lam := 0.0
	for i := 0; i < n; i++ {
		lam = math.Max(lam, -p.k.L.At(i, i))
	}
	mu := lam * t
	// Number of jumps K: past the mode, until the tail bound
	// sum_{j>k} w_j <= w_{k+1} / (1 - mu/(k+2)) is below fixedTimeTail.
	var logw []float64
	for k := 0; ; k++ {
		lw := -mu + float64(k)*math.Log(mu) - obsLgamma(float64(k+1))
		if mu == 0 {
			lw = 0
			if k > 0 {
				lw = math.Inf(-1)
			}
		}
		logw = append(logw, lw)
		if float64(k+2) > mu {
			next := -mu + float64(k+1)*math.Log(mu) - obsLgamma(float64(k+2))
			if mu == 0 || math.Exp(next)/(1-mu/float64(k+2)) < fixedTimeTail {
				break
			}
		}
		if k > fixedTimeMaxJumps {
			return CountDist{}, fmt.Errorf("likelihood: fixed-time law: Lambda t = %.4g needs more than %d uniformised jumps", mu, fixedTimeMaxJumps)
		}
	}
	kmax := len(logw) - 1
	if cells := (float64(kmax)*float64(qhi-qlo) + 1) * float64(n); cells > obsMaxCells {
		return CountDist{}, fmt.Errorf("likelihood: fixed-time law: %d jumps with weights in [%d, %d] over %d states need %.3g cells per working array, more than %d (%d MiB)", kmax, qlo, qhi, n, cells, obsMaxCells, obsMaxCells*8>>20)
	}
	if p.delta > 0 {
		// Four arrays per layer k = 0..kmax of width k (qhi - qlo) + 1.
		km := float64(kmax)
		total := 4 * float64(n) * ((km + 1) + float64(qhi-qlo)*km*(km+1)/2)
		if total > 2*obsMaxCells {
			return CountDist{}, fmt.Errorf("likelihood: fixed-time law with dead time: %d jumps with weights in [%d, %d] over %d states need %.3g cells, more than %d (%d MiB)", kmax, qlo, qhi, n, total, 2*obsMaxCells, 2*obsMaxCells*8>>20)
		}
		return p.fixedTimeDead(t, q, qlo, qhi, lam, kmax)
	}

	// Sparse P0 and P_l.
	var hid []obsEntry
	vis := make([][]obsEntry, p.nl)
	for i := 0; i < n; i++ {
		for j := 0; j < n; j++ {
			v := p.k.D0.At(i, j) / lam
			if i == j {
				v += 1
			}
			if v > 0 {
				hid = append(hid, obsEntry{i, j, v})
			}
			for l := 0; l < p.nl; l++ {
				if v := p.k.D[l].At(i, j) / lam; v > 0 {
					vis[l] = append(vis[l], obsEntry{i, j, v})
				}
			}
		}
	}

	base := kmax * qlo
	width := kmax*(qhi-qlo) + 1
	cur := make([]float64, width*n)
	next := make([]float64, width*n)
	res := make([]float64, width)
	copy(cur[(0-base)*n:], p.pi)
	lo, hi := 0, 0
	for k := 0; ; k++ {
		if w := math.Exp(logw[k]); w > 0 {
			for c := lo; c <= hi; c++ {
				res[c-base] += w * obsSum(cur[(c-base)*n:(c-base+1)*n])
			}
		}
		if k == kmax {
			break
		}
		nlo, nhi := lo+qlo, hi+qhi
		clear(next[(nlo-base)*n : (nhi-base+1)*n])
		for c := lo; c <= hi; c++ {
			row := cur[(c-base)*n : (c-base+1)*n]
			if obsZero(row) {
				continue
			}
			out := next[(c-base)*n:]
			for _, e := range hid {
				out[e.j] += row[e.i] * e.v
			}
			for l, es := range vis {
				out := next[(c+q[l]-base)*n:]
				for _, e := range es {
					out[e.j] += row[e.i] * e.v
				}
			}
		}
		cur, next = next, cur
		lo, hi = nlo, nhi
	}
	return obsFixedTimeResult(res, base)
}

// obsPoisTrack follows, as J = 0, 1, 2, ..., the Poisson law with mean
// lam x: pm = Pr(N = J), q1 = Pr(N <= J) = 1 - G_{J+1}(x) and
// q2 = Pr(N <= J+1), with G_n(x) = Pr(Gamma(n, lam) <= x). At x = 0 the
// law is a point mass at 0; for x < 0 (no live time) pm = 0 and G = 0.
type obsPoisTrack struct {
	lam, x     float64
	j          int // last J advanced to
	pm, q1, q2 float64
}

// newObsPoisTrack starts a tracker at x that will next advance to J.
func newObsPoisTrack(lam, x float64, J int) *obsPoisTrack {
	tr := &obsPoisTrack{lam: lam, x: x, j: J - 1}
	for m := 0; m < J; m++ {
		tr.q1 += tr.pmf(m)
	}
	return tr
}

func (tr *obsPoisTrack) pmf(m int) float64 {
	if tr.x <= 0 {
		if m == 0 {
			return 1
		}
		return 0
	}
	mu := tr.lam * tr.x
	return math.Exp(-mu + float64(m)*math.Log(mu) - obsLgamma(float64(m+1)))
}

// advance moves the tracker to J (J = previous J + 1).
func (tr *obsPoisTrack) advance(J int) {
	if J == tr.j {
		return
	}
	tr.j = J
	if tr.x < 0 { // no live time left: the weights vanish
		tr.pm, tr.q1, tr.q2 = 0, 1, 1
		return
	}
	tr.pm = tr.pmf(J)
	tr.q1 += tr.pm
	tr.q2 = tr.q1 + tr.pmf(J+1)
}

// h returns H_{J+1}(x) = integral_0^x G_{J+1} = x G_{J+1}(x) - ((J+1)/lam) G_{J+2}(x).
func (tr *obsPoisTrack) h(J int) float64 {
	if tr.x <= 0 {
		return 0
	}
	g1, g2 := math.Max(0, 1-tr.q1), math.Max(0, 1-tr.q2)
	return math.Max(0, tr.x*g1-float64(J+1)/tr.lam*g2)
}

// obsFixedTimeResult normalises a fixed-time law after checking that its
// mass is 1 up to the truncation bounds (a failed check is a bug, reported
// rather than hidden by the normalisation).
func obsFixedTimeResult(res []float64, base int) (CountDist, error) {
	d := obsNormalize(res, base)
	if math.Abs(d.Weight-1) > 1e-9 {
		return CountDist{}, fmt.Errorf("likelihood: fixed-time law: total probability %.12g, want 1 (internal error)", d.Weight)
	}
	d.Weight = 1
	return d, nil
}

// obsZero reports whether every entry of v is zero (such rows are skipped
// by the dynamic programmes: with weights +-1, c and the number of events
// have the same parity, so half the rows stay zero).
func obsZero(v []float64) bool {
	for _, x := range v {
		if x != 0 {
			return false
		}
	}
	return true
}

func obsLgamma(x float64) float64 {
	v, _ := math.Lgamma(x)
	return v
}

// fixedTimeDead is FixedTime with a dead time delta > 0. The stationary
// start is either live (no dead period running; state law
// nu phi exp(L delta) (-D0)^{-1}, nu = 1/mean gap) or dead with remaining
// dead time u in (0, delta), uniform with density nu, after which the
// state law is nu phi exp(L delta) whatever u. A live stretch of length T
// with k detected events spends T - k delta outside dead periods if it
// ends live, and T - (k-1) delta - w if it ends w into the dead period of
// its last event. Outside dead periods the chain evolves under D0 with
// events D_l followed by exp(L delta); uniformising D0 with rate Lambda,
// the integral over the event times is a Poisson(Lambda tau) mixture of
// products of P0 = I + D0/Lambda and V_l = (D_l/Lambda) exp(L delta), with
// tau the total live time. Hence a dynamic programme over (jumps J,
// events k, c, state) with weights, for A = t - k delta, B = A + delta,
// U = min(delta, t), G_n(x) = Pr(Gamma(n, Lambda) <= x) and
// H_n(y) = integral_0^y G_n = y G_n(y) - (n/Lambda) G_{n+1}(y):
//
//	live start, live end:  Poisson(J; Lambda A)              (A >= 0)
//	live start, dead end:  G_{J+1}(B) - G_{J+1}(A)           (last event: D_l 1 / Lambda)
//	dead start, live end:  [G_{J+1}(A) - G_{J+1}(A - U)] / Lambda
//	dead start, dead end:  H_{J+1}(B) - H_{J+1}(B - U) - H_{J+1}(A) + H_{J+1}(A - U)
//
// (arguments clipped at 0), plus the mass nu (delta - t) at c = 0 when the
// window lies inside one dead period. Layers of the programme (event
// counts k) whose total mass falls below 1e-40 are dropped, which bounds
// the added absolute error by kmax * 1e-40.
func (p *Predictor) fixedTimeDead(t float64, q []int, qlo, qhi int, lam float64, kmax int) (CountDist, error) {
	n, delta := p.n, p.delta
	nu := 1 / p.meanGap
	sLive := obsRowTimes(p.phi, p.ea)
	sDead := obsRowTimes(p.phi, p.e)
	for i := range sLive {
		sLive[i] *= nu
		sDead[i] *= nu
	}
	var hid []obsEntry
	vis := make([][]obsEntry, p.nl)
	last := make([][]float64, p.nl) // D_l 1 / Lambda
	for l := 0; l < p.nl; l++ {
		last[l] = obsTimesOnes(p.k.D[l])
		for i := range last[l] {
			last[l][i] /= lam
		}
		for i := 0; i < n; i++ {
			for j := 0; j < n; j++ {
				v := 0.0
				for m := 0; m < n; m++ {
					v += p.k.D[l].At(i, m) * p.e.At(m, j)
				}
				if v /= lam; v > 0 {
					vis[l] = append(vis[l], obsEntry{i, j, v})
				}
			}
		}
	}
	for i := 0; i < n; i++ {
		for j := 0; j < n; j++ {
			v := p.k.D0.At(i, j) / lam
			if i == j {
				v += 1
			}
			if v > 0 {
				hid = append(hid, obsEntry{i, j, v})
			}
		}
	}
	// Layers 0..kcap can contribute: k delta <= t, and k <= kmax jumps.
	kcap := kmax
	if r := t / delta; r < float64(kmax) {
		kcap = int(math.Floor(r))
	}
	U := math.Min(delta, t)
	// Poisson trackers at x = A_k and A_k - U, k = 0..kcap+1, advanced
	// with J (see obsPoisTrack).
	trA := make([]*obsPoisTrack, kcap+2)
	trAU := make([]*obsPoisTrack, kcap+2)
	track := func(k, J int) {
		if trA[k] == nil {
			A := t - float64(k)*delta
			trA[k] = newObsPoisTrack(lam, A, J)
			trAU[k] = newObsPoisTrack(lam, A-U, J)
		}
	}

	// Layer k holds c in [k qlo, k qhi]: v[k][(c - k qlo) n + i].
	width := func(k int) int { return k*(qhi-qlo) + 1 }
	// Layers are allocated when the programme first reaches them.
	curL, curD := make([][]float64, kcap+1), make([][]float64, kcap+1)
	nextL, nextD := make([][]float64, kcap+1), make([][]float64, kcap+1)
	ensure := func(k int) {
		if curL[k] == nil {
			for _, ls := range [][][]float64{curL, curD, nextL, nextD} {
				ls[k] = make([]float64, width(k)*n)
			}
		}
	}
	ensure(0)
	copy(curL[0], sLive)
	copy(curD[0], sDead)
	base := (kcap + 1) * qlo
	res := make([]float64, (kcap+1)*(qhi-qlo)+1)
	if t < delta {
		res[-base] += nu * (delta - t)
	}
	top := 0 // highest layer that may be non-zero
	for J := 0; ; J++ {
		for k := 0; k <= top+1; k++ {
			track(k, J)
			trA[k].advance(J)
			trAU[k].advance(J)
		}
		for k := 0; k <= top; k++ {
			a, au, a1, a1u := trA[k], trAU[k], trA[k+1], trAU[k+1]
			wLL := a.pm
			wDL := math.Max(0, au.q1-a.q1) / lam
			wLD := math.Max(0, a1.q1-a.q1)
			wDD := math.Max(0, a.h(J)-au.h(J)-a1.h(J)+a1u.h(J))
			// Weights below 1e-40 are dropped, as are light layers.
			if max(wLL, wDL, wLD, wDD) < 1e-40 {
				continue
			}
			lv, dv := curL[k], curD[k]
			for ci := 0; ci < width(k); ci++ {
				c := k*qlo + ci
				rl, rd := lv[ci*n:(ci+1)*n], dv[ci*n:(ci+1)*n]
				res[c-base] += wLL*obsSum(rl) + wDL*obsSum(rd)
				if wLD == 0 && wDD == 0 {
					continue
				}
				for l := 0; l < p.nl; l++ {
					res[c+q[l]-base] += wLD*obsDot(rl, last[l]) + wDD*obsDot(rd, last[l])
				}
			}
		}
		if J == kmax {
			break
		}
		ntop := min(top+1, kcap)
		ensure(ntop)
		for k := 0; k <= ntop; k++ {
			clear(nextL[k])
			clear(nextD[k])
		}
		for k := 0; k <= top; k++ {
			for ci := 0; ci < width(k); ci++ {
				c := k*qlo + ci
				for s, cur := range [2][][]float64{curL, curD} {
					next := nextL
					if s == 1 {
						next = nextD
					}
					row := cur[k][ci*n : (ci+1)*n]
					if obsZero(row) {
						continue
					}
					out := next[k][ci*n:]
					for _, e := range hid {
						out[e.j] += row[e.i] * e.v
					}
					if k == kcap {
						continue
					}
					for l, es := range vis {
						o := next[k+1][(c+q[l]-(k+1)*qlo)*n:]
						for _, e := range es {
							o[e.j] += row[e.i] * e.v
						}
					}
				}
			}
		}
		curL, nextL = nextL, curL
		curD, nextD = nextD, curD
		top = ntop
		for top > 0 && obsSum(curL[top])+obsSum(curD[top]) < 1e-40 {
			clear(curL[top])
			clear(curD[top])
			top--
		}
	}
	return obsFixedTimeResult(res, base)
}
