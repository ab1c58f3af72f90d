package stream

import (
	"math"
	"slices"
	"strconv"
)

// A fast path for what a forecast message is mostly made of: numbers with
// a fixed count of significant digits. It writes exactly what strconv
// writes for the same input (the tests compare them byte for byte, and a
// fuzz target keeps doing so); it exists because the forecast encoder runs
// once per closed bucket for every series, and formatting its 144 numbers
// the general way was most of the encoder's time.

// pointDigits is the count of significant digits of the numbers in a
// forecast's points. Twelve keep every value within 5e-12 relative of the
// float64 it stands for, far below any forecast's uncertainty, and make
// the messages about a seventh shorter than the shortest round-trip form.
const pointDigits = 12

// appendG12 appends v as strconv.AppendFloat(dst, v, 'g', 12, 64) does:
// twelve significant digits, rounded to nearest with ties to even, trailing
// zeros removed, and the exponent form when the decimal exponent is below
// −4 or at least 12. v must be finite.
//
// For 1e-11 ≤ |v| < 1e33 it scales |v| by an exact power of ten (10^0 …
// 10^22) so that twelve digits sit before the point, and decides the
// rounding from the exact error of that one multiplication or division:
// math.FMA gives the residual of a product exactly, and that of a correctly
// rounded quotient too (the remainder a − q·s of a correctly rounded
// quotient is a float64). Outside that range it calls strconv.
func appendG12(dst []byte, v float64) []byte {
	a := math.Abs(v)
	if !(a >= 1e-11 && a < 1e33) {
		return strconv.AppendFloat(dst, v, 'g', pointDigits, 64)
	}
	e10 := decimalExponent(a)
	var x, res float64 // x: the scaled value as rounded; res: the sign of the true value − x
	if e10 <= 11 {
		s := pow10At(11 - e10) // 10^0 … 10^22: exact
		x = a * s
		res = math.FMA(a, s, -x)
	} else {
		s := pow10At(e10 - 11)
		x = a / s
		res = math.FMA(-x, s, a)
	}
	m := uint64(x) // x is in [1e11, 1e12]: truncation is floor
	fl := float64(m)
	// d is exact, and when it is not zero it is at least one unit in the
	// last place of x, more than the true value's distance from x.
	if d := (x - fl) - 0.5; d > 0 || (d == 0 && (res > 0 || (res == 0 && m&1 == 1))) {
		m++
	}
	if m >= 1e12 { // rounded up to the next power of ten
		m /= 10
		e10++
	}
	// Twelve digits as three groups of four, two at a time; the groups'
	// divisions do not wait on each other. The array is longer than the
	// digits so that the output can take them in whole 16-byte moves.
	var digits [32]byte
	g0, g1, g2 := uint32(m/1e8), uint32(m/1e4%1e4), uint32(m%1e4)
	putPair(digits[0:2], g0/100)
	putPair(digits[2:4], g0%100)
	putPair(digits[4:6], g1/100)
	putPair(digits[6:8], g1%100)
	putPair(digits[8:10], g2/100)
	putPair(digits[10:12], g2%100)
	nd := pointDigits
	for nd > 1 && digits[nd-1] == '0' {
		nd--
	}
	// Room for the longest form: sign, 0.0000 or 12 digits, point, e±dd.
	n := len(dst)
	dst = slices.Grow(dst, 40)[:n+40]
	out := dst[n:]
	k := 0
	if v < 0 {
		out[0] = '-'
		k = 1
	}
	switch {
	case e10 < -4 || e10 >= pointDigits: // d.ddde±XX
		out[k] = digits[0]
		k++
		if nd > 1 {
			out[k] = '.'
			*(*[16]byte)(out[k+1:]) = *(*[16]byte)(digits[1:])
			k += nd
		}
		out[k] = 'e'
		out[k+1] = '+'
		x := e10
		if x < 0 {
			out[k+1] = '-'
			x = -x
		}
		putPair(out[k+2:k+4], uint32(x)) // |e10| ≤ 33 here
		k += 4
	case e10 < 0: // 0.000ddd
		out[k], out[k+1], out[k+2], out[k+3], out[k+4] = '0', '.', '0', '0', '0'
		k += 1 - e10 // "0." and −e10−1 zeros
		*(*[16]byte)(out[k:]) = *(*[16]byte)(digits[:])
		k += nd
	case nd <= e10+1: // an integer: ddd000
		*(*[16]byte)(out[k:]) = *(*[16]byte)(digits[:])
		k += e10 + 1 // digits past nd are the zeros of digits[nd:12]
	default: // ddd.ddd
		ip := e10 + 1
		*(*[16]byte)(out[k:]) = *(*[16]byte)(digits[:])
		out[k+ip] = '.'
		*(*[16]byte)(out[k+ip+1:]) = *(*[16]byte)(digits[ip:])
		k += nd + 1
	}
	return dst[:n+k]
}

func putPair(b []byte, v uint32) {
	b[0], b[1] = digitPairs[2*v], digitPairs[2*v+1]
}

// digitPairs is "00" "01" … "99".
const digitPairs = "00010203040506070809101112131415161718192021222324252627282930313233343536373839" +
	"40414243444546474849505152535455565758596061626364656667686970717273747576777879" +
	"8081828384858687888990919293949596979899"

// decimalExponent returns floor(log10 a) for 1e-11 ≤ a < 1e33, or one more
// than that when a is the float64 just below a power of ten that rounds
// down to it (rounding to twelve digits then carries into that power, so
// the result is the same). It never returns less than floor(log10 a).
func decimalExponent(a float64) int {
	// a = f·2^e2 with 1 ≤ f < 2, so log10 a lies in [e2·log10 2,
	// (e2+1)·log10 2), which spans less than one: floor(log10 a) is
	// floor(e2·log10 2) or one more. (e2·78913) >> 18 is floor(e2·log10 2)
	// for |e2| < 1650 (common practice in shortest-float printers).
	e2 := int(math.Float64bits(a)>>52&0x7ff) - 1023
	e := (e2 * 78913) >> 18
	if a >= pow10At(e+1) {
		e++
	}
	return e
}

// pow10At returns the float64 nearest to 10^k for −12 ≤ k ≤ 34 (each
// entry is a constant, which Go rounds to nearest): exact for 0 ≤ k ≤ 22.
// When that float64 is above 10^k it is the least float64 at or above it,
// so decimalExponent never returns too small an exponent.
func pow10At(k int) float64 { return pow10Near[k+12] }

var pow10Near = [...]float64{1e-12, 1e-11, 1e-10, 1e-9, 1e-8, 1e-7, 1e-6, 1e-5,
	1e-4, 1e-3, 1e-2, 1e-1, 1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9,
	1e10, 1e11, 1e12, 1e13, 1e14, 1e15, 1e16, 1e17, 1e18, 1e19, 1e20, 1e21,
	1e22, 1e23, 1e24, 1e25, 1e26, 1e27, 1e28, 1e29, 1e30, 1e31, 1e32, 1e33, 1e34}
