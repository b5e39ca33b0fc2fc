package models

import (
	"errors"
	"fmt"
	"math"
)

// Sensitivities: exact first derivatives of a network's derived quantities
// with respect to its log-rates theta_t = ln w_t (one column per directed
// transition, index 2*e + d as in Jacobian.LogRate) and its detection
// probabilities p_l (one column per label), for the delta method and for
// gradients of constrained fits.
//
// Stationary law. Write dL_t = dL/d theta_t = w_t (e_a e_b^T - e_a e_a^T)
// for the transition t: a -> b. Differentiating pi L = 0, pi 1 = 1 gives
// dpi L = -pi dL_t and dpi 1 = 0, so with any q > 0 and the invertible
// B = q 1 pi - L (Z = B^{-1} is a shifted group inverse of -L),
//
//	d pi / d theta_t = pi dL_t Z = pi_a w_t (Z_b - Z_a).
//
// That solve loses relative accuracy in proportion to the condition of B,
// which grows with the spread of the rates (1e-7 of pi_i lost at 20
// decades). The derivative is computed instead by differentiating the
// Grassmann-Taksar-Heyman reduction forward (carrying d/d theta of every
// reduced rate), which keeps the accuracy of the reduction itself: by the
// matrix-tree theorem pi_i = T_i / sum_j T_j with T_i a sum of products of
// rates in which each w_t appears at most once, so |d ln pi_i / d theta_t|
// <= 1, and every step of the reduction differentiates to a combination
// whose rounding error is a few ulps of the reduced quantity. The tests
// check it against the group-inverse formula above, the matrix-tree
// theorem and finite differences.
//
// Currents and traffic of edge e = (a, b) with rates w+ = w(a->b), w- =
// w(b->a): J_e = pi_a w+ - pi_b w-, T_e = pi_a w+ + pi_b w- (1/time), and
//
//	dJ_e/d theta_t = (dpi_a/d theta_t) w+ - (dpi_b/d theta_t) w- + [t = e+] pi_a w+ - [t = e-] pi_b w-.
//
// Entropy production sigma = sum_e J_e (theta_e+ - theta_e-) in k_B per
// time (Schnakenberg, Rev. Mod. Phys. 48, 571 (1976), eq. 7.6):
//
//	d sigma/d theta_t = sum_e (dJ_e/d theta_t) (theta_e+ - theta_e-) + J_e ([t = e+] - [t = e-]).
//
// Cycle affinities are linear in theta with constant coefficients +-1
// (Network.Affinity), so their rows are exact constants.
//
// A quantity that is infinite (sigma or an affinity through a one-way edge)
// has a row of NaN: it has no derivative.

// QuantityKind names the kind of a derived quantity.
type QuantityKind string

// Kinds of the network-level quantities. Package likelihood adds the
// quantities seen through an instrument.
const (
	KindStationary QuantityKind = "pi"       // stationary probability of state Args[0]
	KindCurrent    QuantityKind = "current"  // net current of edge Args[0], From->To
	KindTraffic    QuantityKind = "traffic"  // traffic (activity) of edge Args[0]: both directions' flux
	KindEntropy    QuantityKind = "sigma"    // entropy production rate
	KindAffinity   QuantityKind = "affinity" // affinity of basis cycle Args[0] (Network.CycleBasis)
)

// Quantity identifies one row of a Sensitivity.
type Quantity struct {
	Kind QuantityKind
	Args []int  // the state, edge, cycle or label indices the quantity refers to
	Name string // unique within a Sensitivity, e.g. "pi[A]", "J[0:A-B]", "sigma"
	Unit string // "1", "1/time", "k_B/time", "k_BT" or "time"
}

// Sensitivity is a Jacobian of derived quantities with named rows: row q
// holds the value of quantity q and its derivatives with respect to every
// log-rate and every detection probability of one Network.
type Sensitivity struct {
	Rows  []Quantity
	Value []float64 // Value[q] in Rows[q].Unit
	// LogRate[q][2*e+d] = d Value[q] / d ln w(edge e, direction d); the
	// column of an absent one-way direction is 0.
	LogRate [][]float64
	// Detect[q][l] = d Value[q] / d p_l, p_l the detection probability of
	// label l.
	Detect [][]float64
}

// Len returns the number of rows.
func (s *Sensitivity) Len() int { return len(s.Rows) }

// Find returns the index of the row with the given name, or -1.
func (s *Sensitivity) Find(name string) int {
	for i, r := range s.Rows {
		if r.Name == name {
			return i
		}
	}
	return -1
}

// Append adds the rows of o, which must have the same columns, to s.
func (s *Sensitivity) Append(o *Sensitivity) error {
	if len(s.Rows) > 0 && len(o.Rows) > 0 && (len(s.LogRate[0]) != len(o.LogRate[0]) || len(s.Detect[0]) != len(o.Detect[0])) {
		return fmt.Errorf("sensitivity: cannot append rows with %d+%d columns to rows with %d+%d", len(o.LogRate[0]), len(o.Detect[0]), len(s.LogRate[0]), len(s.Detect[0]))
	}
	s.Rows = append(s.Rows, o.Rows...)
	s.Value = append(s.Value, o.Value...)
	s.LogRate = append(s.LogRate, o.LogRate...)
	s.Detect = append(s.Detect, o.Detect...)
	return nil
}

// AddRow appends one row (the slices are kept, not copied).
func (s *Sensitivity) AddRow(q Quantity, value float64, logRate, detect []float64) {
	s.Rows = append(s.Rows, q)
	s.Value = append(s.Value, value)
	s.LogRate = append(s.LogRate, logRate)
	s.Detect = append(s.Detect, detect)
}

// Params maps the sensitivities to a model's free parameters x (in the
// order of Model.Free) through the model's Jacobian j, by the chain rule
//
//	d Value[q]/d x_k = sum_t LogRate[q][t] j.LogRate[t][k] / x_k + sum_l Detect[q][l] j.Detect[l][k].
//
// Multiply column k by x_k for derivatives with respect to ln x_k. A NaN
// row stays NaN.
func (s *Sensitivity) Params(j *Jacobian, x []float64) ([][]float64, error) {
	if j == nil {
		return nil, errors.New("sensitivity: nil model Jacobian")
	}
	nt, nl := len(j.LogRate), len(j.Detect)
	for q := range s.Rows {
		if len(s.LogRate[q]) != nt || len(s.Detect[q]) != nl {
			return nil, fmt.Errorf("sensitivity: row %s has %d log-rate and %d detection columns; the model Jacobian has %d and %d", s.Rows[q].Name, len(s.LogRate[q]), len(s.Detect[q]), nt, nl)
		}
	}
	for _, row := range append(append([][]float64(nil), j.LogRate...), j.Detect...) {
		if len(row) != len(x) {
			return nil, fmt.Errorf("sensitivity: model Jacobian has %d columns for %d free parameters", len(row), len(x))
		}
	}
	out := make([][]float64, len(s.Rows))
	for q := range out {
		r := make([]float64, len(x))
		for k := range x {
			v := 0.0
			for t, jr := range j.LogRate {
				if jr[k] != 0 {
					v += s.LogRate[q][t] * jr[k]
				}
			}
			v /= x[k]
			for l, jr := range j.Detect {
				if jr[k] != 0 {
					v += s.Detect[q][l] * jr[k]
				}
			}
			r[k] = v
		}
		out[q] = r
	}
	return out, nil
}

// EdgeName returns "e:From-To", the name of edge e in sensitivity rows
// (the index keeps parallel edges apart).
func (n *Network) EdgeName(e int) string {
	ed := n.Edges[e]
	return fmt.Sprintf("%d:%s-%s", e, n.States[ed.From], n.States[ed.To])
}

// Sensitivity returns the network-level quantities and their exact
// derivatives with respect to the log-rates, in this row order:
//
//	pi[s]            stationary probability of each state s (1)
//	J[e:a-b]         net current of each edge, a->b (1/time)
//	traffic[e:a-b]   traffic pi_a w(a->b) + pi_b w(b->a) of each edge (1/time)
//	sigma            entropy production rate (k_B/time)
//	affinity[c:...]  affinity of each cycle of CycleBasis (k_BT)
//
// None of them depends on a detection probability: the Detect columns
// (one per label) are 0. It fails when the network is invalid.
func (n *Network) Sensitivity() (*Sensitivity, error) {
	if err := n.Validate(); err != nil {
		return nil, fmt.Errorf("sensitivity: %w", err)
	}
	pi, dpi, err := n.StationarySensitivity()
	if err != nil {
		return nil, err
	}
	nc, nl := 2*len(n.Edges), len(n.Labels)
	cycles := n.CycleBasis()
	nrow := len(n.States) + 2*len(n.Edges) + 1 + len(cycles)
	s := &Sensitivity{Rows: make([]Quantity, 0, nrow), Value: make([]float64, 0, nrow), LogRate: make([][]float64, 0, nrow), Detect: make([][]float64, 0, nrow)}
	// One block for every row's columns.
	slab, zero := make([]float64, (nrow-len(n.States))*nc), make([]float64, nrow*nl)
	newRow := func() []float64 {
		r := slab[:nc:nc]
		slab = slab[nc:]
		return r
	}
	add := func(q Quantity, v float64, row []float64) {
		s.AddRow(q, v, row, zero[:nl:nl])
		zero = zero[nl:]
	}
	for i, name := range n.States {
		add(Quantity{Kind: KindStationary, Args: []int{i}, Name: "pi[" + name + "]", Unit: "1"}, pi[i], dpi[i])
	}
	cur := n.Currents(pi)
	dcur := make([][]float64, len(n.Edges))
	traffic := make([]float64, len(n.Edges))
	dtraffic := make([][]float64, len(n.Edges))
	for e, ed := range n.Edges {
		dj, dt := newRow(), newRow()
		for c := 0; c < nc; c++ {
			fa, fb := dpi[ed.From][c]*ed.Rate[0], dpi[ed.To][c]*ed.Rate[1]
			dj[c], dt[c] = fa-fb, fa+fb
		}
		fa, fb := pi[ed.From]*ed.Rate[0], pi[ed.To]*ed.Rate[1]
		dj[2*e] += fa
		dt[2*e] += fa
		dj[2*e+1] -= fb
		dt[2*e+1] += fb
		dcur[e], dtraffic[e], traffic[e] = dj, dt, fa+fb
		add(Quantity{Kind: KindCurrent, Args: []int{e}, Name: "J[" + n.EdgeName(e) + "]", Unit: "1/time"}, cur[e], dj)
	}
	for e := range n.Edges {
		add(Quantity{Kind: KindTraffic, Args: []int{e}, Name: "traffic[" + n.EdgeName(e) + "]", Unit: "1/time"}, traffic[e], dtraffic[e])
	}

	sigma := n.EntropyProduction(pi)
	ds := newRow()
	for e := range n.Edges {
		a := n.EdgeAffinity(e)
		if math.IsInf(a, 0) || math.IsNaN(a) {
			for c := range ds {
				ds[c] = math.NaN()
			}
			break
		}
		for c := 0; c < nc; c++ {
			ds[c] += dcur[e][c] * a
		}
		ds[2*e] += cur[e]
		ds[2*e+1] -= cur[e]
	}
	add(Quantity{Kind: KindEntropy, Name: "sigma", Unit: "k_B/time"}, sigma, ds)

	for ci, cy := range cycles {
		row := newRow()
		v := n.Affinity(cy)
		for _, st := range cy.Steps {
			sg := 1.0
			if !st.Forward {
				sg = -1
			}
			row[2*st.Edge] += sg
			row[2*st.Edge+1] -= sg
		}
		if math.IsInf(v, 0) || math.IsNaN(v) {
			for c := range row {
				row[c] = math.NaN()
			}
		}
		add(Quantity{Kind: KindAffinity, Args: []int{ci}, Name: fmt.Sprintf("affinity[%d:%s]", ci, cy.Names(n.States)), Unit: "k_BT"}, v, row)
	}
	return s, nil
}

// Sensitivity returns the network-level quantities of the model at the
// free-parameter values x (Network.Sensitivity of m.Network(x)) and their
// derivatives with respect to x: dx[q][k] = d Value[q] / d x_k (see
// Sensitivity.Params).
func (m *Model) Sensitivity(x []float64) (*Sensitivity, [][]float64, error) {
	net, err := m.Network(x)
	if err != nil {
		return nil, nil, err
	}
	s, err := net.Sensitivity()
	if err != nil {
		return nil, nil, fmt.Errorf("model %s: %w", m.Name, err)
	}
	jac, err := m.Jacobian(x)
	if err != nil {
		return nil, nil, err
	}
	dx, err := s.Params(jac, x)
	if err != nil {
		return nil, nil, err
	}
	return s, dx, nil
}

// StationarySensitivity returns the stationary law pi (as Stationary) and
// dpi[i][2*e+d] = d pi_i / d ln w(edge e, direction d), by forward
// differentiation of the Grassmann-Taksar-Heyman reduction (see the
// formulas above). Columns of absent one-way directions are 0; every
// column sums to 0. Each entry is accurate to a few ulps of pi_i however
// stiff the rates. It fails when the network is not strongly connected.
// Cost O(n^3 |E|).
func (n *Network) StationarySensitivity() ([]float64, [][]float64, error) {
	k := len(n.States)
	nc := 2 * len(n.Edges)
	a := make([][]float64, k)
	da := make([][][]float64, k) // da[i][j][c] = d a[i][j] / d theta_c
	slab := make([]float64, k*k*nc)
	for i := range a {
		a[i] = make([]float64, k)
		da[i] = make([][]float64, k)
		for j := range da[i] {
			da[i][j], slab = slab[:nc:nc], slab[nc:]
		}
	}
	for _, t := range n.Transitions() {
		a[t.From][t.To] += t.Rate
		da[t.From][t.To][2*t.Edge+t.Dir] += t.Rate
	}
	ds := make([]float64, nc)
	for m := k - 1; m >= 1; m-- {
		s := 0.0
		clear(ds)
		for j := 0; j < m; j++ {
			s += a[m][j]
			for c, x := range da[m][j] {
				ds[c] += x
			}
		}
		if !(s > 0) {
			return nil, nil, fmt.Errorf("stationary sensitivity: network is not strongly connected (state %s is absorbing after reduction)", n.States[m])
		}
		for i := 0; i < m; i++ {
			a[i][m] /= s
			q := a[i][m]
			for c := range ds {
				da[i][m][c] = (da[i][m][c] - q*ds[c]) / s
			}
		}
		for i := 0; i < m; i++ {
			aim := a[i][m]
			if aim == 0 {
				continue
			}
			dim := da[i][m]
			for j := 0; j < m; j++ {
				if j == i {
					continue
				}
				a[i][j] += aim * a[m][j]
				amj, dmj, dij := a[m][j], da[m][j], da[i][j]
				for c := range dij {
					dij[c] += dim[c]*amj + aim*dmj[c]
				}
			}
		}
	}
	pi := make([]float64, k)
	dpi := make([][]float64, k)
	pi[0] = 1
	dpi[0] = make([]float64, nc)
	total := 1.0
	dtotal := make([]float64, nc)
	for m := 1; m < k; m++ {
		dpi[m] = make([]float64, nc)
		for i := 0; i < m; i++ {
			pi[m] += pi[i] * a[i][m]
			for c := range dtotal {
				dpi[m][c] += dpi[i][c]*a[i][m] + pi[i]*da[i][m][c]
			}
		}
		total += pi[m]
		for c := range dtotal {
			dtotal[c] += dpi[m][c]
		}
	}
	for i := range pi {
		pi[i] /= total
		for c := range dtotal {
			dpi[i][c] = (dpi[i][c] - pi[i]*dtotal[c]) / total
		}
	}
	return pi, dpi, nil
}
