package likelihood

import (
	"math"
)

// logTransition returns ln P(l2|l) computed in log space, and true, when
// every label sits on one directed edge and there is no dead time: the
// state after an l event is then to(l), and P(l2|l) is the probability
// that the jump chain started there leaves by a detected l2 transition
// before any other detected one. It is found by eliminating the other
// states one by one from the jump chain (stochastic complement, the same
// subtraction-free reduction as Grassmann-Taksar-Heyman), with every rate
// kept as its logarithm and sums taken by log-sum-exp, so that rates of
// 1e300 and 1e-300 in one network give ln P exactly where P itself
// underflows. Self-loops created by the elimination are dropped: they do
// not change where the chain is absorbed. A missed share (1-p) w of a
// visible rate is a hidden jump. It returns false when the route does not
// apply.
func (p *Predictor) logTransition(l, l2 int) (float64, bool) {
	k := p.k
	if p.delta != 0 {
		return 0, false
	}
	for _, es := range k.Edges {
		if len(es) != 1 {
			return 0, false
		}
	}
	n, nl := k.N, len(k.Edges)
	inf := math.Inf(-1)
	lr := make([][]float64, n) // log rate i -> j of the jump chain, hidden part
	la := make([][]float64, n) // log rate of absorption i -> label
	for i := range lr {
		lr[i] = make([]float64, n)
		la[i] = make([]float64, nl)
		for j := range lr[i] {
			lr[i][j] = inf
		}
		for j := range la[i] {
			la[i][j] = inf
		}
	}
	for _, t := range k.trans {
		if !(t.Rate > 0) {
			continue
		}
		lw := math.Log(t.Rate)
		if t.Label < 0 {
			lr[t.From][t.To] = logAdd(lr[t.From][t.To], lw)
			continue
		}
		d := k.Detect[t.Label]
		if d > 0 {
			la[t.From][t.Label] = logAdd(la[t.From][t.Label], math.Log(d)+lw)
		}
		if d < 1 {
			lr[t.From][t.To] = logAdd(lr[t.From][t.To], math.Log1p(-d)+lw)
		}
	}
	s := k.Edges[l][0].To
	alive := make([]bool, n)
	for i := range alive {
		alive[i] = true
	}
	for m := 0; m < n; m++ {
		if m == s {
			continue
		}
		out := inf
		for j := range n {
			if j != m && alive[j] {
				out = logAdd(out, lr[m][j])
			}
		}
		for _, v := range la[m] {
			out = logAdd(out, v)
		}
		alive[m] = false
		if out == inf {
			continue // a trap: flow into it is never absorbed
		}
		for i := range n {
			if !alive[i] || lr[i][m] == inf {
				continue
			}
			c := lr[i][m] - out
			for j := range n {
				if j != i && alive[j] && lr[m][j] != inf {
					lr[i][j] = logAdd(lr[i][j], c+lr[m][j])
				}
			}
			for j, v := range la[m] {
				if v != inf {
					la[i][j] = logAdd(la[i][j], c+v)
				}
			}
			lr[i][m] = inf
		}
	}
	tot := inf
	for _, v := range la[s] {
		tot = logAdd(tot, v)
	}
	if tot == inf {
		return inf, true
	}
	return la[s][l2] - tot, true
}

// logAdd returns ln(e^a + e^b) without overflow or underflow.
func logAdd(a, b float64) float64 {
	if a < b {
		a, b = b, a
	}
	if b == math.Inf(-1) {
		return a
	}
	return a + math.Log1p(math.Exp(b-a))
}

// canFollow reports whether P(l2|l) > 0 in exact arithmetic: some state
// the chain can be in after an l event (the targets of l's transitions;
// every state when a dead time lets the full generator run) reaches, by
// hidden or missed jumps, the source of a detected l2 transition. A zero
// P(l2|l) with canFollow true is an underflow.
func (p *Predictor) canFollow(l, l2 int) bool {
	k := p.k
	n := k.N
	seen := make([]bool, n)
	var stack []int
	for _, t := range k.Edges[l] {
		if t.Rate > 0 && k.Detect[l] > 0 && !seen[t.To] {
			seen[t.To] = true
			stack = append(stack, t.To)
		}
	}
	if len(stack) == 0 {
		return false // l never occurs
	}
	if p.delta > 0 {
		for i := range seen {
			if !seen[i] {
				seen[i] = true
				stack = append(stack, i)
			}
		}
	}
	for len(stack) > 0 {
		i := stack[len(stack)-1]
		stack = stack[:len(stack)-1]
		for j := range n {
			if j != i && !seen[j] && k.D0.At(i, j) > 0 {
				seen[j] = true
				stack = append(stack, j)
			}
		}
	}
	for _, t := range k.Edges[l2] {
		if t.Rate > 0 && k.Detect[l2] > 0 && seen[t.From] {
			return true
		}
	}
	return false
}
