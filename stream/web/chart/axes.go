package chart

import (
	"math"
	"strconv"
	"strings"
	"time"

	"gonum.org/v1/plot"
)

// timeTicker labels a time axis (unix seconds) in UTC at round instants:
// the smallest step from a fixed ladder (seconds up to weeks, then
// calendar months and years) that gives at most maxLabels ticks. A label
// carries the date (or the year) only on the first tick and where it
// changes, so a label reads like "Mar 4 18:00" then "21:00".
type timeTicker struct{ maxLabels int }

const (
	minute = 60
	hour   = 60 * minute
	day    = 24 * hour
	week   = 7 * day
)

var fixedSteps = []float64{1, 2, 5, 10, 15, 30, minute, 2 * minute, 5 * minute, 10 * minute, 15 * minute,
	30 * minute, hour, 2 * hour, 3 * hour, 6 * hour, 12 * hour, day, 2 * day, week, 2 * week}

var monthSteps = []int{1, 2, 3, 6}

// Ticks implements plot.Ticker.
func (tt timeTicker) Ticks(lo, hi float64) []plot.Tick {
	if !(hi > lo) || !finite(lo) || !finite(hi) {
		return nil
	}
	n := float64(max(tt.maxLabels, 2))
	for _, s := range fixedSteps {
		if (hi-lo)/s <= n {
			return fixedTicks(lo, hi, s)
		}
	}
	for _, m := range monthSteps {
		if (hi-lo)/(float64(m)*30.44*day) <= n {
			return monthTicks(lo, hi, m)
		}
	}
	years := (hi - lo) / (365.25 * day)
	k := 1 // 1, 2, 5, 10, 20, 50, …
	for i := 0; float64(k)*n < years; i++ {
		k = []int{2, 5, 10}[i%3] * pow10(i/3)
	}
	return yearTicks(lo, hi, k)
}

func fixedTicks(lo, hi, s float64) []plot.Tick {
	off := 0.0
	if s >= week {
		off = 4 * day // 1970-01-05 was a Monday
	}
	var out []plot.Tick
	var prev time.Time
	for x := math.Ceil((lo-off)/s)*s + off; x <= hi; x += s {
		t := time.Unix(int64(x), 0).UTC()
		out = append(out, plot.Tick{Value: x, Label: timeLabel(t, prev, s)})
		prev = t
	}
	return out
}

func timeLabel(t, prev time.Time, s float64) string {
	first := prev.IsZero()
	switch {
	case s < minute:
		if first || t.YearDay() != prev.YearDay() {
			return t.Format("Jan 2 15:04:05")
		}
		return t.Format("15:04:05")
	case s < day:
		if first || t.YearDay() != prev.YearDay() || t.Year() != prev.Year() {
			return t.Format("Jan 2 15:04")
		}
		return t.Format("15:04")
	default:
		if first || t.Year() != prev.Year() {
			return t.Format("Jan 2 2006")
		}
		return t.Format("Jan 2")
	}
}

func monthTicks(lo, hi float64, m int) []plot.Tick {
	t := time.Unix(int64(math.Floor(lo)), 0).UTC()
	t = time.Date(t.Year(), t.Month(), 1, 0, 0, 0, 0, time.UTC)
	var out []plot.Tick
	var prev time.Time
	for ; secs(t) <= hi; t = t.AddDate(0, 1, 0) {
		if secs(t) < lo || (int(t.Month())-1)%m != 0 {
			continue
		}
		label := t.Format("Jan")
		if prev.IsZero() || t.Year() != prev.Year() {
			label = t.Format("Jan 2006")
		}
		out = append(out, plot.Tick{Value: secs(t), Label: label})
		prev = t
	}
	return out
}

func yearTicks(lo, hi float64, k int) []plot.Tick {
	y := time.Unix(int64(math.Floor(lo)), 0).UTC().Year()
	y = (y + k - 1) / k * k
	var out []plot.Tick
	for ; ; y += k {
		t := time.Date(y, 1, 1, 0, 0, 0, 0, time.UTC)
		if secs(t) > hi {
			break
		}
		if secs(t) >= lo {
			out = append(out, plot.Tick{Value: secs(t), Label: strconv.Itoa(y)})
		}
	}
	return out
}

// valueTicker places ticks like plot.DefaultTicks and labels them with
// formatValue, so large values read "1.5 M" rather than "1.5e+06".
type valueTicker struct{}

// Ticks implements plot.Ticker.
func (valueTicker) Ticks(lo, hi float64) []plot.Tick {
	ts := plot.DefaultTicks{}.Ticks(lo, hi)
	step := math.Inf(1)
	last := math.NaN()
	for _, t := range ts {
		if t.Label == "" {
			continue
		}
		if !math.IsNaN(last) {
			step = math.Min(step, t.Value-last)
		}
		last = t.Value
	}
	if math.IsInf(step, 1) {
		step = hi - lo
	}
	mag := math.Max(math.Abs(lo), math.Abs(hi))
	// A step of 1 between ticks at 1.5, 2.5, … still needs a decimal:
	// refine the step until every labelled value is written exactly.
	for range 6 {
		exact := true
		for _, t := range ts {
			if t.Label != "" && !writtenExactly(t.Value, step, mag) {
				exact = false
				break
			}
		}
		if exact {
			break
		}
		step /= 10
	}
	for i := range ts {
		if ts[i].Label != "" {
			ts[i].Label = formatValue(ts[i].Value, step, mag)
		}
	}
	return ts
}

// writtenExactly reports whether formatValue(v, step, mag) loses nothing
// of v beyond a millionth of the step.
func writtenExactly(v, step, mag float64) bool {
	back, err := strconv.ParseFloat(strings.TrimRight(formatValue(v, step, mag), " kMGTP"), 64)
	if err != nil {
		return false
	}
	scale := 1.0
	if mag >= 1e4 {
		for _, s := range suffixes {
			if mag >= s.f {
				scale = s.f
				break
			}
		}
	}
	return math.Abs(back*scale-v) <= 1e-6*step
}

// formatValue writes v with as many decimals as the tick step needs and,
// from 10 000 on, a decimal-multiple prefix symbol after a space (k, M, G,
// T, P: the SI prefixes, written with a space as a number and its unit
// are, BIPM SI Brochure 9th ed. 2019, §5.4.3), so 9.03e11 reads "903 G".
func formatValue(v, step, mag float64) string {
	if v == 0 {
		return "0"
	}
	if !finite(v) {
		return strconv.FormatFloat(v, 'g', -1, 64)
	}
	if mag < 1e-3 {
		return strconv.FormatFloat(v, 'g', 3, 64)
	}
	scale, suffix := 1.0, ""
	if mag >= 1e4 {
		for _, s := range suffixes {
			if mag >= s.f {
				scale, suffix = s.f, s.s
				break
			}
		}
	}
	dec := 0
	if step > 0 && finite(step) {
		dec = int(math.Max(0, math.Ceil(-math.Log10(step/scale)-1e-9)))
	}
	dec = min(dec, 6)
	return strconv.FormatFloat(v/scale, 'f', dec, 64) + suffix
}

func pow10(e int) int {
	p := 1
	for range e {
		p *= 10
	}
	return p
}

// formatExact writes a threshold with up to six significant digits, with
// the same suffixes as formatValue from 10 000 on.
func formatExact(v float64) string {
	if !finite(v) || math.Abs(v) < 1e4 {
		return strconv.FormatFloat(v, 'g', 6, 64)
	}
	for _, s := range suffixes {
		if math.Abs(v) >= s.f {
			return strconv.FormatFloat(v/s.f, 'g', 6, 64) + s.s
		}
	}
	return strconv.FormatFloat(v, 'g', 6, 64)
}

var suffixes = []struct {
	f float64
	s string
}{{1e15, " P"}, {1e12, " T"}, {1e9, " G"}, {1e6, " M"}, {1e3, " k"}}

// horizon is how far the forecast reaches past the last history bucket,
// as a person writes it: "12h", "6h30m", "3d", "24 months", or "24
// steps" on an observation-number axis. Empty when there is no forecast.
func horizon(d *Data, f *fan) string {
	n := len(d.Forecast)
	if f == nil || n == 0 {
		return ""
	}
	if d.Index {
		if n == 1 {
			return "step"
		}
		return strconv.Itoa(n) + " steps"
	}
	last := d.Forecast[n-1].Time.UTC()
	// prev is the time before the first step (see newFan), here exact.
	first := d.Forecast[0].Time.UTC()
	var prev time.Time
	for i := len(d.Times) - 1; i >= 0; i-- {
		if d.Times[i].Before(d.Forecast[0].Time) {
			prev = d.Times[i].UTC()
			break
		}
	}
	if prev.IsZero() {
		if n < 2 {
			return ""
		}
		prev = first.Add(-d.Forecast[1].Time.Sub(first))
	}
	if m, ok := wholeMonths(prev, last); ok {
		switch {
		case m%12 == 0 && m >= 36:
			return strconv.Itoa(m/12) + " years"
		case m == 1:
			return "month"
		}
		return strconv.Itoa(m) + " months"
	}
	return formatDuration(last.Sub(prev))
}

// wholeMonths reports the number of calendar months from a to b when both
// fall on midnight of a month's first day.
func wholeMonths(a, b time.Time) (int, bool) {
	onFirst := func(t time.Time) bool {
		return t.Day() == 1 && t.Hour() == 0 && t.Minute() == 0 && t.Second() == 0 && t.Nanosecond() == 0
	}
	if !onFirst(a) || !onFirst(b) || !b.After(a) {
		return 0, false
	}
	return (b.Year()-a.Year())*12 + int(b.Month()) - int(a.Month()), true
}

// formatDuration writes a duration as a person does: "45s", "12h",
// "6h30m", "36h", "3d", "4d6h" (the units d = 24h as forewarn's config
// reads them). Whole days from two days on are written in days; under
// three days the hours are kept; below a second, Go's own form.
func formatDuration(d time.Duration) string {
	if d < 0 {
		return "-" + formatDuration(-d)
	}
	if d < time.Second {
		return d.String()
	}
	const dayDur = 24 * time.Hour
	var b strings.Builder
	if d >= 2*dayDur && (d%dayDur == 0 || d >= 3*dayDur) {
		b.WriteString(strconv.FormatInt(int64(d/dayDur), 10) + "d")
		d %= dayDur
	}
	for _, u := range []struct {
		d time.Duration
		s string
	}{{time.Hour, "h"}, {time.Minute, "m"}, {time.Second, "s"}} {
		if k := d / u.d; k > 0 {
			b.WriteString(strconv.FormatInt(int64(k), 10) + u.s)
			d -= k * u.d
		}
	}
	return b.String()
}
