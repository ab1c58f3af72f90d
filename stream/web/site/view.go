package site

import (
	"context"
	"math"
	"time"

	"forewarn/stream/web/chart"
)

// Source is what the site reads. Views copies the series it is asked for
// into plain values the caller owns.
type Source interface {
	// Views returns the series whose topic is topic ("" for all), each
	// with at most history recent buckets of history (a negative history
	// means the whole window). It returns ErrNotRunning when the daemon
	// is not running. Order is unspecified.
	Views(ctx context.Context, topic string, history int) ([]View, error)

	// Latest returns the latest forecast message of topic as published
	// on the bus.
	Latest(topic string) ([]byte, bool)

	// Ready is closed once the daemon has loaded its state and reads
	// its intake.
	Ready() <-chan struct{}
}

// View is a copy of one series for display.
type View struct {
	Topic       string
	Kind        string // "gauge" or "counter"
	Status      string // "warming_up", "fitted" or "refitting"
	StepSeconds int64
	Closed      uint64 // buckets closed since the series began
	Rejects     uint64 // observations not accepted
	Late        uint64 // of which late

	// History holds the most recent closed buckets, oldest first; the
	// last one starts at HistoryEnd. NaN is a missing bucket.
	History    []float64
	HistoryEnd time.Time

	Model         Model // Spec is "" before the first fit
	RefitFailures uint64
	LastRefitNote string
	Refits        []time.Time // data times of recent refits

	Forecast *Forecast // nil while warming up
	Rules    []Rule

	// Calibrated: the series calibrates its bands (CONTRACT §4);
	// Coverage then holds, per level in ascending order, the realised
	// coverage of its recent forecasts.
	Calibrated bool
	Coverage   []Coverage

	// Cycles is the model's choice per seasonal cycle of the series'
	// settings; Outliers the effects the last refit found in its window
	// and fitted. Flag is the latest bucket the online check took as an
	// outlier or a level shift (zero Time: none), Flags how many it took.
	Cycles   []Cycle
	Outliers []Outlier
	Flag     Flag
	Flags    uint64
}

// Cycle is one seasonal cycle and the terms that carry it: "arima"
// (seasonal ARIMA terms), "fourier" (Pairs sin/cos pairs), "profile" (the
// cycle's seasonal shape, the profile route of the automatic choice) or
// "none".
type Cycle struct {
	Length time.Duration
	Terms  string
	Pairs  int
}

// Outlier is one effect found at a refit: Kind "additive outlier",
// "level shift" or "temporary change", at the bucket starting Time, of
// Size on the model's scale with t value Tau.
type Outlier struct {
	Time      time.Time
	Kind      string
	Size, Tau float64
}

// Flag is a bucket the online check took as "outlier" or "level shift",
// with its standardised one-step error Z.
type Flag struct {
	Time time.Time
	Kind string
	Z    float64
}

// Coverage is the realised coverage of one level's bands: the share of
// the series' recent forecasts (all horizons, older ones weighted less)
// whose value fell inside the band, NaN before any was resolved, and the
// weighted number of forecasts behind it.
type Coverage struct {
	Level  float64 // nominal, percent
	Share  float64 // realised, 0..1
	Weight float64
}

// Model describes the fitted model.
type Model struct {
	Spec      string
	Transform string
	FittedAt  time.Time
	NObs      int
	AICc      float64
}

// Forecast is the latest forecast in raw units.
type Forecast struct {
	Origin time.Time
	Levels []float64 // percent, ascending
	Points []Point
}

// Point is one forecast step; Lower[i] and Upper[i] bound the interval at
// Levels[i], NaN when unbounded.
type Point struct {
	H            int
	Time         time.Time
	Mean, Median float64
	Lower, Upper []float64
}

// Rule is one alert rule on the series and its state.
type Rule struct {
	Name        string
	Threshold   float64
	Above       bool
	Raised      bool
	Probability float64 // at the last evaluation; NaN if never evaluated
	Since       time.Time
}

// StatusText is the operator's wording of a status code.
func StatusText(code string) string {
	switch code {
	case "warming_up":
		return "warming up"
	case "fitted":
		return "fitted"
	case "refitting":
		return "refitting"
	}
	return code
}

// LastValue is the value of the last closed bucket, NaN when it is
// missing or there is none.
func (v *View) LastValue() float64 {
	if n := len(v.History); n > 0 {
		return v.History[n-1]
	}
	return math.NaN()
}

// ChartData turns the view into what the chart package draws, keeping at
// most points recent history buckets (points ≤ 0: all that were copied).
func (v *View) ChartData(points int) *chart.Data {
	d := &chart.Data{Title: v.Topic}
	h := v.History
	if points > 0 && len(h) > points {
		h = h[len(h)-points:]
	}
	step := time.Duration(v.StepSeconds) * time.Second
	d.Times = make([]time.Time, len(h))
	for i := range h {
		d.Times[i] = v.HistoryEnd.Add(-time.Duration(len(h)-1-i) * step)
	}
	d.Values = h
	if f := v.Forecast; f != nil {
		d.Levels = f.Levels
		d.Forecast = make([]chart.Point, len(f.Points))
		for i, p := range f.Points {
			d.Forecast[i] = chart.Point{Time: p.Time, Median: p.Median, Lower: p.Lower, Upper: p.Upper}
		}
	}
	for _, r := range v.Rules {
		d.Thresholds = append(d.Thresholds, chart.Threshold{Name: r.Name, Value: r.Threshold, Above: r.Above, Raised: r.Raised})
	}
	if len(d.Times) > 0 {
		for _, t := range v.Refits {
			if !t.Before(d.Times[0]) {
				d.Refits = append(d.Refits, t)
			}
		}
	}
	return d
}
