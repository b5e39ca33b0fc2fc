package models_test

import (
	"fmt"
	"strings"

	"edgewise/models"
)

// The entropy production of a three-state ring and how it responds to each
// rate, first per log-rate of the network, then per free parameter of the
// model (kac is fixed, so it has no column).
func ExampleModel_Sensitivity() {
	spec := `
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
fixed = true
`
	m, err := models.Parse(strings.NewReader(spec), "ring3.toml")
	if err != nil {
		fmt.Println(err)
		return
	}
	s, dx, err := m.Sensitivity(m.Start())
	if err != nil {
		fmt.Println(err)
		return
	}
	q := s.Find("sigma")
	fmt.Printf("sigma = %.4f %s\n", s.Value[q], s.Rows[q].Unit)
	fmt.Printf("d sigma / d ln w(A->B) = %.4f\n", s.LogRate[q][0])
	for k, name := range m.Free() {
		fmt.Printf("d sigma / d %s = %+.4f\n", name, dx[q][k])
	}
	a := len(s.Rows) - 1 // the one cycle of the basis
	fmt.Println(s.Rows[a].Name)
	fmt.Printf("cycle affinity %.4f k_BT, d/d ln w: %v\n", s.Value[a], s.LogRate[a])
	// Output:
	// sigma = 2.2047 k_B/time
	// d sigma / d ln w(A->B) = 1.2618
	// d sigma / d kab = +0.4206
	// d sigma / d kba = -1.3978
	// d sigma / d kbc = +0.7260
	// d sigma / d kca = +1.1328
	// d sigma / d kcb = -1.8709
	// affinity[0:B-C-A-B]
	// cycle affinity 4.3175 k_BT, d/d ln w: [1 -1 1 -1 1 -1]
}
