package infer

import (
	"context"
	"fmt"
	"math"
	"slices"

	"edgewise/models"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/stat/distuv"
)

// ProfileInterval is a profile-likelihood confidence interval of one free
// parameter: the values t where 2 [ln L_max - max ln L(theta | theta_j = t)]
// stays below the chi-square(1) quantile of the level (Venzon and
// Moolgavkar, Appl. Stat. 37, 87 (1988)). It is asymmetric in general.
type ProfileInterval struct {
	Lower, Upper float64 // in the parameter's units
	// LowerOpen (UpperOpen) is true when the profile never reached the
	// threshold on that side before the parameter's bound or a factor
	// e^25 from the estimate: the interval is one-sided, and Lower
	// (Upper) is that bound (0 or +Inf for a rate without bounds).
	LowerOpen, UpperOpen bool
	Level                float64
	Method               string
	// HigherMax is true when profiling met a higher ln L than the fit's
	// maximum (by more than 0.01 nats): the fit missed the maximum.
	HigherMax float64
	Evals     int // profile points evaluated (inner maximisations)
}

// profileMaxSpan is how far, in natural-log units, a profile is followed
// from the estimate before the side is declared open.
const profileMaxSpan = 25.0

// profileAll computes the profile interval of every determined free
// parameter, the 2p sides in parallel.
func profileAll(ctx context.Context, res *FitResult, ob *objective, workers int, prog *progress) {
	p := len(res.Free)
	kinds := paramKinds(res.Model)
	q := distuv.ChiSquared{K: 1}.Quantile(res.Level)
	type side struct {
		t    float64
		open bool
		hi   float64
		ev   int
		cut  bool // interrupted: the inner maximisations did not finish
	}
	out := make([]side, 2*p)
	parallel(2*p, workers, func(task int) {
		j, s := task/2, 1.0
		if task%2 == 1 {
			s = -1
		}
		if !res.Params[j].Determined || res.Ident == nil {
			prog.step("profile", 2*p)
			return
		}
		t, open, higher, ev := profileSide(ctx, res, ob, kinds, j, s, q)
		out[task] = side{t: t, open: open, hi: higher, ev: ev, cut: ctx.Err() != nil}
		prog.step("profile", 2*p)
	})
	for j := range res.Params {
		if !res.Params[j].Determined || res.Ident == nil {
			continue
		}
		up, dn := out[2*j], out[2*j+1]
		if up.cut || dn.cut {
			// An interrupted side's end is not a profile crossing (its
			// inner maximisations stopped early): report no interval.
			res.Warnings = append(res.Warnings, fmt.Sprintf("%s: profile interval not computed (interrupted)", res.Params[j].Name))
			continue
		}
		pi := &ProfileInterval{Level: res.Level, Method: "profile likelihood", UpperOpen: up.open, LowerOpen: dn.open, Evals: up.ev + dn.ev}
		pi.Upper = valueOfWorking(kinds[j], up.t)
		pi.Lower = valueOfWorking(kinds[j], dn.t)
		c := ob.coords[j]
		if up.open {
			pi.Upper = c.hi
		}
		if dn.open {
			pi.Lower = c.lo
		}
		pi.HigherMax = math.Max(up.hi, dn.hi)
		res.Params[j].Profile = pi
	}
}

func valueOfWorking(k models.ParamKind, w float64) float64 {
	return valuesOf([]models.ParamKind{k}, []float64{w})[0]
}

// profileSide follows the profile of parameter j in direction s (+1 up,
// -1 down) in its working coordinate until the signed root deviance
// r = sqrt(2 (ln L_max - ln L_p)) reaches sqrt(q): secant steps on r,
// which is nearly linear in the coordinate, with the step at most
// quadrupled each time. It returns the crossing, whether the side is open,
// the largest excess of ln L_p over ln L_max met, and the points used.
func profileSide(ctx context.Context, res *FitResult, ob *objective, kinds []models.ParamKind, j int, s, q float64) (float64, bool, float64, int) {
	z := math.Sqrt(q)
	w0 := workingOf(kinds, res.X)
	cov := res.Ident.Cov
	sej := math.Sqrt(math.Max(cov.At(j, j), 0))
	nearZero := slices.Contains(res.Ident.NearZero, j)
	if !(sej > 1e-6) || math.IsInf(sej, 0) || nearZero {
		// No usable curvature (a rate running to zero): start with a step
		// of one natural-log unit and no regression of the others.
		sej = 1 / math.Sqrt(q)
	}
	// slope[i] = Cov_ij / Cov_jj: how the others follow parameter j at
	// the conditional maximum of the quadratic approximation; left out
	// when it is not a sound guide (no curvature, or a huge slope).
	slope := make([]float64, len(w0))
	for i := range slope {
		if i == j || nearZero || !(cov.At(j, j) > 0) {
			continue
		}
		if b := cov.At(i, j) / cov.At(j, j); math.Abs(b) <= 10 {
			slope[i] = b
		}
	}
	// Limit of the coordinate on this side.
	c := ob.coords[j]
	lim := w0[j] + s*profileMaxSpan
	if !c.logSoft || c.lo > 0 {
		var xl float64
		if s > 0 {
			xl = c.hi - 1e-6*(c.hi-c.lo)
		} else {
			xl = c.lo + 1e-6*math.Min(c.hi-c.lo, math.Max(c.lo, res.X[j]))
		}
		if !math.IsInf(xl, 0) && xl > 0 {
			wl := workingOf([]models.ParamKind{kinds[j]}, []float64{xl})[0]
			if s*(wl-lim) < 0 {
				lim = wl
			}
		}
	}
	others := make([]int, 0, len(w0)-1)
	for i := range w0 {
		if i != j {
			others = append(others, i)
		}
	}
	// Preconditioner of the inner searches: the information of the other
	// coordinates (per gap, in the optimiser's coordinates), from the fit's
	// observed information; the inner problems are then nearly Newton
	// steps.
	pre := innerPreconditioner(res.Info, ob, kinds, res.X, others)
	// The inner maximisation at w_j = t, warm-started at the conditional
	// mean of the other coordinates given t (regression through Cov).
	prevW := append([]float64(nil), w0...)
	prevT := w0[j]
	higher := 0.0
	evals := 0
	deviance := func(t float64) float64 {
		evals++
		inner := func(step bool) runOutcome {
			w := append([]float64(nil), prevW...)
			if step {
				for _, i := range others {
					w[i] += slope[i] * (t - prevT)
				}
			}
			w[j] = t
			x := valuesOf(kinds, w)
			for _, i := range others {
				x[i] = clampInside(x[i], ob.coords[i].lo, ob.coords[i].hi)
			}
			u := ob.uOf(x)
			ec := newEvalCache(ob, u, others, 1)
			v0 := make([]float64, len(others))
			for a, i := range others {
				v0[a] = u[i]
			}
			return minimizeLocal(ctx, ec, v0, pre, localOptions{MaxIter: 200, GradTol: gradTol(ob.n)})
		}
		// From the predicted point, and when that search does not
		// converge, also from the previous profile point: the profile is
		// the larger of the two (a search that stops early would
		// overstate the deviance and shrink the interval).
		out := inner(true)
		if !out.Converged && ctx.Err() == nil {
			if alt := inner(false); alt.F < out.F {
				out = alt
			}
		}
		ll := -out.F * ob.n
		if math.IsInf(out.F, 1) || math.IsNaN(ll) {
			return math.Inf(1)
		}
		xe := ob.xOf(out.U)
		prevW = workingOf(kinds, xe)
		prevT = t
		d := 2 * (res.LogLik - ll)
		if -d/2 > higher {
			higher = -d / 2
		}
		return math.Sqrt(math.Max(d, 0))
	}
	ta, ra := w0[j], 0.0
	tb := w0[j] + s*z*sej
	if s*(tb-lim) > 0 {
		tb = lim
	}
	rb := deviance(tb)
	for it := 0; it < 16 && ctx.Err() == nil; it++ {
		if math.Abs(rb-z) < 0.005 {
			return tb, false, higher, evals
		}
		if rb > z {
			// Bracketed between a and b: secant (regula falsi) inside.
			tn := ta + (z-ra)*(tb-ta)/(rb-ra)
			if math.IsInf(rb, 1) {
				tn = (ta + tb) / 2
			}
			rn := deviance(tn)
			if rn > z {
				tb, rb = tn, rn
			} else {
				ta, ra = tn, rn
			}
			if math.Abs(tb-ta) < 1e-5 {
				return ta + (z-ra)*(tb-ta)/(rb-ra), false, higher, evals
			}
			continue
		}
		if tb == lim {
			return lim, true, higher, evals
		}
		// Not yet reached: extrapolate, at most 4x the last distance.
		step := tb - ta
		tn := tb + 4*step
		if rb > ra {
			tn = math.Min(math.Abs(tb+(z-rb)*(tb-ta)/(rb-ra)-tb), 4*math.Abs(step))*s + tb
		}
		if s*(tn-tb) < 1e-6 {
			tn = tb + s*math.Abs(step)
		}
		if s*(tn-lim) > 0 {
			tn = lim
		}
		ta, ra = tb, rb
		tb = tn
		rb = deviance(tb)
	}
	return tb, rb < z, higher, evals
}

// innerPreconditioner returns V diag(lambda^-1/2) of the per-gap
// information of the coordinates others in the optimiser's coordinates u,
// I_u = D I_w D / n with D = diag(dw/du) (central differences of the
// coordinate maps), eigenvalues floored at 1e-6 of the largest; nil when
// there is no information matrix.
func innerPreconditioner(info *mat.SymDense, ob *objective, kinds []models.ParamKind, x []float64, others []int) *mat.Dense {
	if info == nil || len(others) == 0 {
		return nil
	}
	u := ob.uOf(x)
	dw := make([]float64, len(x))
	for i := range x {
		const h = 1e-6
		up, dn := append([]float64(nil), u...), append([]float64(nil), u...)
		up[i] += h
		dn[i] -= h
		wu := workingOf(kinds, ob.xOf(up))
		wd := workingOf(kinds, ob.xOf(dn))
		dw[i] = (wu[i] - wd[i]) / (2 * h)
	}
	m := len(others)
	h := mat.NewSymDense(m, nil)
	for a, i := range others {
		for b := a; b < m; b++ {
			k := others[b]
			h.SetSym(a, b, dw[i]*info.At(i, k)*dw[k]/ob.n)
		}
	}
	return invSqrt(h)
}
