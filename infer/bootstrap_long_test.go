//go:build long

package infer

// Long check of the parametric bootstrap, run with
//
//	go test -tags long -run 'Long$' -v ./infer

import "testing"

// TestBootstrapUniformLong: 100 data sets of 400 events from the null,
// 19 replicates each; the p-values are uniform on {1..20}/20 (chi-square
// on 5 bins at the 0.001 level, mean within 4 standard errors).
func TestBootstrapUniformLong(t *testing.T) {
	checkBootstrapUniform(t, 100, 19, 400)
}
