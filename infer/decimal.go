// Exact decimal-to-float64 conversion of the times in a records file.

package infer

import (
	"math"
	"math/bits"
)

// pow10 holds the powers of ten that are exact in float64.
var pow10 = [...]float64{1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10,
	1e11, 1e12, 1e13, 1e14, 1e15, 1e16, 1e17, 1e18, 1e19, 1e20, 1e21, 1e22}

// pow5 holds 5^0 .. 5^27, the powers of five below 2^64.
var pow5 = [...]uint64{1, 5, 25, 125, 625, 3125, 15625, 78125, 390625,
	1953125, 9765625, 48828125, 244140625, 1220703125, 6103515625,
	30517578125, 152587890625, 762939453125, 3814697265625, 19073486328125,
	95367431640625, 476837158203125, 2384185791015625, 11920928955078125,
	59604644775390625, 298023223876953125, 1490116119384765625,
	7450580596923828125}

// parseDecimal converts a plain decimal number ([+-]digits[.digits][e[+-]digits])
// exactly as strconv.ParseFloat does (correctly rounded, round half to
// even), for the common cases, and reports false for anything else, which
// the caller hands to strconv:
//
//   - digits forming an integer m < 2^53 and a decimal exponent within
//     +-22: Clinger's fast path (Proc. PLDI 1990). m and 10^|e| are exact
//     in float64, so one multiplication or division is correctly rounded.
//   - at most 19 digits, leading zeros included (so m < 2^64), and an
//     exponent in [-27, 0]
//     (the times an instrument or a float formatter writes, up to 17
//     digits): m / 10^k = (m / 5^k) 2^-k with 5^k < 2^64. The quotient of
//     m 2^s by 5^k is taken in 128-bit integer arithmetic with s chosen so
//     that it has 63 or 64 bits; its top 53 bits are rounded half to even
//     using the dropped bits and the remainder (a nonzero remainder breaks
//     a tie upwards), and the power of two is put in the exponent.
func parseDecimal(b []byte) (float64, bool) {
	i := 0
	neg := false
	if i < len(b) && (b[i] == '-' || b[i] == '+') {
		neg = b[i] == '-'
		i++
	}
	// Digits before and after the point, leading zeros included (they
	// only count towards the limit of 19 digits, which keeps m < 2^64).
	var m uint64
	s0 := i
	m, i = decimalDigits(b, i, m)
	nd := i - s0
	exp := 0
	if i < len(b) && b[i] == '.' {
		i++
		s1 := i
		m, i = decimalDigits(b, i, m)
		exp = s1 - i
		nd -= exp
	}
	if nd == 0 || nd > 19 {
		return 0, false
	}
	if i < len(b) {
		if b[i] != 'e' && b[i] != 'E' {
			return 0, false
		}
		i++
		eneg := false
		if i < len(b) && (b[i] == '-' || b[i] == '+') {
			eneg = b[i] == '-'
			i++
		}
		if i == len(b) {
			return 0, false
		}
		e := 0
		for ; i < len(b); i++ {
			c := b[i]
			if c < '0' || c > '9' || e > 1000 {
				return 0, false
			}
			e = e*10 + int(c-'0')
		}
		if eneg {
			e = -e
		}
		exp += e
	}
	var f float64
	switch {
	case m == 0:
	case exp == 0:
		f = float64(m) // Go converts integers with round half to even
	case m < 1<<53 && exp > 0 && exp <= 22:
		f = float64(m) * pow10[exp]
	case m < 1<<53 && exp < 0 && exp >= -22:
		f = float64(m) / pow10[-exp]
	case exp < 0 && exp >= -27:
		f = divPow10(m, -exp)
	default:
		return 0, false
	}
	if neg {
		f = -f
	}
	return f, true
}

// decimalDigits appends the decimal digits of b from position i to m
// (m = 10 m + digit; it wraps past 19 digits, which the caller rejects) and
// returns m and the position of the first non-digit. (Eight digits at a
// time by one 64-bit load was measured slower on times of 6-18 digits.)
func decimalDigits(b []byte, i int, m uint64) (uint64, int) {
	for ; i < len(b); i++ {
		c := b[i] - '0'
		if c > 9 {
			break
		}
		m = m*10 + uint64(c)
	}
	return m, i
}

// divPow10 returns m / 10^k correctly rounded (round half to even), for
// m > 0 and 0 < k <= 27; see parseDecimal.
func divPow10(m uint64, k int) float64 {
	d := pow5[k]
	s := 63 + bits.Len64(d) - bits.Len64(m) // 0 <= s <= 126
	var hi, lo uint64
	switch {
	case s >= 64:
		hi = m << (s - 64)
	case s > 0:
		hi, lo = m>>(64-s), m<<s
	default:
		lo = m
	}
	// hi < d because m 2^s < 2^(63 + len(d)) <= d 2^64, so the quotient
	// fits in 64 bits; it is at least 2^62.
	q, r := bits.Div64(hi, lo, d)
	drop := bits.Len64(q) - 53 // 10 or 11
	mant := q >> drop
	rest := q & (1<<drop - 1)
	half := uint64(1) << (drop - 1)
	if rest > half || (rest == half && (r != 0 || mant&1 == 1)) {
		mant++
	}
	// value = mant 2^e2 with mant in [2^52, 2^53].
	e2 := drop - s - k
	if mant == 1<<53 {
		mant >>= 1
		e2++
	}
	// Biased exponent of a normal number; here always in range
	// (10^-27 <= value < 2^64), so no subnormal or overflow case.
	return math.Float64frombits(uint64(e2+52+1023)<<52 | mant&(1<<52-1))
}

// sameDecimal reports whether two plain decimal numbers (as parseDecimal
// or strconv.ParseFloat accepted them) have the same value: "1.50" and
// "15e-1" do, "100000000000000000001" and "1e20" do not, although they
// round to the same float64.
func sameDecimal(a, b []byte) bool {
	na, da, ea := decimalKey(a)
	nb, db, eb := decimalKey(b)
	if len(da) == 0 || len(db) == 0 {
		return len(da) == len(db) // zero equals zero, whatever the sign
	}
	return na == nb && ea == eb && string(da) == string(db)
}

// decimalKey returns the sign, the significant digits (no leading or
// trailing zeros) and the exponent e of a decimal number, whose value is
// 0.d1d2... 10^e. The exponent saturates far beyond the float64 range.
func decimalKey(b []byte) (neg bool, digits []byte, exp int) {
	i := 0
	if i < len(b) && (b[i] == '+' || b[i] == '-') {
		neg = b[i] == '-'
		i++
	}
	point := -1 // digits before the point
	for ; i < len(b); i++ {
		c := b[i]
		if c == '.' && point < 0 {
			point = len(digits)
			continue
		}
		if c < '0' || c > '9' {
			break
		}
		digits = append(digits, c)
	}
	if point < 0 {
		point = len(digits)
	}
	for len(digits) > 0 && digits[0] == '0' {
		digits = digits[1:]
		point--
	}
	for len(digits) > 0 && digits[len(digits)-1] == '0' {
		digits = digits[:len(digits)-1]
	}
	exp = point
	if i < len(b) && (b[i] == 'e' || b[i] == 'E') {
		i++
		eneg := false
		if i < len(b) && (b[i] == '+' || b[i] == '-') {
			eneg = b[i] == '-'
			i++
		}
		e := 0
		for ; i < len(b) && b[i] >= '0' && b[i] <= '9'; i++ {
			if e < 1<<30 {
				e = e*10 + int(b[i]-'0')
			}
		}
		if eneg {
			e = -e
		}
		exp += e
	}
	return neg, digits, exp
}
