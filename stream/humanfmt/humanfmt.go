package humanfmt

import (
	"math"
	"strconv"
	"strings"
	"time"
)

// MaxDigits is the most significant digits Value writes.
const MaxDigits = 4

// prefixes are the SI prefix symbols for 10^(3(i+1)).
const prefixes = "kMGTPE"

// Value writes x with its own significant digits, at most MaxDigits, and
// an SI prefix symbol when |x| ≥ 1000 after rounding (package doc).
// NaN is "NaN", infinities "+Inf" and "-Inf".
func Value(x float64) string {
	switch {
	case math.IsNaN(x):
		return "NaN"
	case math.IsInf(x, 1):
		return "+Inf"
	case math.IsInf(x, -1):
		return "-Inf"
	case x == 0:
		return "0"
	}
	sig := min(MaxDigits, digits(x))
	s := strconv.FormatFloat(x, 'e', sig-1, 64) // rounded: d.ddde±XX
	exp, _ := strconv.Atoi(s[strings.IndexByte(s, 'e')+1:])
	r, _ := strconv.ParseFloat(s, 64)
	switch {
	case exp >= 3:
		g := exp / 3
		if g > len(prefixes) {
			return s
		}
		m := r / math.Pow10(3*g)
		return strconv.FormatFloat(m, 'f', max(0, sig-1-(exp-3*g)), 64) + " " + prefixes[g-1:g]
	case exp >= -4:
		return strconv.FormatFloat(r, 'f', max(0, sig-1-exp), 64)
	default:
		return s
	}
}

// digits is the count of significant digits of x's shortest decimal
// form (the one strconv round-trips): 2 for 0.0031, 7 for 9.030016e11.
func digits(x float64) int {
	s := strconv.FormatFloat(math.Abs(x), 'e', -1, 64)
	mant := s[:strings.IndexByte(s, 'e')]
	return len(strings.Replace(mant, ".", "", 1))
}

// Duration writes d in whole units without zero parts (package doc):
// "12h", "6h30m", "90s", "2d".
func Duration(d time.Duration) string {
	switch {
	case d == math.MinInt64:
		return d.String()
	case d < 0:
		return "-" + Duration(-d)
	case d == 0:
		return "0s"
	case d < time.Second:
		return d.String()
	case d < 2*time.Minute && d != time.Minute:
		return seconds(d)
	}
	var b strings.Builder
	part := func(n time.Duration, unit string) {
		if n > 0 {
			b.WriteString(strconv.FormatInt(int64(n), 10))
			b.WriteString(unit)
		}
	}
	const day = 24 * time.Hour
	if d >= 2*day {
		part(d/day, "d")
		d %= day
	}
	part(d/time.Hour, "h")
	d %= time.Hour
	part(d/time.Minute, "m")
	d %= time.Minute
	if d > 0 {
		b.WriteString(seconds(d))
	}
	return b.String()
}

// seconds writes d in seconds with the fraction it has: "90s", "1.5s".
func seconds(d time.Duration) string {
	whole, frac := d/time.Second, d%time.Second
	s := strconv.FormatInt(int64(whole), 10)
	if frac > 0 {
		f := strconv.FormatInt(int64(frac)+int64(time.Second), 10)[1:] // 9 digits, leading zeros kept
		s += "." + strings.TrimRight(f, "0")
	}
	return s + "s"
}

// Offset is Duration with its sign, for a time relative to an origin:
// "+1h", "+30m", "-90s", "+0s".
func Offset(d time.Duration) string {
	if d < 0 {
		return Duration(d)
	}
	return "+" + Duration(d)
}
