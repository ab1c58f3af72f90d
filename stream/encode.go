package stream

import (
	"math"
	"strconv"
	"time"
	"unicode/utf8"
	"unsafe"

	"forewarn/engine/series"
)

// AppendForecast appends the JSON forecast message of CONTRACT.md §2 for f,
// issued at the wall time issued, to dst and returns the extended buffer:
//
//	{"topic":…,"issued":…,"origin":…,"step_seconds":…,"last_value":…,"kind":…,
//	 "model":{"label":…,"transform":…,"fitted_at":…,"observations_used":…,"aicc":…,"bands":"calibrated"},
//	 "last_bucket":{"taken_as":"outlier","z":…},
//	 "points":[{"h":…,"time":…,"mean":…,"median":…,
//	            "bands":[{"level":50,"low":…,"high":…,"scale":…},{"level":90,"low":…,"high":…,"scale":…}]},…]}
//
// Keys come in this order, without white space. Times are RFC 3339 in UTC:
// whole seconds without a fraction, otherwise with as many fractional digits
// as the nanoseconds need (time.RFC3339Nano). A zero FittedAt is null.
// label is f.Model.Spec, the model's label as package arima renders it.
// last_value and aicc are the shortest decimal that reads back as the same
// float64 (strconv 'g', -1). The points' numbers (mean, median, low, high)
// carry 12 significant digits (strconv 'g', 12: within 5e-12 relative of
// the float64, far inside any forecast's uncertainty), with one exception
// that keeps the message's order against last_value as the floats have
// it: a number equal to last_value, and one whose rounded form would read
// back on the other side of last_value, is written as last_value is (so a
// counter's clamped bounds read back as exactly its last value). A
// non-finite number, and a Bound with OK false, is null.
//
// Each point has one band per level of f.Levels, in ascending order of
// level whatever the order of f.Levels; a level is in plain decimal (80,
// 97.5). Lower[i] and Upper[i] are the low and high of f.Levels[i];
// missing entries are null.
//
// The model's "bands" is "calibrated" when f.Calibrated (CONTRACT §4: the
// bands come from the series' calibrator), else "model" (the model's own
// bands). A band's "scale" is its half-width on the model scale divided by
// the model's own, Point.Scale (6 significant digits): above 1 the
// calibration widened the band, below 1 it narrowed it; the model's own
// bands have scale 1. A non-finite Scale is null; a missing one is 1 for
// the model's own bands and null for calibrated ones.
//
// "last_bucket" is present only when the series' online check took the
// origin's bucket as an additive outlier ("outlier") or a level shift
// ("level_shift", series.Forecast.Taken), with its standardised one-step
// error z (6 significant digits; an addition to CONTRACT §2).
//
// With a dst of enough capacity AppendForecast does not allocate.
func AppendForecast(dst []byte, f *series.Forecast, issued time.Time) []byte {
	dst = append(dst, `{"topic":`...)
	dst = appendString(dst, f.Topic)
	dst = append(dst, `,"issued":`...)
	dst = appendTime(dst, issued)
	dst = append(dst, `,"origin":`...)
	dst = appendTime(dst, f.Origin)
	dst = append(dst, `,"step_seconds":`...)
	dst = strconv.AppendInt(dst, f.StepSeconds, 10)
	dst = append(dst, `,"last_value":`...)
	pf := pointFormat{last: f.LastValue, at: len(dst)}
	dst = appendFloat(dst, f.LastValue)
	pf.end = len(dst)
	dst = append(dst, `,"kind":`...)
	dst = appendString(dst, f.Kind)
	dst = append(dst, `,"model":{"label":`...)
	dst = appendString(dst, f.Model.Spec)
	dst = append(dst, `,"transform":`...)
	dst = appendString(dst, f.Model.Transform)
	dst = append(dst, `,"fitted_at":`...)
	if f.Model.FittedAt.IsZero() {
		dst = append(dst, "null"...)
	} else {
		dst = appendTime(dst, f.Model.FittedAt)
	}
	dst = append(dst, `,"observations_used":`...)
	dst = strconv.AppendInt(dst, int64(f.Model.NObs), 10)
	dst = append(dst, `,"aicc":`...)
	dst = appendFloat(dst, f.Model.AICc)
	if f.Calibrated {
		dst = append(dst, `,"bands":"calibrated"}`...)
	} else {
		dst = append(dst, `,"bands":"model"}`...)
	}
	if f.Taken != "" {
		dst = append(dst, `,"last_bucket":{"taken_as":`...)
		dst = appendString(dst, f.Taken)
		dst = append(dst, `,"z":`...)
		dst = strconv.AppendFloat(dst, f.TakenZ, 'g', 6, 64)
		dst = append(dst, '}')
	}
	dst = append(dst, `,"points":[`...)
	pf.calibrated = f.Calibrated
	ascending := levelsAscending(f.Levels)
	var days dayCache
	for i := range f.Points {
		pt := &f.Points[i]
		if i > 0 {
			dst = append(dst, ',')
		}
		dst = append(dst, `{"h":`...)
		dst = appendInt(dst, pt.H)
		dst = append(dst, `,"time":`...)
		dst = days.appendTime(dst, pt.Time)
		dst = append(dst, `,"mean":`...)
		dst = pf.append(dst, pt.Mean)
		dst = append(dst, `,"median":`...)
		dst = pf.append(dst, pt.Median)
		dst = append(dst, `,"bands":[`...)
		if ascending {
			for j := range f.Levels {
				dst = pf.appendBand(dst, j, j, f.Levels, pt)
			}
		} else {
			dst = pf.appendBandsSorted(dst, f.Levels, pt)
		}
		dst = append(dst, "]}"...)
	}
	return append(dst, "]}"...)
}

// pointFormat writes the numbers of a forecast's points (see
// AppendForecast). dst[at:end] is last_value as written.
type pointFormat struct {
	last       float64
	at, end    int
	calibrated bool
}

func (p *pointFormat) append(dst []byte, v float64) []byte {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return append(dst, "null"...)
	}
	if v == p.last { // a counter's clamped bound, typically
		return append(dst, dst[p.at:p.end]...)
	}
	n := len(dst)
	dst = appendG12(dst, v)
	// Rounding to 12 digits moves v by at most 5e-12 of itself, so it can
	// only cross last_value from this close.
	if math.Abs(v-p.last) <= 1e-11*math.Abs(p.last) {
		r, err := strconv.ParseFloat(unsafe.String(&dst[n], len(dst)-n), 64)
		if err != nil || (v > p.last && r < p.last) || (v < p.last && r > p.last) {
			dst = append(dst[:n], dst[p.at:p.end]...)
		}
	}
	return dst
}

// appendBand writes the k-th band of a point (counting from 0): that of
// levels[j] at pt.
func (p *pointFormat) appendBand(dst []byte, k, j int, levels []float64, pt *series.Point) []byte {
	if k > 0 {
		dst = append(dst, ',')
	}
	dst = append(dst, `{"level":`...)
	dst = appendLevel(dst, levels[j])
	dst = append(dst, `,"low":`...)
	dst = p.appendBound(dst, pt.Lower, j)
	dst = append(dst, `,"high":`...)
	dst = p.appendBound(dst, pt.Upper, j)
	dst = append(dst, `,"scale":`...)
	switch {
	case j < len(pt.Scale):
		if v := pt.Scale[j]; math.IsNaN(v) || math.IsInf(v, 0) {
			dst = append(dst, "null"...)
		} else {
			dst = strconv.AppendFloat(dst, v, 'g', 6, 64)
		}
	case !p.calibrated:
		dst = append(dst, '1')
	default:
		dst = append(dst, "null"...)
	}
	return append(dst, '}')
}

func (p *pointFormat) appendBound(dst []byte, b []series.Bound, j int) []byte {
	if j < len(b) && b[j].OK {
		return p.append(dst, b[j].Value)
	}
	return append(dst, "null"...)
}

// appendBandsSorted writes the bands of levels that are out of order in
// ascending order: each round picks the first level, in levelBefore's
// order, after the one written last. Levels are few (config allows ten),
// so the quadratic search costs little, and it does not allocate.
func (p *pointFormat) appendBandsSorted(dst []byte, levels []float64, pt *series.Point) []byte {
	last := -1
	for k := range levels {
		next := -1
		for j, l := range levels {
			if last >= 0 && !levelBefore(levels[last], last, l, j) {
				continue
			}
			if next < 0 || levelBefore(l, j, levels[next], next) {
				next = j
			}
		}
		dst = p.appendBand(dst, k, next, levels, pt)
		last = next
	}
	return dst
}

// levelBefore is the strict total order of the bands: level a at index i
// comes before level b at index j if a < b, or if they are equal and i <
// j. A NaN level (written as null) comes after every number.
func levelBefore(a float64, i int, b float64, j int) bool {
	if an, bn := a != a, b != b; an != bn {
		return bn
	} else if !an && a != b {
		return a < b
	}
	return i < j
}

// levelsAscending reports whether levels are in ascending order, with no
// NaN.
func levelsAscending(levels []float64) bool {
	for i := 1; i < len(levels); i++ {
		if !(levels[i-1] <= levels[i]) {
			return false
		}
	}
	return len(levels) == 0 || levels[0] == levels[0]
}

// AppendAlert appends the JSON alert message of CONTRACT.md §2 for e,
// issued at the wall time issued:
//
//	{"topic":…,"rule":…,"state":"raised"|"cleared","direction":…,"threshold":…,
//	 "probability":…,"within_seconds":…,"eta":…|null,"issued":…,"origin":…}
//
// with the number and time conventions of AppendForecast. It does not
// allocate with a dst of enough capacity.
func AppendAlert(dst []byte, e *series.AlertEvent, issued time.Time) []byte {
	dst = append(dst, `{"topic":`...)
	dst = appendString(dst, e.Topic)
	dst = append(dst, `,"rule":`...)
	dst = appendString(dst, e.Rule)
	if e.Raised {
		dst = append(dst, `,"state":"raised"`...)
	} else {
		dst = append(dst, `,"state":"cleared"`...)
	}
	dst = append(dst, `,"direction":`...)
	dst = appendString(dst, e.Direction)
	dst = append(dst, `,"threshold":`...)
	dst = appendFloat(dst, e.Threshold)
	dst = append(dst, `,"probability":`...)
	dst = appendFloat(dst, e.Probability)
	dst = append(dst, `,"within_seconds":`...)
	dst = strconv.AppendInt(dst, e.WithinSeconds, 10)
	dst = append(dst, `,"eta":`...)
	if e.HasETA {
		dst = appendTime(dst, e.ETA)
	} else {
		dst = append(dst, "null"...)
	}
	dst = append(dst, `,"issued":`...)
	dst = appendTime(dst, issued)
	dst = append(dst, `,"origin":`...)
	dst = appendTime(dst, e.Origin)
	return append(dst, '}')
}

// AppendReject appends the JSON reject message of CONTRACT.md §2:
//
//	{"subject":…,"topic":…,"code":…,"reason":…,"received":…}
//
// subject is the message's subject as received (any bytes; invalid UTF-8
// becomes U+FFFD), topic the topic read from it ("" when there is none).
func AppendReject(dst []byte, subject, topic, code, reason string, received time.Time) []byte {
	dst = append(dst, `{"subject":`...)
	dst = appendString(dst, subject)
	dst = append(dst, `,"topic":`...)
	dst = appendString(dst, topic)
	dst = append(dst, `,"code":`...)
	dst = appendString(dst, code)
	dst = append(dst, `,"reason":`...)
	dst = appendString(dst, reason)
	dst = append(dst, `,"received":`...)
	dst = appendTime(dst, received)
	return append(dst, '}')
}

// AppendError appends the query error reply {"error":msg}.
func AppendError(dst []byte, msg string) []byte {
	dst = append(dst, `{"error":`...)
	dst = appendString(dst, msg)
	return append(dst, '}')
}

// appendInt writes n in decimal; below 100, the common case of steps
// ahead and levels, without a call.
func appendInt(dst []byte, n int) []byte {
	switch {
	case n >= 0 && n < 10:
		return append(dst, byte('0'+n))
	case n >= 10 && n < 100:
		return append(dst, byte('0'+n/10), byte('0'+n%10))
	}
	return strconv.AppendInt(dst, int64(n), 10)
}

// appendLevel writes an interval level as a plain decimal number: 80,
// 97.5; a non-finite level is null.
func appendLevel(dst []byte, l float64) []byte {
	if math.IsNaN(l) || math.IsInf(l, 0) {
		return append(dst, "null"...)
	}
	if l == math.Trunc(l) && l >= 0 && l < 1e15 {
		return appendInt(dst, int(l)) // the common case, cheaper
	}
	return strconv.AppendFloat(dst, l, 'f', -1, 64)
}

// dayCache writes the points' times, which run through few days: a whole
// second on the day of the previous one reuses that day's
// "YYYY-MM-DDT" and writes only the time of day. The bytes are those of
// appendTime.
type dayCache struct {
	day  int64 // Unix day of date; valid when set
	set  bool
	date [11]byte
}

func (c *dayCache) appendTime(dst []byte, t time.Time) []byte {
	sec := t.Unix()
	day, tod := sec/86400, sec%86400
	if tod < 0 {
		day, tod = day-1, tod+86400
	}
	if t.Nanosecond() != 0 || !c.set || day != c.day {
		n := len(dst)
		dst = appendTime(dst, t)
		if t.Nanosecond() == 0 && len(dst)-n == len(`"2006-01-02T15:04:05Z"`) {
			copy(c.date[:], dst[n+1:])
			c.day, c.set = day, true
		}
		return dst
	}
	h, m, s := tod/3600, tod/60%60, tod%60
	dst = append(dst, '"')
	dst = append(dst, c.date[:]...)
	return append(dst, byte('0'+h/10), byte('0'+h%10), ':', byte('0'+m/10), byte('0'+m%10), ':',
		byte('0'+s/10), byte('0'+s%10), 'Z', '"')
}

func appendTime(dst []byte, t time.Time) []byte {
	dst = append(dst, '"')
	dst = t.UTC().AppendFormat(dst, time.RFC3339Nano)
	return append(dst, '"')
}

func appendFloat(dst []byte, v float64) []byte {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return append(dst, "null"...)
	}
	return strconv.AppendFloat(dst, v, 'g', -1, 64)
}

const hexDigits = "0123456789abcdef"

// appendString appends s as a JSON string. It escapes '"', '\\' and the
// control characters, and, as encoding/json does, '<', '>', '&', U+2028 and
// U+2029 so that the output is safe inside HTML and JavaScript; invalid
// UTF-8 becomes U+FFFD.
func appendString(dst []byte, s string) []byte {
	dst = append(dst, '"')
	start := 0
	for i := 0; i < len(s); {
		c := s[i]
		if c < utf8.RuneSelf {
			if c >= 0x20 && c != '"' && c != '\\' && c != '<' && c != '>' && c != '&' {
				i++
				continue
			}
			dst = append(dst, s[start:i]...)
			switch c {
			case '"', '\\':
				dst = append(dst, '\\', c)
			case '\n':
				dst = append(dst, '\\', 'n')
			case '\r':
				dst = append(dst, '\\', 'r')
			case '\t':
				dst = append(dst, '\\', 't')
			default:
				dst = append(dst, '\\', 'u', '0', '0', hexDigits[c>>4], hexDigits[c&0xf])
			}
			i++
			start = i
			continue
		}
		r, size := utf8.DecodeRuneInString(s[i:])
		if r == utf8.RuneError && size == 1 {
			dst = append(dst, s[start:i]...)
			dst = append(dst, `\ufffd`...)
			i += size
			start = i
			continue
		}
		if r == '\u2028' || r == '\u2029' {
			dst = append(dst, s[start:i]...)
			dst = append(dst, '\\', 'u', '2', '0', '2', hexDigits[r&0xf])
			i += size
			start = i
			continue
		}
		i += size
	}
	dst = append(dst, s[start:]...)
	return append(dst, '"')
}
