package output

import (
	"math"
	"strconv"
	"strings"
)

// Kind says what a cell holds.
type Kind uint8

// The kinds of cell. Their names (Kind.String) are the "kind" field of the
// JSON and CSV formats.
const (
	KindText      Kind = iota // words
	KindNumber                // a real number
	KindCount                 // an integer count
	KindP                     // a p-value in [0, 1]
	KindFixed                 // a number shown to a fixed number of decimals
	KindInterval              // a confidence interval
	KindUndefined             // no value, with a reason
	KindZero                  // exactly zero by construction
	KindEmpty                 // nothing (a cell that does not apply)
)

var kindNames = [...]string{"text", "number", "count", "p", "fixed", "interval", "undefined", "zero", "empty"}

// String returns the kind's machine name.
func (k Kind) String() string { return kindNames[k] }

// Cell is one typed value of a table. Build cells with the constructors
// (Num, Count, P, Fixed, Interval, Text, Undefined, Zero, ZeroIf, Empty);
// the zero Cell is an empty text.
type Cell struct {
	Kind     Kind
	Value    float64 // number, count, p, fixed; 0 for zero
	Lo, Hi   float64 // interval bounds
	Level    float64 // interval level, e.g. 0.95
	Method   string  // interval method
	Decimals int     // fixed: decimals shown to people
	Text     string  // text; the reason of an undefined value
	Note     string  // optional footnote
}

// Num is a real number. NaN becomes Undefined("undefined"); infinities
// stay numbers (JSON null with reason "+inf" or "-inf", CSV inf or -inf).
func Num(x float64) Cell {
	if math.IsNaN(x) {
		return Undefined("undefined")
	}
	return Cell{Kind: KindNumber, Value: x}
}

// Count is an integer count.
func Count(n int) Cell { return Cell{Kind: KindCount, Value: float64(n)} }

// P is a p-value; NaN becomes Undefined("not tested").
func P(p float64) Cell {
	if math.IsNaN(p) {
		return Undefined("not tested")
	}
	return Cell{Kind: KindP, Value: p}
}

// Fixed is a number shown to people with a fixed number of decimals, e.g.
// a log-likelihood to 0.01 (decimals 2); machine formats carry every digit.
func Fixed(x float64, decimals int) Cell {
	if math.IsNaN(x) {
		return Undefined("undefined")
	}
	return Cell{Kind: KindFixed, Value: x, Decimals: decimals}
}

// Interval is a confidence interval [lo, hi] at the given level, made by
// method. Both bounds NaN make it Undefined("no interval").
func Interval(lo, hi, level float64, method string) Cell {
	if math.IsNaN(lo) && math.IsNaN(hi) {
		return Undefined("no interval")
	}
	return Cell{Kind: KindInterval, Lo: lo, Hi: hi, Level: level, Method: method}
}

// Text is a cell of words.
func Text(s string) Cell { return Cell{Kind: KindText, Text: s} }

// Undefined is a value that does not exist, with the reason.
func Undefined(reason string) Cell { return Cell{Kind: KindUndefined, Text: reason} }

// Zero is a value that is exactly zero by construction.
func Zero() Cell { return Cell{Kind: KindZero} }

// ZeroIf returns Zero() when the quantity is zero by construction (zero
// true), so that a round-off residue such as -3.9e-17 prints as 0, and
// Num(x) otherwise.
func ZeroIf(x float64, zero bool) Cell {
	if zero {
		return Zero()
	}
	return Num(x)
}

// Empty is a cell that does not apply to its row (a blank for people, no
// field for machines).
func Empty() Cell { return Cell{Kind: KindEmpty} }

// WithNote returns c with a footnote, lettered under the table.
func (c Cell) WithNote(note string) Cell {
	c.Note = note
	return c
}

// formatG formats x with prec significant digits ('g'), +inf, -inf; -0
// prints as 0.
func formatG(x float64, prec int) string {
	switch {
	case math.IsInf(x, 1):
		return "+inf"
	case math.IsInf(x, -1):
		return "-inf"
	case math.IsNaN(x):
		return "n/a"
	}
	return strconv.FormatFloat(x+0, 'g', prec, 64)
}

// human returns the text people see for c, without its footnote marker.
func (c Cell) human() string {
	switch c.Kind {
	case KindNumber:
		return formatG(c.Value, 5)
	case KindCount:
		return strconv.FormatFloat(c.Value, 'f', 0, 64)
	case KindP:
		if c.Value < 1e-300 && c.Value >= 0 {
			return "< 1e-300"
		}
		return formatG(c.Value, 3)
	case KindFixed:
		if math.IsInf(c.Value, 0) {
			return formatG(c.Value, 5)
		}
		return strconv.FormatFloat(c.Value+0, 'f', c.Decimals, 64)
	case KindInterval:
		return "[" + formatG(c.Lo, 5) + ", " + formatG(c.Hi, 5) + "]"
	case KindUndefined:
		return "n/a"
	case KindZero:
		return "0"
	case KindEmpty:
		return ""
	}
	return c.Text
}

// numeric reports whether c is shown as a number (right-aligned).
func (c Cell) numeric() bool {
	switch c.Kind {
	case KindNumber, KindCount, KindP, KindFixed, KindZero, KindInterval, KindUndefined:
		return true
	}
	return false
}

// machine formats x for CSV: the shortest decimal that round-trips a
// float64, inf, -inf or nan.
func machine(x float64) string {
	switch {
	case math.IsInf(x, 1):
		return "inf"
	case math.IsInf(x, -1):
		return "-inf"
	case math.IsNaN(x):
		return "nan"
	}
	return strconv.FormatFloat(x, 'g', -1, 64)
}

// oneLine replaces line breaks by spaces.
func oneLine(s string) string {
	return strings.NewReplacer("\r\n", " ", "\n", " ", "\r", " ").Replace(s)
}
