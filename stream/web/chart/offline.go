package chart

import (
	"fmt"
	"math"
	"sort"
	"strconv"
	"strings"
	"time"
)

// Offline is the result of an offline fit ("forewarn fit --plot"), in
// raw units, as the command has it at hand.
type Offline struct {
	Title string
	// Times is the CSV's time column: RFC 3339 instants, dates
	// (2006-01-02), Unix seconds, or decimal years as R writes time(x)
	// (1949.0833 is February 1949). Empty, or any cell that is none of
	// these, draws the series against observation numbers instead.
	Times  []string
	Values []float64
	Levels []float64
	// Median[h-1], Lower[h-1][i], Upper[h-1][i] for step h and Levels[i].
	Median       []float64
	Lower, Upper [][]float64
}

// Data turns o into chart data. Forecast step h lies h steps after the
// last observation. On a month grid (every time at midnight UTC on a
// month's first day: monthly or quarterly decimal years, or dates such as
// 1973-01-01) the step is a whole number of calendar months; otherwise it
// is the median spacing.
func (o *Offline) Data() (*Data, error) {
	if len(o.Lower) != len(o.Median) || len(o.Upper) != len(o.Median) {
		return nil, fmt.Errorf("%w: %d medians, %d lower and %d upper bound rows", ErrShape,
			len(o.Median), len(o.Lower), len(o.Upper))
	}
	d := &Data{Title: o.Title, Values: o.Values, Levels: o.Levels}
	next, ok := parseTimes(o.Times)
	if !ok || len(o.Times) != len(o.Values) {
		d.Index = true
		next = nil
		for i := range o.Values {
			d.Times = append(d.Times, time.Unix(int64(i+1), 0))
		}
		last := int64(len(o.Values))
		for h := range o.Median {
			d.Forecast = append(d.Forecast, Point{Time: time.Unix(last+int64(h+1), 0)})
		}
	} else {
		d.Times = next.times
		for h := range o.Median {
			d.Forecast = append(d.Forecast, Point{Time: next.after(h + 1)})
		}
	}
	for h := range d.Forecast {
		d.Forecast[h].Median, d.Forecast[h].Lower, d.Forecast[h].Upper = o.Median[h], o.Lower[h], o.Upper[h]
	}
	return d, nil
}

type timeline struct {
	times  []time.Time
	months int           // calendar months per step, 0: fixed spacing
	step   time.Duration // fixed spacing
}

func (tl *timeline) after(h int) time.Time {
	last := tl.times[len(tl.times)-1]
	if tl.months > 0 {
		return last.AddDate(0, h*tl.months, 0)
	}
	return last.Add(time.Duration(h) * tl.step)
}

// parseTimes reads a time column; ok is false when any cell is not a time.
func parseTimes(col []string) (*timeline, bool) {
	if len(col) == 0 {
		return nil, false
	}
	tl := &timeline{times: make([]time.Time, len(col))}
	for i, s := range col {
		s = strings.TrimSpace(s)
		if t, err := time.Parse(time.RFC3339, s); err == nil {
			tl.times[i] = t
			continue
		}
		if t, err := time.Parse(time.DateOnly, s); err == nil {
			tl.times[i] = t
			continue
		}
		x, err := strconv.ParseFloat(s, 64)
		if err != nil || !finite(x) {
			return nil, false
		}
		if x >= 1e8 { // Unix seconds (after 1973)
			tl.times[i] = time.Unix(int64(x), int64((x-math.Floor(x))*1e9)).UTC()
			continue
		}
		if x < 1 || x > 9999 {
			return nil, false
		}
		yr := math.Floor(x + 1e-9)
		m := (x - yr) * 12
		if math.Abs(m-math.Round(m)) < 1e-4 {
			tl.times[i] = time.Date(int(yr), time.Month(1+int(math.Round(m))), 1, 0, 0, 0, 0, time.UTC)
			continue
		}
		start := time.Date(int(yr), 1, 1, 0, 0, 0, 0, time.UTC)
		tl.times[i] = start.Add(time.Duration((x - yr) * float64(start.AddDate(1, 0, 0).Sub(start))))
	}
	// A month grid: every time is midnight UTC on a month's first day
	// (R's decimal years of a monthly or quarterly series, or dates such as
	// 1973-01-01).
	months := true
	for _, t := range tl.times {
		u := t.UTC()
		months = months && u.Day() == 1 && u.Hour() == 0 && u.Minute() == 0 && u.Second() == 0 && u.Nanosecond() == 0
	}
	for i := 1; i < len(tl.times); i++ {
		if tl.times[i].Before(tl.times[i-1]) {
			return nil, false
		}
	}
	if len(tl.times) < 2 {
		tl.step = time.Hour
		return tl, true
	}
	gaps := make([]time.Duration, len(tl.times)-1)
	for i := range gaps {
		gaps[i] = tl.times[i+1].Sub(tl.times[i])
	}
	sort.Slice(gaps, func(i, j int) bool { return gaps[i] < gaps[j] })
	tl.step = gaps[len(gaps)/2]
	if months {
		// Month grid: the step in whole calendar months (3 for quarterly).
		tl.months = int(math.Max(1, math.Round(tl.step.Hours()/24/30.44)))
	}
	if tl.step <= 0 {
		tl.step = time.Hour
	}
	return tl, true
}
