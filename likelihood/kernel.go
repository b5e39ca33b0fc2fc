package likelihood

import (
	"fmt"

	"edgewise/models"

	"gonum.org/v1/gonum/mat"
)

// Kernels is the generator split L = D0 + sum_l D_l of a network seen
// through an instrument (design: a detection probability per label).
//
//	(D_l)_ij = p_l w_ij      for every directed edge i->j carrying label l
//	D0       = L - sum_l D_l (hidden rates, the missed share (1-p_l) w_ij of
//	           visible ones, and the full diagonal -sum_j w_ij)
//
// D0 is a sub-generator: exp(D0 t) -> 0 as t -> inf when at least one label
// has a positive rate. Rates are in 1/time.
type Kernels struct {
	N      int          // number of states
	Labels []string     // label names, index = label number
	Detect []float64    // detection probability per label
	L      *mat.Dense   // full generator, rows sum to 0
	D0     *mat.Dense   // hidden part
	D      []*mat.Dense // D[l], visible part of label l
	// Edges lists, per label, the directed transitions carrying it.
	Edges [][]models.Transition

	net   *models.Network     // copy of the network, for the stationary law
	trans []models.Transition // every directed transition, for gradients
}

// NewKernels builds the generator split of net. The network must be valid
// and carry at least one label with a positive rate.
func NewKernels(net *models.Network) (*Kernels, error) {
	if err := net.Validate(); err != nil {
		return nil, fmt.Errorf("likelihood: %w", err)
	}
	n := net.NumStates()
	k := &Kernels{
		N:      n,
		L:      mat.NewDense(n, n, nil),
		D0:     mat.NewDense(n, n, nil),
		D:      make([]*mat.Dense, len(net.Labels)),
		Edges:  make([][]models.Transition, len(net.Labels)),
		Labels: make([]string, len(net.Labels)),
		Detect: make([]float64, len(net.Labels)),
		net:    net.Clone(),
		trans:  net.Transitions(),
	}
	for l, lab := range net.Labels {
		k.Labels[l] = lab.Name
		k.Detect[l] = lab.Detect
		k.D[l] = mat.NewDense(n, n, nil)
	}
	visible := false
	for _, t := range net.Transitions() {
		k.L.Set(t.From, t.To, k.L.At(t.From, t.To)+t.Rate)
		k.L.Set(t.From, t.From, k.L.At(t.From, t.From)-t.Rate)
		k.D0.Set(t.From, t.From, k.D0.At(t.From, t.From)-t.Rate)
		if t.Label == models.Hidden {
			k.D0.Set(t.From, t.To, k.D0.At(t.From, t.To)+t.Rate)
			continue
		}
		p := net.Labels[t.Label].Detect
		k.D[t.Label].Set(t.From, t.To, k.D[t.Label].At(t.From, t.To)+p*t.Rate)
		k.D0.Set(t.From, t.To, k.D0.At(t.From, t.To)+(1-p)*t.Rate)
		k.Edges[t.Label] = append(k.Edges[t.Label], t)
		if p > 0 {
			visible = true
		}
	}
	if !visible {
		return nil, fmt.Errorf("likelihood: network has no visible transition with a positive rate and detection")
	}
	return k, nil
}

// SingleEdge reports whether every label sits on exactly one directed edge
// and is detected with probability 1 (perfect detection of single-edge
// labels: every transition of a labelled edge is seen, and design.md's
// psi_{l->l'}(t) = [exp(D0 t)]_{to(l), from(l')} w_{l'} holds with D0 the
// hidden rates only). It is a property of the kernels, not the condition
// of the Evaluator's fast path: that path needs only one directed edge
// per label (any detection probability; a missed event is a hidden
// transition inside D0, and the state right after a detected event is
// still known) and the spectral route.
func (k *Kernels) SingleEdge() bool {
	for l, es := range k.Edges {
		if len(es) != 1 || k.Detect[l] != 1 {
			return false
		}
	}
	return true
}
