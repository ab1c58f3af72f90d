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

	// Guard is the state of the online spike and level-shift check
	// (arima.Filter.AppendGuardState: the last verdict and z and the open
	// run); empty when the check is off or there is no model.
	Guard []float64
	// Flag is the latest bucket the check took as an additive outlier or
	// a level shift (Verdict 0: none yet); Flags counts such buckets.
	Flag  GuardFlag
	Flags uint64

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

	// NX is the number of regression columns (β, the last NX Params);
	// Design lists them, column set by column set, from absolute data
	// time (so the filter restarts exactly).
	NX     int
	Design []ColumnSet
	// Cycles is the choice per seasonal cycle of the settings (empty
	// without cycles or with a fixed model).
	Cycles []CycleChoice
	// Outliers are the effects the refit found in its window and fitted
	// (Design's SetEffects columns, in the same order). SearchedTo is
	// FittedAt when the refit's outlier search ran (0: it did not), so
	// that the next refit resumes it (FitJob.Known).
	Outliers   []OutlierFound
	SearchedTo int64
}

// CycleChoice is the refit's choice for one seasonal cycle: seasonal
// ARIMA terms ("arima"), K Fourier pairs ("fourier"), a seasonal profile
// column ("profile", auto.RouteProfile) or nothing ("none").
type CycleChoice struct {
	Seconds float64
	Terms   string
	K       int
}

// OutlierFound is one effect found at a refit (Chen & Liu 1993): kind AO
// (additive outlier), LS (level shift) or TC (temporary change) as
// outlier.Kind, at bucket index Bucket, with size Size on the model's
// scale and its t value Tau in the joint fit.
type OutlierFound struct {
	Kind   uint8
	Bucket int64
	Size   float64
	Tau    float64
}

// GuardFlag is a bucket the online check took as an additive outlier
// (Verdict 1, arima.VerdictOutlier) or a level shift (2,
// arima.VerdictShift), with its standardised one-step error Z.
type GuardFlag struct {
	Bucket  int64
	Verdict uint8
	Z       float64
}

// Spec returns the model's specification (not validated).
func (m *ModelSnapshot) Spec() arima.Spec {
	return arima.Spec{P: m.Order[0], D: m.Order[1], Q: m.Order[2],
		SP: m.Seasonal[0], SD: m.Seasonal[1], SQ: m.Seasonal[2],
		Period: m.Period, Mean: m.Mean, Drift: m.Drift, NX: m.NX}
}

// AlertSnapshot is the persisted state of one alert rule on one series.
type AlertSnapshot struct {
	Rule        string
	Raised      bool    // the rule is raised (ITU-T X.733); false: cleared
	Since       int64   // bucket index of the last state change
	Probability float64 // probability at the last evaluation
}
