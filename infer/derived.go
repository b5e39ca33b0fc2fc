package infer

import (
	"math"
	"strings"

	"edgewise/likelihood"
	"edgewise/models"

	"gonum.org/v1/gonum/stat/distuv"
)

// Derived is a quantity of the fitted model with its delta-method
// interval.
type Derived struct {
	Name  string // e.g. "sigma", "F[+/-]", "J[0:A-B]", "affinity[0:A-B-C-A]", "gap[+]"
	Kind  models.QuantityKind
	Unit  string // "k_B/time", "k_BT", "1/time", "time" (time is the records' unit)
	Value float64
	// SE is the delta-method standard error sqrt(g^T Cov g), g the exact
	// gradient of the quantity with respect to the working coordinates;
	// +Inf when the quantity moves along a direction the data do not
	// determine (Determined false), NaN when it has no derivative.
	SE         float64
	Lo, Hi     float64 // Value -+ z SE at the level
	Determined bool
	Method     string
}

// DerivedOptions selects the derived quantities.
type DerivedOptions struct {
	Instrument likelihood.Instrument
	Level      float64 // default 0.95
}

// derivedKinds are the quantities reported, in this order.
var derivedKinds = []models.QuantityKind{
	models.KindEntropy, likelihood.KindEffective, likelihood.KindVisibleCurrent,
	models.KindAffinity, models.KindCurrent, likelihood.KindGapAfter,
}

// DerivedQuantities returns sigma, F and J of the visible edge(s), every
// cycle affinity of the cycle basis, every edge current and the mean gap
// after each label of the fitted model, with exact gradients
// (likelihood.ModelSensitivity) carried through the observed information
// by the delta method: Var q = g^T Cov g in the working coordinates (ln of
// a rate, logit of a detection probability), g_j = (dq/dx_j) dx_j/dw_j. A
// quantity whose gradient has a component along a flat direction of the
// information (relative size above 1e-6) is not determined by the data.
// Delta-method intervals are symmetric; for sigma and the affinities the
// profile intervals of the least-dissipation analysis are the better
// statement near zero.
func DerivedQuantities(res *FitResult, o DerivedOptions) ([]Derived, error) {
	if o.Level == 0 {
		o.Level = 0.95
	}
	s, dx, err := likelihood.ModelSensitivity(res.Model, res.X, o.Instrument)
	if err != nil {
		return nil, err
	}
	z := distuv.UnitNormal.Quantile(1 - (1-o.Level)/2)
	kinds := paramKinds(res.Model)
	var out []Derived
	for _, kind := range derivedKinds {
		for q, row := range s.Rows {
			if row.Kind != kind {
				continue
			}
			d := Derived{Name: row.Name, Kind: row.Kind, Unit: row.Unit, Value: s.Value[q], SE: math.NaN(), Lo: math.NaN(), Hi: math.NaN(), Method: "delta method, exact gradient"}
			g := make([]float64, len(res.X))
			finite := true
			for j := range g {
				g[j] = dx[q][j] * dxdw(kinds[j], res.X[j])
				if math.IsNaN(g[j]) || math.IsInf(g[j], 0) {
					finite = false
				}
			}
			switch {
			case !finite || math.IsNaN(d.Value) || math.IsInf(d.Value, 0):
				d.Method = "no derivative (infinite or undefined value)"
			case res.Ident == nil:
				d.Method = "no information matrix"
			default:
				d.Determined = true
				gn := 0.0
				for _, v := range g {
					gn += v * v
				}
				for _, f := range res.Ident.FlatVectors {
					dot := 0.0
					for j := range g {
						dot += g[j] * f[j]
					}
					if dot*dot > 1e-12*gn && gn > 0 {
						d.Determined = false
					}
				}
				if !d.Determined {
					d.SE, d.Lo, d.Hi = math.Inf(1), math.Inf(-1), math.Inf(1)
					d.Method = "not determined: it changes along a flat direction of ln L"
					break
				}
				v := 0.0
				for i := range g {
					for j := range g {
						v += g[i] * res.Ident.Cov.At(i, j) * g[j]
					}
				}
				d.SE = math.Sqrt(math.Max(v, 0))
				d.Lo, d.Hi = d.Value-z*d.SE, d.Value+z*d.SE
			}
			out = append(out, d)
		}
	}
	return out, nil
}

// IsVisible reports whether a derived quantity is a visible-edge one (F,
// J of the visible edge) whose name carries the label pair.
func (d Derived) IsVisible() bool { return strings.Contains(d.Name, "/") }
