package likelihood

import (
	"errors"
	"fmt"
	"math"

	"edgewise/models"

	"gonum.org/v1/gonum/floats"
	"gonum.org/v1/gonum/mat"
)

// Sensitivities of the predicted observables (see Predictor) with respect
// to the log-rates theta_t = ln w_t and the detection probabilities p_l,
// exact to rounding, for the delta method and for constrained fits.
//
// One parameter at a time, with dD0 and dD_l its derivatives of the
// generator split (for theta_t, t: a -> b with label l and detection p:
// dD_l = p w_t e_a e_b^T, dD0 = (1-p) w_t e_a e_b^T - w_t e_a e_a^T; a
// hidden t has dD0 = w_t (e_a e_b^T - e_a e_a^T); for p_l: dD_l = sum over
// the edges of l of w_t e_a e_b^T = -dD0) and dL = dD0 + sum_l dD_l:
//
//	A = (-D0)^{-1}:  dA = A dD0 A
//	E = exp(L delta): dE = int_0^delta exp(L (delta-s)) dL exp(L s) ds,
//	                 the upper-right block of exp([[L, dL], [0, L]] delta)
//	                 (Van Loan, IEEE TAC 23, 395 (1978)); 0 without dead time
//	M_l = E A D_l:   dM_l = (dE A + E dA) D_l + E A dD_l
//	phi M = phi:     dphi = phi dM Z, Z = (I - M + 1 phi)^{-1}
//	                 (dphi (I - M) = phi dM and dphi 1 = 0, as for pi)
//	r_l = phi M_l 1, P(l'|l) = phi M_l M_l' 1 / r_l, u = E A 1,
//	mean gap G = delta + phi u, mean gap after l: g_l = delta + phi M_l u / r_l,
//	label rate nu_l = r_l / G, F = ln P(+|+) - ln P(-|-),
//
// each differentiated by the product and quotient rules. Cost per
// parameter: O(n^3) (one 2n x 2n matrix exponential more with a dead time).

// Kinds of the quantities seen through an instrument (rows added by
// Predictor.Sensitivity).
const (
	KindLabelRate       models.QuantityKind = "label rate"       // rate of label Args[0] (1/time)
	KindMeanGap         models.QuantityKind = "mean gap"         // mean time between detected events
	KindGapAfter        models.QuantityKind = "mean gap after"   // mean gap after a label Args[0] event
	KindTransition      models.QuantityKind = "P"                // P(Args[1] | Args[0])
	KindEffective       models.QuantityKind = "F"                // F = ln[P(Args[0]|Args[0]) / P(Args[1]|Args[1])]
	KindVisibleCurrent  models.QuantityKind = "visible current"  // nu_Args[0] - nu_Args[1]
	KindVisibleActivity models.QuantityKind = "visible activity" // nu_Args[0] + nu_Args[1]
)

// GapAfter returns the mean time from a stationary l event to the next
// detected event, delta + alpha_l exp(L delta) (-D0)^{-1} 1, in time units:
// NaN for a label that never occurs. It panics if l is not a label index.
func (p *Predictor) GapAfter(l int) float64 {
	if p.r[l] == 0 {
		return math.NaN()
	}
	return p.delta + obsDot(p.alpha[l], obsTimesOnes(p.ea))
}

// Sensitivity returns the predicted observables under the instrument and
// their exact derivatives with respect to the network's log-rates (columns
// 2*e+d, as models.Sensitivity) and detection probabilities, in this row
// order:
//
//	rate[l]          detected rate of each label (1/time)
//	gap              mean time between detected events (time)
//	gap[l]           mean time from an l event to the next event (time)
//	P[l'|l]          probability that an l event is followed by l' (1)
//	F[l/m]           effective affinity ln[P(l|l)/P(m|m)] (k_BT),
//	Jvis[l/m]        visible current nu_l - nu_m (1/time) and
//	activity[l/m]    visible activity nu_l + nu_m (1/time), for each label
//	                 l whose reverse m = Reverse(l) exists and m > l
//
// Quantities that are undefined or infinite (P and gap after a label that
// never occurs, an infinite F) have a NaN value or row.
func (p *Predictor) Sensitivity() (*models.Sensitivity, error) {
	var frechet func(dl []float64) ([]float64, error)
	if p.delta > 0 {
		lt := mat.DenseCopyOf(p.k.L.T())
		frechet = func(dl []float64) ([]float64, error) { return vanLoan(lt, dl, p.delta, p.delta) }
	}
	return p.sensitivity(frechet)
}

// sensEntry is one non-zero entry of a parameter's derivative of the
// generator split: lab = -1 for D0, else the label of D_lab.
type sensEntry struct {
	i, j int
	v    float64
	lab  int
}

// sensEntries lists, per column (2*e+d for the log-rates, 2|E| + l for the
// detection probabilities), the non-zero entries of dD0 and dD_l.
func (k *Kernels) sensEntries() [][]sensEntry {
	nc := 2 * len(k.net.Edges)
	cols := make([][]sensEntry, nc+len(k.D))
	for _, t := range k.trans {
		c := 2*t.Edge + t.Dir
		es := []sensEntry{{t.From, t.From, -t.Rate, -1}}
		if t.Label == models.Hidden {
			es = append(es, sensEntry{t.From, t.To, t.Rate, -1})
		} else {
			p := k.Detect[t.Label]
			es = append(es, sensEntry{t.From, t.To, p * t.Rate, t.Label})
			if p < 1 {
				es = append(es, sensEntry{t.From, t.To, (1 - p) * t.Rate, -1})
			}
		}
		cols[c] = es
	}
	for l, ts := range k.Edges {
		for _, t := range ts {
			cols[nc+l] = append(cols[nc+l], sensEntry{t.From, t.To, t.Rate, l}, sensEntry{t.From, t.To, -t.Rate, -1})
		}
	}
	return cols
}

// sensitivity computes Predictor.Sensitivity with the Frechet derivative
// of exp(L delta) given by frechet (nil without dead time).
func (p *Predictor) sensitivity(frechet func(dl []float64) ([]float64, error)) (*models.Sensitivity, error) {
	n, nl, k := p.n, p.nl, p.k
	if p.delta > 0 && frechet == nil {
		return nil, errors.New("likelihood: sensitivity: no derivative of exp(L delta)")
	}
	// A = (-D0)^{-1} (ea itself without dead time).
	a := p.ea
	if p.delta > 0 {
		absorb := make([]float64, n)
		for l := range k.D {
			for i, x := range obsTimesOnes(k.D[l]) {
				absorb[i] += x
			}
		}
		var err error
		if a, err = obsMSolve(k.D0, absorb, obsIdentity(n)); err != nil {
			return nil, fmt.Errorf("likelihood: sensitivity: %w", err)
		}
	}
	// Z = (I - M + 1 phi)^{-1}.
	zinv := obsIdentity(n)
	for _, m := range p.m {
		zinv.Sub(zinv, m)
	}
	for i := 0; i < n; i++ {
		for j := 0; j < n; j++ {
			zinv.Set(i, j, zinv.At(i, j)+p.phi[j])
		}
	}
	var lu mat.LU
	lu.Factorize(zinv)
	if c := lu.Cond(); !(c < 1e14) {
		return nil, fmt.Errorf("likelihood: sensitivity: post-event chain: I - M + 1 phi is singular (condition %.3g)", c)
	}
	var z mat.Dense
	if err := lu.SolveTo(&z, false, obsIdentity(n)); err != nil {
		var cond mat.Condition
		if !errors.As(err, &cond) {
			return nil, fmt.Errorf("likelihood: sensitivity: %w", err)
		}
	}

	u := obsTimesOnes(p.ea)
	h := make([][]float64, nl)    // M_l 1
	phiM := make([][]float64, nl) // phi M_l
	for l := 0; l < nl; l++ {
		h[l] = obsTimesOnes(p.m[l])
		phiM[l] = obsRowTimes(p.phi, p.m[l])
	}
	// dea = d(E A) acts on the vectors xs = (1, D_0 1, ..., D_{nl-1} 1)
	// from the right and on phi from the left; with dA = A dD0 A a sum of
	// outer products A e_i e_j^T A, each action costs O(n^2).
	xs := [][]float64{obsOnes(n)}
	for l := 0; l < nl; l++ {
		xs = append(xs, obsTimesOnes(k.D[l]))
	}
	at := mat.DenseCopyOf(a.T()) // rows of at are the columns of A
	phiE, phiEA := p.phi, obsRowTimes(p.phi, p.ea)
	var ax [][]float64 // A x, with a dead time
	if p.delta > 0 {
		phiE = obsRowTimes(p.phi, p.e)
		for _, x := range xs {
			ax = append(ax, obsMatVec(a, x))
		}
	}

	ne := len(k.net.Edges)
	nc := 2 * ne
	cols := k.sensEntries()
	// Derivatives per column: dr[c][l], dG[c], dnum[c][l][l'] of
	// phi M_l M_l' 1, dgnum[c][l] of phi M_l u.
	ncol := nc + nl
	dr := make([][]float64, ncol)
	dG := make([]float64, ncol)
	dnum := make([][][]float64, ncol)
	dgnum := make([][]float64, ncol)
	dl := mat.NewDense(n, n, nil)
	rowDea := make([]float64, n) // phi dea
	dax := make([][]float64, len(xs))
	deax := make([][]float64, len(xs))
	for i := range xs {
		dax[i], deax[i] = make([]float64, n), make([]float64, n)
	}
	phidM := make([][]float64, nl) // phi dM_l
	dh := make([][]float64, nl)    // dM_l 1
	dphiM := make([][]float64, nl) // d(phi M_l) = dphi M_l + phi dM_l
	for l := 0; l < nl; l++ {
		phidM[l], dh[l], dphiM[l] = make([]float64, n), make([]float64, n), make([]float64, n)
	}
	y := make([]float64, n)
	for c := 0; c < ncol; c++ {
		es := cols[c]
		if len(es) == 0 {
			continue // an absent one-way direction, or a label without edges
		}
		// dA = sum over the D0 entries of v A e_i e_j^T A: phi E dA and dA x.
		clear(rowDea)
		for i := range xs {
			clear(dax[i])
		}
		for _, e := range es {
			if e.lab >= 0 {
				continue
			}
			ai, aj := at.RawRowView(e.i), a.RawRowView(e.j)
			floats.AddScaled(rowDea, e.v*floats.Dot(phiE, ai), aj)
			for i, x := range xs {
				floats.AddScaled(dax[i], e.v*floats.Dot(aj, x), ai)
			}
		}
		if p.delta > 0 {
			// dea = E dA + dE A.
			for i := range xs {
				copy(deax[i], obsMatVec(p.e, dax[i]))
			}
			if c < nc { // dL = 0 for a detection probability
				dl.Zero()
				for _, e := range es {
					dl.Set(e.i, e.j, dl.At(e.i, e.j)+e.v)
				}
				de, err := frechet(dl.RawMatrix().Data)
				if err != nil {
					return nil, fmt.Errorf("likelihood: sensitivity: %w", err)
				}
				dem := mat.NewDense(n, n, de)
				for i := range xs {
					floats.Add(deax[i], obsMatVec(dem, ax[i]))
				}
				floats.Add(rowDea, obsRowTimes(obsRowTimes(p.phi, dem), a))
			}
		} else {
			for i := range xs {
				copy(deax[i], dax[i])
			}
		}
		// phi dM_l = (phi dea) D_l + phi ea dD_l, dM_l 1 = dea D_l 1 + ea dD_l 1.
		clear(y)
		for l := 0; l < nl; l++ {
			copy(phidM[l], obsRowTimes(rowDea, k.D[l]))
			copy(dh[l], deax[1+l])
		}
		for _, e := range es {
			if e.lab < 0 {
				continue
			}
			phidM[e.lab][e.j] += phiEA[e.i] * e.v
			for r := 0; r < n; r++ {
				dh[e.lab][r] += p.ea.At(r, e.i) * e.v
			}
		}
		// dphi = phi dM Z.
		for l := 0; l < nl; l++ {
			floats.Add(y, phidM[l])
		}
		dphi := obsRowTimes(y, &z)
		du := deax[0]
		dr[c] = make([]float64, nl)
		for l := 0; l < nl; l++ {
			copy(dphiM[l], obsRowTimes(dphi, p.m[l]))
			floats.Add(dphiM[l], phidM[l])
			dr[c][l] = floats.Sum(dphiM[l])
		}
		dG[c] = floats.Dot(dphi, u) + floats.Dot(p.phi, du)
		dnum[c] = make([][]float64, nl)
		dgnum[c] = make([]float64, nl)
		for l := 0; l < nl; l++ {
			dnum[c][l] = make([]float64, nl)
			for l2 := 0; l2 < nl; l2++ {
				dnum[c][l][l2] = floats.Dot(dphiM[l], h[l2]) + floats.Dot(phiM[l], dh[l2])
			}
			dgnum[c][l] = floats.Dot(dphiM[l], u) + floats.Dot(phiM[l], du)
		}
	}

	// Assemble the rows; column c of row q comes from f(c).
	s := &models.Sensitivity{}
	add := func(q models.Quantity, v float64, f func(c int) float64) {
		lr, dd := make([]float64, nc), make([]float64, nl)
		finite := !math.IsNaN(v) && !math.IsInf(v, 0)
		for c := 0; c < ncol; c++ {
			x := 0.0
			switch {
			case !finite:
				x = math.NaN()
			case dr[c] != nil:
				x = f(c)
			}
			if c < nc {
				lr[c] = x
			} else {
				dd[c-nc] = x
			}
		}
		s.AddRow(q, v, lr, dd)
	}
	G := p.meanGap
	rates := p.Rates()
	drate := func(l int) func(c int) float64 {
		return func(c int) float64 { return dr[c][l]/G - p.r[l]*dG[c]/(G*G) }
	}
	name := k.Labels
	for l := 0; l < nl; l++ {
		add(models.Quantity{Kind: KindLabelRate, Args: []int{l}, Name: "rate[" + name[l] + "]", Unit: "1/time"}, rates[l], drate(l))
	}
	add(models.Quantity{Kind: KindMeanGap, Name: "gap", Unit: "time"}, G, func(c int) float64 { return dG[c] })
	for l := 0; l < nl; l++ {
		g := p.GapAfter(l)
		add(models.Quantity{Kind: KindGapAfter, Args: []int{l}, Name: "gap[" + name[l] + "]", Unit: "time"}, g, func(c int) float64 {
			return (dgnum[c][l] - (g-p.delta)*dr[c][l]) / p.r[l]
		})
	}
	prob := func(l, l2 int) float64 {
		if p.r[l] == 0 {
			return math.NaN()
		}
		return p.p[l][l2]
	}
	dprob := func(c, l, l2 int) float64 { return (dnum[c][l][l2] - p.p[l][l2]*dr[c][l]) / p.r[l] }
	for l := 0; l < nl; l++ {
		for l2 := 0; l2 < nl; l2++ {
			add(models.Quantity{Kind: KindTransition, Args: []int{l, l2}, Name: "P[" + name[l2] + "|" + name[l] + "]", Unit: "1"}, prob(l, l2), func(c int) float64 { return dprob(c, l, l2) })
		}
	}
	for l := 0; l < nl; l++ {
		m := p.rev[l]
		if m <= l {
			continue
		}
		pair := "[" + name[l] + "/" + name[m] + "]"
		args := []int{l, m}
		add(models.Quantity{Kind: KindEffective, Args: args, Name: "F" + pair, Unit: "k_BT"}, p.EffectiveAffinity(l, m), func(c int) float64 {
			return dprob(c, l, l)/p.p[l][l] - dprob(c, m, m)/p.p[m][m]
		})
		dl, dm := drate(l), drate(m)
		add(models.Quantity{Kind: KindVisibleCurrent, Args: args, Name: "Jvis" + pair, Unit: "1/time"}, rates[l]-rates[m], func(c int) float64 { return dl(c) - dm(c) })
		add(models.Quantity{Kind: KindVisibleActivity, Args: args, Name: "activity" + pair, Unit: "1/time"}, rates[l]+rates[m], func(c int) float64 { return dl(c) + dm(c) })
	}
	return s, nil
}

// Sensitivity returns every derived quantity of net, the network-level ones
// (models.Network.Sensitivity: stationary law, edge currents and traffic,
// sigma, cycle affinities) followed by those seen through the instrument
// (Predictor.Sensitivity: label rates, mean gaps, P(l'|l), F, visible
// current and activity), with their exact derivatives with respect to the
// log-rates and detection probabilities.
func Sensitivity(net *models.Network, in Instrument) (*models.Sensitivity, error) {
	s, err := net.Sensitivity()
	if err != nil {
		return nil, fmt.Errorf("likelihood: %w", err)
	}
	k, err := NewKernels(net)
	if err != nil {
		return nil, err
	}
	p, err := NewPredictor(k, in)
	if err != nil {
		return nil, err
	}
	ps, err := p.Sensitivity()
	if err != nil {
		return nil, err
	}
	if err := s.Append(ps); err != nil {
		return nil, fmt.Errorf("likelihood: %w", err)
	}
	return s, nil
}

// ModelSensitivity returns Sensitivity of the model's network at the
// free-parameter values x and the derivatives with respect to x:
// dx[q][k] = d Value[q] / d x_k (models.Sensitivity.Params through
// m.Jacobian).
func ModelSensitivity(m *models.Model, x []float64, in Instrument) (*models.Sensitivity, [][]float64, error) {
	net, err := m.Network(x)
	if err != nil {
		return nil, nil, fmt.Errorf("likelihood: %w", err)
	}
	s, err := Sensitivity(net, in)
	if err != nil {
		return nil, nil, err
	}
	jac, err := m.Jacobian(x)
	if err != nil {
		return nil, nil, fmt.Errorf("likelihood: %w", err)
	}
	dx, err := s.Params(jac, x)
	if err != nil {
		return nil, nil, fmt.Errorf("likelihood: %w", err)
	}
	return s, dx, nil
}

// obsMatVec returns the column vector a x.
func obsMatVec(a mat.Matrix, x []float64) []float64 {
	r, c := a.Dims()
	out := make([]float64, r)
	for i := 0; i < r; i++ {
		s := 0.0
		for j := 0; j < c; j++ {
			s += a.At(i, j) * x[j]
		}
		out[i] = s
	}
	return out
}
