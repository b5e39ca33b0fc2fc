package models_test

import (
	"fmt"
	"os"

	"edgewise/models"
)

// The entropy production of the three-state ring of testdata/ring3.toml and
// how it responds to each rate, first per log-rate of the network, then per
// free parameter of the model (kac is fixed, so it has no column).
func ExampleModel_Sensitivity() {
	f, err := os.Open("../testdata/ring3.toml")
	if err != nil {
		fmt.Println(err)
		return
	}
	defer f.Close()
	m, err := models.Parse(f, "ring3.toml")
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
