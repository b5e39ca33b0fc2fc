package infer

import (
	"fmt"
	"math"
	"sync"

	"edgewise/models"

	"gonum.org/v1/gonum/mat"
)

// hessStep is the central-difference step of the observed information, in
// the working coordinates (natural log of a rate, logit of a detection
// probability). The gradient is exact, so the error is the truncation
// error h^2/6 |d^3 ln L| (about 2e-9 of the curvature for derivatives of
// order one) plus the gradient's rounding over 2h, far below both.
const hessStep = 1e-4

// workingOf returns the working coordinates w of parameter values x:
// ln x for a rate, ln[x/(1-x)] for a detection probability.
func workingOf(kinds []models.ParamKind, x []float64) []float64 {
	w := make([]float64, len(x))
	for j, v := range x {
		if kinds[j] == models.DetectParam {
			w[j] = math.Log(v) - math.Log1p(-v)
		} else {
			w[j] = math.Log(v)
		}
	}
	return w
}

// valuesOf inverts workingOf.
func valuesOf(kinds []models.ParamKind, w []float64) []float64 {
	x := make([]float64, len(w))
	for j, v := range w {
		if kinds[j] == models.DetectParam {
			x[j] = 1 / (1 + math.Exp(-v))
		} else {
			x[j] = math.Exp(v)
		}
	}
	return x
}

// dxdw is dx/dw at x.
func dxdw(kind models.ParamKind, x float64) float64 {
	if kind == models.DetectParam {
		return x * (1 - x)
	}
	return x
}

// observedInfo returns the observed information I = -d^2 ln L / dw dw^T at
// the parameter values x, by central differences of the exact gradient in
// the working coordinates, symmetrised. The 2p gradient evaluations run on
// up to workers goroutines; the result does not depend on their number.
func observedInfo(ob *objective, kinds []models.ParamKind, x []float64, workers int) (*mat.SymDense, error) {
	p := len(x)
	w0 := workingOf(kinds, x)
	cols := make([][]float64, 2*p)
	errs := make([]error, 2*p)
	jobs := make(chan int)
	var wg sync.WaitGroup
	if workers < 1 {
		workers = 1
	}
	for k := 0; k < workers; k++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for t := range jobs {
				j, s := t/2, 1.0
				if t%2 == 1 {
					s = -1
				}
				w := append([]float64(nil), w0...)
				w[j] += s * hessStep
				xv := valuesOf(kinds, w)
				_, gx, err := ob.logLikX(xv, true, 1)
				if err != nil {
					errs[t] = err
					continue
				}
				gw := make([]float64, p)
				for i := range gw {
					gw[i] = gx[i] * dxdw(kinds[i], xv[i])
				}
				cols[t] = gw
			}
		}()
	}
	for t := 0; t < 2*p; t++ {
		jobs <- t
	}
	close(jobs)
	wg.Wait()
	for _, err := range errs {
		if err != nil {
			return nil, fmt.Errorf("observed information: %w", err)
		}
	}
	info := mat.NewSymDense(p, nil)
	for i := 0; i < p; i++ {
		for j := i; j < p; j++ {
			hij := (cols[2*j][i] - cols[2*j+1][i]) / (2 * hessStep)
			hji := (cols[2*i][j] - cols[2*i+1][j]) / (2 * hessStep)
			info.SetSym(i, j, -(hij+hji)/2)
		}
	}
	return info, nil
}
