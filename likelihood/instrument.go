package likelihood

import (
	"fmt"
	"math"
)

// Instrument is the part of the detection process that is not a property of
// a label: what happens to time. (Per-label detection probabilities live in
// models.Label.Detect and reach the kernels through the network.)
type Instrument struct {
	// DeadTime delta >= 0 (time units): after each detected event the
	// instrument is blind for delta, and events inside it are lost. The
	// per-event factor becomes exp(L delta) exp(D0 (tau - delta)) D_l for
	// a gap tau > delta; a gap tau < delta is impossible.
	DeadTime float64
	// Frame > 0 (time units) when timestamps are frame-limited: each
	// timestamp is the start of the frame the event fell in, so a gap is
	// known only to lie in a frame interval, and the likelihood integrates
	// exp(D0 t) over that interval exactly. A reported gap g is read as
	// "the true gap lies in [max(g - Frame/2, 0), g + Frame/2]" (see the
	// package documentation for why, and for the approximation this
	// makes). Zero means exact timestamps.
	Frame float64
}

// Validate checks that the instrument's times are finite and non-negative.
func (in Instrument) Validate() error {
	if math.IsNaN(in.DeadTime) || math.IsInf(in.DeadTime, 0) || in.DeadTime < 0 {
		return fmt.Errorf("likelihood: dead time %v: want a finite value >= 0", in.DeadTime)
	}
	if math.IsNaN(in.Frame) || math.IsInf(in.Frame, 0) || in.Frame < 0 {
		return fmt.Errorf("likelihood: frame length %v: want a finite value >= 0", in.Frame)
	}
	return nil
}
