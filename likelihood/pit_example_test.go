package likelihood_test

import (
	"fmt"
	"strings"

	"edgewise/likelihood"
	"edgewise/models"
)

// The probability integral transform of each gap of a short record under
// the example ring: one value per gap after the first event, each the
// model's probability that the gap would have been shorter, given the
// events before it and the label that ends it. Under the model they are
// independent and uniform on (0, 1). Gaps 1 and 4 are both a + followed
// by a + after 1.5 time units, so they get the same value.
func ExampleEvaluator_PIT() {
	m, err := models.Parse(strings.NewReader(exampleSpec), "ring3.toml")
	if err != nil {
		panic(err)
	}
	net, err := m.Network(m.Start())
	if err != nil {
		panic(err)
	}
	ev, err := likelihood.NewNetworkEvaluator(net, likelihood.Options{})
	if err != nil {
		panic(err)
	}
	p, err := ev.PIT(exampleData(), 1)
	if err != nil {
		panic(err)
	}
	for i, u := range p.U {
		fmt.Printf("gap %d: u = %.4f\n", i+1, u)
	}
	fmt.Println("randomised:", p.Randomised)
	// Output:
	// gap 1: u = 0.5743
	// gap 2: u = 0.5184
	// gap 3: u = 0.5623
	// gap 4: u = 0.5743
	// gap 5: u = 0.2939
	// randomised: false
}
