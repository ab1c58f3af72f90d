package series

import "forewarn/engine/arima"

// Snapshot is the complete, self-contained state of one series: everything
// needed to resume it on this machine or another one and produce exactly
// the forecasts an uninterrupted run would have produced. It holds plain
// values only, so that package state can encode it without knowing how the
// series computes. The state package owns the versioned encoding.
//
// Times are bucket indices (floor(unix seconds / step seconds)) unless the
// field name says otherwise. Missing values in Window are NaN.
type Snapshot struct {
	Topic       string // series key, the subject after the intake prefix
	Fingerprint string // fingerprint of the series settings the state was built under
	Seq         uint64 // input stream position of the last message applied, wholly or in part (0: none)
	SeqApplied  uint32 // observations of message Seq applied so far (a batch may straddle a refit)

	Kind        string // "gauge" or "counter"
	StepSeconds int64  // bucket width

	// The open bucket: the latest observation not yet closed into Window.
	HasOpen    bool
	OpenBucket int64
	OpenValue  float64 // value as it enters the model (counter offsets applied)

	// Counter bookkeeping: a drop in the raw value starts a new segment; the
	// total carries on through it by adding Offset.
	CounterOffset  float64
	CounterLastRaw float64
	CounterHasRaw  bool
	CounterResets  uint64

	// Window of closed buckets kept for refits; Window[len-1] is bucket
	// WindowEnd. Empty until the first bucket closes.
	WindowEnd int64
	Window    []float64

	Closed     uint64 // buckets closed since the series began
	SinceRefit int    // closed buckets since the last refit (or since the start)
	Late       uint64 // observations rejected as late

	// Transform state. Name is "none", "log", "boxcox" or "scaled-exp".
	Transform TransformSnapshot

	// The model, present once the first fit succeeded.
	Model *ModelSnapshot

	RefitFailures uint64
	LastRefitNote string

	// Alert rule states, one per matching rule, by rule name.
	Alerts []AlertSnapshot

	// Calibration is the fixed state of the series' calibrator
	// (calibrate.Calibrator.AppendState: thresholds per horizon and
	// level, the online update's settings and the coverage sums); empty
	// when the series does not calibrate. The
	// forecasts issued and not yet realised are not kept.
	Calibration []float64
}

// TransformSnapshot is the state the inverse transform needs, plus the
// running estimate used for the next refit.
type TransformSnapshot struct {
	Name    string
	Lambda  float64 // Box-Cox parameter (boxcox only)
	Loc     float64 // frozen location of the z-score step of the fitted model
	Scale   float64 // frozen scale of the z-score step of the fitted model
	RunN    int64   // running (Welford) estimate for the next refit
	RunMean float64
	RunM2   float64
}

// ModelSnapshot is a fitted model and its filter state. The model's shape
// is held as numbers and flags, never as a rendered label: orders
// (p,d,q)×(P,D,Q) with period s, and the constant term.
type ModelSnapshot struct {
	Order    [3]int    // p, d, q
	Seasonal [3]int    // P, D, Q
	Period   int       // s; 0 when there is no seasonal part
	Mean     bool      // process mean estimated
	Drift    bool      // drift estimated
	Params   []float64 // coefficients in the engine's parameter layout
	Sigma2   float64
	LogLik   float64
	AICc     float64
	NObs     int
	FittedAt int64     // bucket index of the last bucket the fit saw
	Filter   []float64 // filter state, as produced by the engine filter
}

// Spec returns the model's specification (not validated).
func (m *ModelSnapshot) Spec() arima.Spec {
	return arima.Spec{P: m.Order[0], D: m.Order[1], Q: m.Order[2],
		SP: m.Seasonal[0], SD: m.Seasonal[1], SQ: m.Seasonal[2],
		Period: m.Period, Mean: m.Mean, Drift: m.Drift}
}

// AlertSnapshot is the persisted state of one alert rule on one series.
type AlertSnapshot struct {
	Rule        string
	Raised      bool    // the rule is raised (ITU-T X.733); false: cleared
	Since       int64   // bucket index of the last state change
	Probability float64 // probability at the last evaluation
}
