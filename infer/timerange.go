// The working range of times: what the reader refuses and what the
// statistics check before they compute.

package infer

import (
	"fmt"
	"math"

	"edgewise/likelihood"
)

// MaxTime and MinGap bound the times the statistics accept, in the records'
// time unit: every |time| (and end) at most MaxTime, every positive gap
// between consecutive events of a record (and to its end) at least MinGap.
// The statistics square and multiply times, gaps and rates (variances of
// counts over time windows, J^2/D, squared gaps), so times are kept to the
// square root of the float64 range, where those products stay finite and
// normal. A record outside it (a span that overflows, gaps that underflow
// or are subnormal) is refused with an error that suggests another time
// unit, never turned into an infinite rate or a zero-width interval.
const (
	MaxTime = 1e150
	MinGap  = 1e-150
)

// minNormal is the smallest positive normal float64, 2^-1022.
const minNormal = 0x1p-1022

// CheckTimes checks d for the statistics: equal numbers of times and
// labels, labels in the table, finite non-decreasing times, a known End
// not before the last event, and the working range of times (MaxTime,
// MinGap). Empty records are allowed (they add nothing). Errors name the
// record and the event (1-based). Summarize, FluctuationTest,
// EntropyBounds, ShapeTest and AgainstModel call it first.
func CheckTimes(d *likelihood.Data) error {
	if d == nil {
		return fmt.Errorf("no data")
	}
	for r := range d.Records {
		rec := &d.Records[r]
		if len(rec.Label) != len(rec.Time) {
			return fmt.Errorf("record %q has %d times and %d labels", rec.ID, len(rec.Time), len(rec.Label))
		}
		for k, t := range rec.Time {
			if int(rec.Label[k]) >= len(d.Labels) {
				return fmt.Errorf("record %q event %d: label index %d is not in the label table (%d labels)", rec.ID, k+1, rec.Label[k], len(d.Labels))
			}
			if math.IsNaN(t) || math.IsInf(t, 0) {
				return fmt.Errorf("record %q event %d: time %v is not finite", rec.ID, k+1, t)
			}
			if err := checkTime(t); err != "" {
				return fmt.Errorf("record %q event %d: time %v %s", rec.ID, k+1, t, err)
			}
			if k > 0 {
				g := t - rec.Time[k-1]
				if g < 0 {
					return fmt.Errorf("record %q event %d: time %v is before the previous event (%v)", rec.ID, k+1, t, rec.Time[k-1])
				}
				if err := checkGap(g); err != "" {
					return fmt.Errorf("record %q event %d: gap %v to the previous event %s", rec.ID, k+1, g, err)
				}
			}
		}
		if e := rec.End; !math.IsNaN(e) && len(rec.Time) > 0 {
			last := rec.Time[len(rec.Time)-1]
			if math.IsInf(e, 0) || e < last {
				return fmt.Errorf("record %q: end %v is before the last event (%v) or not finite", rec.ID, e, last)
			}
			if err := checkTime(e); err != "" {
				return fmt.Errorf("record %q: end %v %s", rec.ID, e, err)
			}
			if err := checkGap(e - last); err != "" {
				return fmt.Errorf("record %q: end %v: gap %v to the last event %s", rec.ID, e, e-last, err)
			}
		}
	}
	return nil
}

// checkTime returns why t is outside the working range, or "".
func checkTime(t float64) string {
	switch a := math.Abs(t); {
	case a > MaxTime:
		return fmt.Sprintf("is beyond %g in magnitude, the working range of times (products of times must stay finite): use a larger time unit or subtract an offset", MaxTime)
	case a > 0 && a < minNormal:
		return fmt.Sprintf("is subnormal (below %g): digits are lost; use a smaller time unit", minNormal)
	}
	return ""
}

// checkGap returns why a gap g >= 0 is outside the working range, or "".
func checkGap(g float64) string {
	if g > 0 && g < MinGap {
		return fmt.Sprintf("is below %g, the working range of gaps (rates would overflow): use a smaller time unit", MinGap)
	}
	return ""
}
