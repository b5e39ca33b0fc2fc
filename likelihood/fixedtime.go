package likelihood

import (
	"errors"
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
// A dead time makes the detection depend on the age of the last detected
// event, which this state space does not carry: FixedTime returns an error
// when the predictor has a dead time.
func (p *Predictor) FixedTime(t float64, q []int) (CountDist, error) {
	if p.delta > 0 {
		return CountDist{}, errors.New("likelihood: fixed-time law with a dead time is not provided")
	}
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
	if float64(kmax)*float64(qhi-qlo) > 1e7 {
		return CountDist{}, fmt.Errorf("likelihood: fixed-time law: %d jumps with weights in [%d, %d] give too many values of c", kmax, qlo, qhi)
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
	d := obsNormalize(res, base)
	d.Weight = 1
	return d, nil
}

func obsLgamma(x float64) float64 {
	v, _ := math.Lgamma(x)
	return v
}
