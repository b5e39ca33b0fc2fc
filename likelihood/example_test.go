package likelihood_test

import (
	"fmt"
	"math"
	"strings"

	"edgewise/likelihood"
	"edgewise/models"

	"gonum.org/v1/gonum/mat"
)

const exampleSpec = `
name = "ring3"
states = ["A", "B", "C"]
[[edge]]
between = ["A", "B"]
rates = ["kab", "kba"]
labels = ["+", "-"]
[[edge]]
between = ["B", "C"]
rates = ["kbc", "kcb"]
[[edge]]
between = ["C", "A"]
rates = ["kca", "kac"]
[param.kab]
value = 3.0
[param.kba]
value = 0.5
[param.kbc]
value = 2.0
[param.kcb]
value = 0.4
[param.kca]
value = 1.5
[param.kac]
value = 0.6
`

// exampleData is a short record of + and - events (times in the rates'
// time unit).
func exampleData() *likelihood.Data {
	return &likelihood.Data{
		Labels: []string{"+", "-"},
		Records: []likelihood.Record{{
			ID:    "demo",
			Time:  []float64{0.4, 1.9, 2.3, 2.6, 4.1, 5.0},
			Label: []uint8{0, 0, 1, 0, 0, 0},
			End:   math.NaN(),
		}},
	}
}

// The log-likelihood of a record, conditioned on its first event (the
// default), and with the stationary start.
func ExampleEvaluator_LogLik() {
	m, err := models.Parse(strings.NewReader(exampleSpec), "ring3.toml")
	if err != nil {
		panic(err)
	}
	net, err := m.Network(m.Start())
	if err != nil {
		panic(err)
	}
	for _, start := range []likelihood.StartMode{likelihood.StartFirstEvent, likelihood.StartStationary} {
		ev, err := likelihood.NewNetworkEvaluator(net, likelihood.Options{Start: start})
		if err != nil {
			panic(err)
		}
		ll, err := ev.LogLik(exampleData())
		if err != nil {
			panic(err)
		}
		fmt.Printf("start %d: ln L = %.6f (fast path %v)\n", start, ll, ev.Fast())
	}
	// Output:
	// start 0: ln L = -4.944925 (fast path true)
	// start 1: ln L = -5.560864 (fast path true)
}

// The gradient with respect to the log-rates, one entry per directed edge
// (index 2*edge + direction), and to the detection probabilities.
func ExampleEvaluator_Gradient() {
	m, err := models.Parse(strings.NewReader(exampleSpec), "ring3.toml")
	if err != nil {
		panic(err)
	}
	net, err := m.Network(m.Start())
	if err != nil {
		panic(err)
	}
	ev, err := likelihood.NewNetworkEvaluator(net, likelihood.Options{Instrument: likelihood.Instrument{DeadTime: 0.05}})
	if err != nil {
		panic(err)
	}
	ll, g, err := ev.Gradient(exampleData())
	if err != nil {
		panic(err)
	}
	fmt.Printf("ln L = %.6f\n", ll)
	for i, v := range g.LogRate {
		fmt.Printf("d lnL/d ln w[%d] = %+.6f\n", i, v)
	}
	// Output:
	// ln L = -4.889150
	// d lnL/d ln w[0] = +0.315365
	// d lnL/d ln w[1] = +0.199392
	// d lnL/d ln w[2] = +0.129375
	// d lnL/d ln w[3] = -0.207060
	// d lnL/d ln w[4] = +0.869090
	// d lnL/d ln w[5] = -0.331222
}

// A propagator evaluates exp(A t) for many t after one decomposition; the
// route actually used is reported.
func ExamplePropagator() {
	a := mat.NewDense(2, 2, []float64{-2, 1, 0.5, -1})
	p, err := likelihood.NewPropagator(a, likelihood.ExpAuto)
	if err != nil {
		panic(err)
	}
	var e mat.Dense
	if err := p.Exp(&e, 1); err != nil {
		panic(err)
	}
	fmt.Println("route:", p.Method())
	fmt.Printf("%.6f %.6f\n%.6f %.6f\n", e.At(0, 0), e.At(0, 1), e.At(1, 0), e.At(1, 1))
	// Output:
	// route: spectral
	// 0.186123 0.252086
	// 0.126043 0.438209
}
