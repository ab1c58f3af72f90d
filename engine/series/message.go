package series

import "time"

// Forecast is one rolling multi-step forecast in raw units, as published at
// the close of a bucket. Package stream encodes it (CONTRACT.md §2); the
// wall-clock "issued" time is added at publication, so a Forecast depends on
// data time only.
type Forecast struct {
	Topic       string
	Origin      time.Time // start of the last closed bucket
	StepSeconds int64
	LastValue   float64 // last closed bucket's value in raw units
	Kind        string  // "gauge" or "counter"
	Model       ModelInfo
	Levels      []float64 // interval levels in percent, ascending, e.g. [80 95]
	Points      []Point   // h = 1..horizon
	// Calibrated: the bands are calibrated (CONTRACT §4, package
	// calibrate); false: they are the model's own.
	Calibrated bool
	// Taken is what the online spike and level-shift check made of the
	// last closed bucket: "" (a normal value, or the check is off),
	// "outlier" (an additive outlier, kept out of the model's state) or
	// "level_shift" (the level moved); TakenZ is that bucket's
	// standardised one-step error (0 when Taken is "").
	Taken  string
	TakenZ float64
}

// ModelInfo describes the model a forecast came from.
type ModelInfo struct {
	Spec      string // the model's label (arima.Spec.Label), e.g. "ARIMA 1,1,1 × 0,1,1 s=24"
	Transform string // e.g. "log", "boxcox(0.25)"
	FittedAt  time.Time
	NObs      int // observations the fit used: non-missing, less d + sD (model.observations_used)
	AICc      float64
}

// Point is the forecast h steps ahead of the origin. Lower[i] and Upper[i]
// are the bounds of the central interval at Levels[i].
type Point struct {
	H      int
	Time   time.Time // start of the forecast bucket
	Mean   float64   // bias-adjusted mean in raw units
	Median float64
	Lower  []Bound
	Upper  []Bound
	// Scale[i] is the band's half-width at Levels[i] divided by the
	// model's own, on the model scale: the calibration factor (1 for the
	// model's own bands).
	Scale []float64
}

// Bound is one band endpoint. OK is false when the endpoint falls outside
// the inverse transform's domain; it is then unbounded and published as null.
type Bound struct {
	Value float64
	OK    bool
}

// AlertEvent is a change of one alert rule's state on one series.
type AlertEvent struct {
	Topic         string
	Rule          string
	Raised        bool   // true: "raised"; false: "cleared" (ITU-T X.733 alarm states)
	Direction     string // "above" or "below"
	Threshold     float64
	Probability   float64 // chance of crossing within the window (an estimate for a gauge)
	StdErr        float64 // its Monte Carlo standard error (0: exact or a bound); not in the message
	WithinSeconds int64
	ETA           time.Time // first time the median forecast is beyond the threshold
	HasETA        bool      // false: eta is null
	Origin        time.Time
}
