package humanfmt

import (
	"math"
	"math/rand/v2"
	"strconv"
	"strings"
	"testing"
	"time"
)

// The prefix symbols and factors: BIPM, The International System of Units
// (SI), 9th edition 2019, §3 Table 7. The digit rule (a value's own
// significant digits, at most four) is ours, common practice for
// dashboards.
func TestValue(t *testing.T) {
	for _, c := range []struct {
		x    float64
		want string
	}{
		{9.030016e11, "903.0 G"}, // seven digits, four kept; the 0 is significant
		{1.93e6, "1.93 M"},       // three digits, all kept
		{512, "512"},
		{0.0031, "0.0031"},
		{0, "0"},
		{math.Copysign(0, -1), "0"},
		{1, "1"},
		{-1, "-1"},
		{999, "999"},
		{999.9, "999.9"},
		{999.96, "1.000 k"}, // rounds up into the next prefix
		{1000, "1 k"},
		{1234.5, "1.234 k"}, // 1234.5 is exact in binary: a tie, rounded to even (strconv)
		{1234.6, "1.235 k"},
		{-1834, "-1.834 k"},
		{12.3456, "12.35"},
		{0.5, "0.5"},
		{0.30000000000000004, "0.3000"},
		{1e3, "1 k"}, {1e6, "1 M"}, {1e9, "1 G"}, {1e12, "1 T"}, {1e15, "1 P"}, {1e18, "1 E"},
		{2.5e15, "2.5 P"},
		{9e11, "900 G"},
		{0.9e12, "900 G"},
		{12e3, "12 k"},
		{123456789, "123.5 M"},
		{0.0001, "0.0001"},
		{0.00012345, "0.0001234"}, // 1.2345e-4 is stored just below …45: rounds down
		{3.1e-5, "3.1e-05"},
		{1.234e21, "1.234e+21"},
		{math.NaN(), "NaN"},
		{math.Inf(1), "+Inf"},
		{math.Inf(-1), "-Inf"},
	} {
		if got := Value(c.x); got != c.want {
			t.Errorf("Value(%v) = %q, want %q", c.x, got, c.want)
		}
	}
}

// Property (seeded): whatever the magnitude, the written value reads back
// within half a unit of its last digit, at most 5·10⁻⁴ relative, and has
// at most MaxDigits digits.
func TestValueReadsBack(t *testing.T) {
	rng := rand.New(rand.NewPCG(17, 4))
	factor := map[string]float64{"k": 1e3, "M": 1e6, "G": 1e9, "T": 1e12, "P": 1e15, "E": 1e18}
	for range 20000 {
		x := math.Pow(10, -4+22*rng.Float64())
		if rng.IntN(2) == 0 {
			x = -x
		}
		s := Value(x)
		num, f := s, 1.0
		if i := strings.IndexByte(s, ' '); i >= 0 {
			num, f = s[:i], factor[s[i+1:]]
			if f == 0 {
				t.Fatalf("Value(%g) = %q: unknown prefix", x, s)
			}
		}
		v, err := strconv.ParseFloat(num, 64)
		if err != nil {
			t.Fatalf("Value(%g) = %q: %v", x, s, err)
		}
		if rel := math.Abs(v*f-x) / math.Abs(x); rel > 5e-4 {
			t.Errorf("Value(%g) = %q reads back as %g (rel %.2g)", x, s, v*f, rel)
		}
		if d := len(strings.TrimLeft(strings.NewReplacer("-", "", ".", "").Replace(num), "0")); d > MaxDigits && !strings.Contains(num, "e") {
			t.Errorf("Value(%g) = %q: %d digits", x, s, d)
		}
	}
}

// The spellings are those of forewarn's config durations (Go's h, m, s and
// d for 24 h; common practice); the thresholds (seconds below two minutes,
// days from two days) are ours.
func TestDuration(t *testing.T) {
	for _, c := range []struct {
		d    time.Duration
		want string
	}{
		{12 * time.Hour, "12h"},
		{6*time.Hour + 30*time.Minute, "6h30m"},
		{90 * time.Second, "90s"},
		{119 * time.Second, "119s"},
		{time.Minute, "1m"},
		{2 * time.Minute, "2m"},
		{150 * time.Second, "2m30s"},
		{5 * time.Minute, "5m"},
		{time.Hour, "1h"},
		{time.Hour + 10*time.Minute, "1h10m"},
		{24 * time.Hour, "24h"},
		{36 * time.Hour, "36h"},
		{48 * time.Hour, "2d"},
		{7 * 24 * time.Hour, "7d"},
		{49*time.Hour + 5*time.Second, "2d1h5s"},
		{2629746 * time.Second, "30d10h29m6s"}, // an average Gregorian month
		{1500 * time.Millisecond, "1.5s"},
		{2*time.Minute + 500*time.Millisecond, "2m0.5s"},
		{time.Second, "1s"},
		{250 * time.Millisecond, "250ms"},
		{0, "0s"},
		{-90 * time.Minute, "-1h30m"},
		{time.Duration(math.MinInt64), time.Duration(math.MinInt64).String()},
	} {
		if got := Duration(c.d); got != c.want {
			t.Errorf("Duration(%v) = %q, want %q", c.d, got, c.want)
		}
	}
}

// Property (seeded): every Duration of whole seconds parses back, with the
// unit d read as 24h, to the same duration.
func TestDurationReadsBack(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 11))
	for range 20000 {
		d := time.Duration(rng.Int64N(90*24*3600)) * time.Second
		s := Duration(d)
		g := s
		var days time.Duration
		if i := strings.IndexByte(s, 'd'); i >= 0 {
			n, err := strconv.Atoi(s[:i])
			if err != nil {
				t.Fatalf("Duration(%v) = %q: %v", d, s, err)
			}
			days, g = time.Duration(n)*24*time.Hour, s[i+1:]
		}
		var rest time.Duration
		if g != "" {
			var err error
			if rest, err = time.ParseDuration(g); err != nil {
				t.Fatalf("Duration(%v) = %q: %v", d, s, err)
			}
		}
		if days+rest != d {
			t.Errorf("Duration(%v) = %q reads back as %v", d, s, days+rest)
		}
	}
}

func TestOffset(t *testing.T) {
	for _, c := range []struct {
		d    time.Duration
		want string
	}{{time.Hour, "+1h"}, {30 * time.Minute, "+30m"}, {0, "+0s"}, {-90 * time.Second, "-90s"}} {
		if got := Offset(c.d); got != c.want {
			t.Errorf("Offset(%v) = %q, want %q", c.d, got, c.want)
		}
	}
}
