package infer

import (
	"fmt"

	"edgewise/likelihood"
	"edgewise/models"
)

// Absolute goodness of fit of a model's account of the gaps.
//
// Each gap's probability integral transform under the model, given
// everything recorded before it and the label that ends it
// (likelihood.Evaluator.PIT), is uniform on (0, 1) and independent of the
// others when the model is true. GapGoodness tests the transforms for
// uniformity with the one-sample Kolmogorov-Smirnov and Anderson-Darling
// tests, so that a model can be ruled out on its own, even when it is the
// best of a bad set of candidates. The transform conditions on the labels:
// it tests the timing given the sequence, not the sequence itself (the
// label tests are the Markov-order test and the model's P(l'|l)).
//
// Cautions:
//
//   - Estimated parameters. With parameters fitted to the same records the
//     transforms are closer to uniform than under the true parameters, so
//     the p-values are too large: the test is conservative and rejects less
//     often than its nominal level (Durbin, Ann. Stat. 1, 279 (1973), the
//     estimated-parameters effect on empirical-distribution tests; from
//     memory). The effect is large: a 3-state ring fitted to 2000 gaps of
//     a 3-state ring was rejected at 5% in none of 200 replicates by
//     either test (TestGoodnessDurbinLong). A rejection still rules the
//     model out; a p-value that is not small says little. For a calibrated
//     p-value use a
//     parametric bootstrap: simulate records like the data (same number and
//     lengths, same instrument) from the fitted model, refit, recompute the
//     statistic, and take p = (1 + #{T* >= T}) / (B + 1).
//   - Power. The transforms see misfit of the gap laws given the labels.
//     They hardly see schemes that differ mainly in the label sequence or
//     in a subtle shape difference between the ++ and -- gaps: records of a
//     4-state two-cycle network (5 10^4 gaps) under a fitted 4-state ring
//     gave KS p 0.87 and AD p 0.81 although the likelihood ratio was e^36
//     (TestGoodnessLowPowerLong). The test complements the likelihood
//     ranking, the shape test and the Markov-order test; it does not
//     replace them.
//   - Many gaps. With 10^5 or more gaps any model short of the truth is
//     rejected; the statistic's size, not only its p-value, says how far
//     the model is off.
//   - Frame-limited timestamps. The transform is randomised (a seeded draw
//     inside each frame's range of the distribution function), uniform only
//     up to the likelihood's box approximation of a frame.
//   - A model consistent with the data is not thereby true.

// Goodness is the outcome of the uniformity tests of the gaps' transforms.
type Goodness struct {
	UniformTest      // KS and AD statistics and p-values; N is the number of gaps
	Randomised  bool // frame-limited timestamps: randomised transforms
	Seed        uint64
}

// GapGoodness computes the transform of every gap of d under net, seen
// through the instrument and start of opt, and tests them for uniformity.
// seed fixes the randomisation of frame-limited timestamps (unused
// otherwise). For a fitted model pass m.Network(xhat), and read the
// package notes above on estimated parameters.
func GapGoodness(net *models.Network, d *likelihood.Data, opt likelihood.Options, seed uint64) (*Goodness, error) {
	ev, err := likelihood.NewNetworkEvaluator(net, opt)
	if err != nil {
		return nil, err
	}
	p, err := ev.PIT(d, seed)
	if err != nil {
		return nil, err
	}
	if len(p.U) < 2 {
		return nil, fmt.Errorf("goodness of fit: %d gaps; at least 2 are needed", len(p.U))
	}
	t, err := UniformityTest(p.U)
	if err != nil {
		return nil, err
	}
	return &Goodness{UniformTest: t, Randomised: p.Randomised, Seed: seed}, nil
}
