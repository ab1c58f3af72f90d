// Package humanfmt writes numbers and durations the way a person writes
// them, for the lines of `forewarn run --demo` and the operator pages.
// Machine output (bus messages, the JSON API, `fit --format json`) keeps
// full precision and never goes through this package; a page that shows a
// rounded value puts the full one in a tooltip.
//
// # Values
//
// Value keeps as many significant digits as the number's own shortest
// decimal form has, at most MaxDigits (four), and scales a magnitude of a
// thousand or more by an SI prefix symbol, separated by a space:
//
//	9.030016e+11 → "903.0 G"    (the 0 is a significant digit of the value)
//	1930000      → "1.93 M"     (three digits are all the value has)
//	512          → "512"
//	0.0031       → "0.0031"
//	3.1e-05      → "3.1e-05"    (below 0.0001: exponent form)
//
// The prefixes are those of the SI for positive powers of a thousand:
// k 10³, M 10⁶, G 10⁹, T 10¹², P 10¹⁵, E 10¹⁸ (BIPM, The International
// System of Units, 9th edition, 2019, §3 Table 7); beyond 10²¹ the exponent
// form is used. The SI attaches a prefix to a unit symbol; forewarn's
// series carry no unit, so here the symbol stands for its factor alone, as
// is common practice on dashboards. Submultiple prefixes (m, µ, …) are not
// used: a small value is written as a decimal fraction. The space between
// the number and the symbol follows the SI's rule for a number and its
// unit (§5.4.3). Rounding is to nearest (a tie to even) on the decimal digits, so a value
// just under a thousand may become "1.000 k".
//
// # Durations
//
// Duration writes whole units without zero parts: "12h", "6h30m", "7d",
// "30d10h29m6s". A duration under two minutes other than one minute is
// written in seconds, "90s", and one under a second as Go prints it,
// "250ms". Days (d, 24 h) are used from two days up: "36h", "2d". These
// spellings are the ones forewarn's config accepts for durations (Go's
// h, m, s and the unit d). Offset is a Duration with its sign, "+1h", for
// times relative to a forecast's origin.
//
// All functions are pure and safe for concurrent use.
package humanfmt
