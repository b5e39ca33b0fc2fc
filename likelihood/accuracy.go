package likelihood

import (
	"math"

	"gonum.org/v1/gonum/mat"
)

// spectralFallback prepares the uniformisation route used for events
// whose spectral value cancels (see spectralRelFloor).
func (e *Evaluator) spectralFallback() error {
	n, s := e.n, e.sp
	d0u := mat.DenseCopyOf(e.k.D0)
	for i := 0; i < n; i++ {
		// lmax >= max_i D0_ii for a Metzler matrix, so the diagonal stays
		// <= 0 (up to rounding, which uniformisation tolerates).
		d0u.Set(i, i, d0u.At(i, i)-s.lmax)
	}
	e.d0s = d0u // for the Van Loan sensitivities of cancelled events
	var err error
	if e.uexp, err = NewPropagator(d0u, ExpUniform); err != nil {
		return err
	}
	if e.uint0, err = NewPropagator(e.k.D0, ExpUniform); err != nil {
		return err
	}
	// Reachability under D0 (Warshall), for structural zeros.
	e.reach = make([]bool, n*n)
	for i := 0; i < n; i++ {
		for j := 0; j < n; j++ {
			e.reach[i*n+j] = i == j || e.k.D0.At(i, j) > 0
		}
	}
	for k := 0; k < n; k++ {
		for i := 0; i < n; i++ {
			if !e.reach[i*n+k] {
				continue
			}
			for j := 0; j < n; j++ {
				if e.reach[k*n+j] {
					e.reach[i*n+j] = true
				}
			}
		}
	}
	e.need = make([][]int, len(e.k.D))
	e.needTo = make([][]int, len(e.k.D))
	for l, ts := range e.k.Edges {
		seen, seenTo := map[int]bool{}, map[int]bool{}
		for _, t := range ts {
			if !seen[t.From] {
				seen[t.From] = true
				e.need[l] = append(e.need[l], t.From)
			}
			if !seenTo[t.To] {
				seenTo[t.To] = true
				e.needTo[l] = append(e.needTo[l], t.To)
			}
		}
	}
	return nil
}

// cancels reports whether a spectral value v = sum_k u_k h_k lost its
// relative accuracy: v <= spectralRelFloor * sum_k |u_k h_k|.
func cancels(v float64, u, h []float64) bool {
	m := 0.0
	for k, x := range u {
		m += math.Abs(x * h[k])
	}
	return !(v > spectralRelFloor*m)
}

// rowCancels checks the spectral row out = u W^{-1} (u = x W B(z), as
// propRow leaves it in ws.u) entry-wise on the states that D_l reads (all
// states for the end step, l < 0): an entry that is structurally zero
// (no state of x's support reaches it under D0) is set to 0; any other
// entry at or below spectralRelFloor times the sum of its |terms| means
// the row lost relative accuracy (true is returned).
func (e *Evaluator) rowCancels(out, u, x []float64, l int) bool {
	n, wi := e.n, e.sp.wi
	bad := false
	check := func(j int) {
		structural := true
		for i, v := range x {
			if v != 0 && e.reach[i*n+j] {
				structural = false
				break
			}
		}
		if structural {
			out[j] = 0
			return
		}
		m := 0.0
		for k, uk := range u {
			m += math.Abs(uk * wi[k*n+j])
		}
		if !(out[j] > spectralRelFloor*m) {
			bad = true
		}
	}
	if l < 0 {
		for j := 0; j < n; j++ {
			check(j)
		}
	} else {
		for _, j := range e.need[l] {
			check(j)
		}
	}
	return bad
}

// colCancels is rowCancels for the spectral column out = W y (y = B(z)
// W^{-1} b, as propCol leaves it in ws.y), before the backward step's
// exp(L delta) (when useG): structural zeros of out are set to 0, and the
// entries need of the step's result (G out, or out) are checked against
// the same combination of the |terms|. mag is scratch space of length n.
func (e *Evaluator) colCancels(out, y, b, mag []float64, useG bool, need []int) bool {
	n, w := e.n, e.sp.w
	for i := 0; i < n; i++ {
		structural := true
		for j, v := range b {
			if v != 0 && e.reach[i*n+j] {
				structural = false
				break
			}
		}
		mag[i] = 0
		if structural {
			out[i] = 0
			continue
		}
		for k, yk := range y {
			mag[i] += math.Abs(w[i*n+k] * yk)
		}
	}
	for _, j := range need {
		v, m := out[j], mag[j]
		if useG {
			v, m = 0, 0
			row := e.g[j*n : j*n+n]
			for i, gv := range row {
				v += gv * out[i]
				m += math.Abs(gv) * mag[i]
			}
		}
		if m > 0 && !(v > spectralRelFloor*m) {
			return true // (m == 0: an exact structural zero)
		}
	}
	return false
}

// accurateE returns E(lo, hi) scaled by e^{-lmax lo} by uniformisation,
// for events whose spectral value cancels (spectral route only).
func (e *Evaluator) accurateE(ws *work, lo, hi float64) ([]float64, error) {
	if ws.ucache == nil {
		ws.ucache = map[[2]float64][]float64{}
	}
	return shiftedE(ws.ucache, ws.emat, e.n, e.uexp, e.uint0, lo, hi)
}

// hotCancels is the exact cancellation test of the fast path's hot loop:
// f <= spectralRelFloor * sum |terms| at the exact time tau.
func (e *Evaluator) hotCancels(f float64, pr int, tau float64) bool {
	s := e.sp
	fa := math.Abs(e.hc0[pr])
	for i, mu := range e.hmu {
		fa += math.Abs(e.hc[pr][i] * math.Exp(mu*tau))
	}
	c := e.cf[pr]
	for _, p := range s.pairs {
		sn, cs := math.Sincos(p.b * tau)
		fa += math.Abs(math.Exp((p.a-s.lmax)*tau) * (c[p.k]*cs + c[p.k+1]*sn))
	}
	return !(f > spectralRelFloor*fa)
}

// fastAccurate returns the pair factor of pair pr over [lo, hi] by
// uniformisation, scaled like the spectral one.
func (e *Evaluator) fastAccurate(ws *work, pr int, lo, hi float64) (float64, error) {
	m, err := e.accurateE(ws, lo, hi)
	if err != nil {
		return 0, err
	}
	np1 := e.nl + 1
	a, b := e.avec[pr/np1], e.bvec[pr%np1]
	timesCol(ws.x, m, b, e.n)
	return dot(a, ws.x), nil
}

// accurateRow sets out = x E(lo, hi) e^{-lmax lo} by uniformisation.
func (e *Evaluator) accurateRow(ws *work, out, x []float64, lo, hi float64) error {
	m, err := e.accurateE(ws, lo, hi)
	if err != nil {
		return err
	}
	rowTimes(out, x, m, e.n)
	return nil
}
