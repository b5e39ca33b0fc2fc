package likelihood_test

import (
	"fmt"
	"strings"

	"edgewise/likelihood"
	"edgewise/models"
)

// The effective affinity F of the visible edge under an instrument with a
// dead time, and its derivatives with respect to the model's free
// parameters on log scale (d F / d ln x = x d F / d x): the gradient the
// delta method needs. Without dead time F would be the cycle affinity,
// ln 75 = 4.3175, with derivative +1 or -1 in every log-rate.
func ExampleModelSensitivity() {
	m, err := models.Parse(strings.NewReader(exampleSpec), "ring3.toml")
	if err != nil {
		fmt.Println(err)
		return
	}
	x := m.Start()
	s, dx, err := likelihood.ModelSensitivity(m, x, likelihood.Instrument{DeadTime: 0.05})
	if err != nil {
		fmt.Println(err)
		return
	}
	q := s.Find("F[+/-]")
	fmt.Printf("F = %.4f %s\n", s.Value[q], s.Rows[q].Unit)
	for k, name := range m.Free() {
		fmt.Printf("d F / d ln %s = %+.4f\n", name, x[k]*dx[q][k])
	}
	// Output:
	// F = 2.9044 k_BT
	// d F / d ln kab = -0.4397
	// d F / d ln kac = -0.2576
	// d F / d ln kba = -0.9555
	// d F / d ln kbc = +1.0206
	// d F / d ln kca = +0.4272
	// d F / d ln kcb = -0.4275
}
