package infer

import (
	"math"
	"testing"
)

// TestEllipseRange: the range of x*y over the ellipse
// {z' V^{-1} z <= r^2} centred at 0 with unit variances and correlation
// rho is [-r^2 (1 - rho)/2, r^2 (1 + rho)/2] (the extremes of a quadratic
// form over an ellipse are its generalised eigenvalues times r^2: here
// the eigenvalues of V^{1/2} [[0, 1/2], [1/2, 0]] V^{1/2}, (rho +- 1)/2).
// Off centre and for J^2 e^{-l}, against a brute-force search over a fine
// grid of the whole filled ellipse (interior included, another route that
// does not assume the extremes lie on the boundary): every grid value must
// lie inside the range found, which must match the grid's to its
// resolution.
func TestEllipseRange(t *testing.T) {
	for _, rho := range []float64{0, 0.5, -0.8, 0.99} {
		for _, r := range []float64{1, 1.96, 3} {
			lo, hi := ellipseRange(0, 0, 1, rho, 1, r, func(x, y float64) float64 { return x * y })
			wlo, whi := -r*r*(1-rho)/2, r*r*(1+rho)/2
			if math.Abs(lo-wlo) > 1e-12*r*r || math.Abs(hi-whi) > 1e-12*r*r {
				t.Errorf("rho %g r %g: [%.15g, %.15g], want [%.15g, %.15g]", rho, r, lo, hi, wlo, whi)
			}
		}
	}
	cases := []struct {
		x0, y0, sxx, sxy, syy, r float64
		h                        func(x, y float64) float64
	}{
		{0.3, 0.02, 0.01, 0.0004, 0.0001, 1.96, func(x, y float64) float64 { return x * y }},
		{-0.1, -0.05, 0.04, 0.008, 0.0025, 2.1, func(x, y float64) float64 { return x * y }},
		{0.05, math.Log(0.2), 0.0004, -0.001, 0.01, 1.96, func(x, y float64) float64 { return x * x * math.Exp(-y) }},
		{0.01, math.Log(0.3), 0.0004, 0.0002, 0.04, 2.5, func(x, y float64) float64 { return x * x * math.Exp(-y) }},
	}
	for i, c := range cases {
		lo, hi := ellipseRange(c.x0, c.y0, c.sxx, c.sxy, c.syy, c.r, c.h)
		l11 := math.Sqrt(c.sxx)
		l21 := c.sxy / l11
		l22 := math.Sqrt(c.syy - l21*l21)
		blo, bhi := math.Inf(1), math.Inf(-1)
		const n = 1000
		for a := -n; a <= n; a++ {
			for b := -n; b <= n; b++ {
				z1, z2 := c.r*float64(a)/n, c.r*float64(b)/n
				if z1*z1+z2*z2 > c.r*c.r {
					continue
				}
				v := c.h(c.x0+l11*z1, c.y0+l21*z1+l22*z2)
				blo, bhi = math.Min(blo, v), math.Max(bhi, v)
			}
		}
		// Every grid value lies in the true range (an interior extreme
		// missed by the boundary search would show here), and the grid,
		// whose points miss the boundary by up to one step (r/1000),
		// comes within a few steps' worth of the range.
		tol := 5e-4 * (bhi - blo)
		if lo > blo+1e-15 || hi < bhi-1e-15 || math.Abs(lo-blo) > tol || math.Abs(hi-bhi) > tol {
			t.Errorf("case %d: [%.10g, %.10g], grid [%.10g, %.10g]", i, lo, hi, blo, bhi)
		}
	}
}
