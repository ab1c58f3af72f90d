package series

import (
	"fmt"
	"math"
	"time"

	"gonum.org/v1/gonum/stat/distuv"

	"forewarn/engine/arima"
	"forewarn/engine/calibrate"
	"forewarn/engine/transform"
)

// Settings are the per-series settings that shape the maths. They are
// plain values copied from the configuration by the caller.
type Settings struct {
	Kind        string    // "gauge" or "counter"
	StepSeconds int64     // bucket width, > 0
	Horizon     int       // steps ahead, > 0
	Levels      []float64 // central interval levels in percent, ascending
	Window      int       // closed buckets kept for refits
	MinPoints   int       // non-missing buckets before the first fit
	RefitEvery  int       // closed buckets between refits
	Model       string    // "auto" or orders "p,d,q" / "p,d,q x P,D,Q" (arima.ParseOrders)
	Period      int       // seasonal period in steps (of the seasonal orders, or for automatic choice); 0: none
	Constant    string    // "auto" (or ""), "none", "mean" or "drift" (arima.ParseConstant)
	Transform   string    // "auto", "none", "log", "boxcox", "boxcox(λ)", "scaled-exp"
	Calibrate   bool      // calibrate the bands and alert spreads online (package calibrate)
	// Seasons are the seasonal cycles in seconds (need not be whole
	// steps). With Model "auto" the refit chooses per cycle seasonal
	// ARIMA terms, Fourier pairs or nothing (auto.Options.Seasons); a
	// fixed Model takes its seasonal period from Period.
	Seasons []float64
	// Guard runs the online spike and level-shift check of the filter
	// (arima.DefaultGuard) on every closed bucket.
	Guard bool
	// Outliers has each refit look for additive outliers, level shifts
	// and temporary changes in the window (outlier.Detect) and fit them
	// as regression columns.
	Outliers    bool
	Fingerprint string // changes whenever any field above changes
}

// Outcome says what one observation did to a series.
type Outcome int

const (
	// Absorbed: the observation updated the open bucket; nothing closed.
	Absorbed Outcome = iota
	// Warming: a bucket closed but the series has no model yet.
	Warming
	// Published: a bucket closed and Forecast holds a new forecast.
	Published
	// NeedFit: a bucket closed at a refit point. The caller runs FitJob
	// (on any goroutine) and hands the result to Install before applying
	// any later observation of this series; Install then yields the
	// forecast for that bucket.
	NeedFit
)

// Series is the state machine of one metric series: buckets, counter
// resets, the window, the transform, the model and its filter, and the
// forecast buffers. It is not safe for concurrent use; one owner goroutine
// drives it. Observe, and Forecast when the model exists, do not allocate.
type Series struct {
	set  Settings
	snap Snapshot

	tr     transform.Transform
	model  *arima.Model
	filter *arima.Filter
	design *design // the model's regressors (nil without)
	// fixed is the transform the settings fix when its domain is not
	// every value (log, boxcox, boxcox(λ)): it bounds what Observe takes
	// before the first fit, as tr does after. Its Name is "" otherwise.
	fixed transform.Transform

	// win is the buffer the window lives in: Window plus some slack
	// (windowCap), so that a full window moves along it by reslicing and
	// is copied back to the start only when it reaches the end.
	win []float64

	// mf is the latest forecast on the model scale; fc is it in raw
	// units, filled from mf when asked for (stale until then).
	mf      ModelForecast
	fc      Forecast
	fcStale bool

	work AlertWork // EvaluateAlerts' workspace

	// cal calibrates the bands when Settings.Calibrate is set (nil
	// otherwise): it resolves each closed bucket's pending forecasts
	// before the filter steps (push) and records each new forecast
	// (forecast), whose bands then use its thresholds.
	cal *calibrate.Calibrator
	sd  []float64 // the new forecast's sds on the model scale, for Issue

	// Refits coalesced within one message (ObserveIn). holdFit is set
	// for the one observation being applied when a later observation of
	// its message will close a bucket: a refit falling due at a close it
	// makes waits. fitOwed records that one did wait, until the refit is
	// asked for. Neither is stored: between messages both are false
	// (ObserveIn asks for an owed refit at its message's last
	// observation at the latest).
	holdFit, fitOwed bool
	// reissue marks a refit asked for after its message ended (ObserveIn):
	// its bucket's forecast, if the old model made one, is already out, so
	// Install does not publish it again.
	reissue bool
}

// New returns an empty series for topic.
func New(topic string, set Settings) (*Series, error) {
	if err := set.check(); err != nil {
		return nil, err
	}
	s := &Series{set: set, fixed: fixedDomain(set.Transform)}
	s.snap = Snapshot{
		Topic:       topic,
		Fingerprint: set.Fingerprint,
		Kind:        set.Kind,
		StepSeconds: set.StepSeconds,
		Transform:   TransformSnapshot{Name: "none", Scale: 1},
	}
	s.win = make([]float64, windowCap(set.Window))
	s.snap.Window = s.win[:0]
	s.tr = transform.Transform{Name: transform.None, Scale: 1}
	s.initBuffers()
	if err := s.initCalibrator(); err != nil {
		return nil, err
	}
	return s, nil
}

// Restore rebuilds a series from its snapshot. When the snapshot was made
// under other settings (a different fingerprint), the window and the
// counter state are kept, the model is dropped and the series refits at the
// next closed bucket that has enough data.
func Restore(snap *Snapshot, set Settings) (*Series, error) {
	if err := set.check(); err != nil {
		return nil, err
	}
	if snap.Kind != set.Kind || snap.StepSeconds != set.StepSeconds {
		return nil, fmt.Errorf("%w: %q was %s with step %ds, now %s with step %ds",
			ErrIncompatible, snap.Topic, snap.Kind, snap.StepSeconds, set.Kind, set.StepSeconds)
	}
	s := &Series{set: set, snap: *snap, fixed: fixedDomain(set.Transform)}
	s.snap.Alerts = append([]AlertSnapshot(nil), snap.Alerts...)
	s.win = make([]float64, windowCap(set.Window))
	s.snap.Window = s.win[:copy(s.win, snap.Window[max(0, len(snap.Window)-set.Window):])]
	s.initBuffers()
	if err := s.initCalibrator(); err != nil {
		return nil, err
	}
	s.snap.Calibration = nil // set again from the calibrator (Snapshot)
	s.tr = transform.Transform{Name: transform.None, Scale: 1}
	if snap.Fingerprint != set.Fingerprint {
		s.snap.Fingerprint = set.Fingerprint
		s.snap.Model = nil
		s.snap.SinceRefit = set.RefitEvery // due at once: refit under the new settings
		return s, nil
	}
	if snap.Model == nil {
		return s, nil // still warming up, on the same schedule
	}
	tr, err := transformFromSnapshot(snap.Transform)
	if err != nil {
		return nil, fmt.Errorf("series: restore %q: %w", snap.Topic, err)
	}
	m, f, d, err := modelFromSnapshot(snap.Model, snap.Guard, set)
	if err != nil {
		return nil, fmt.Errorf("series: restore %q: %w", snap.Topic, err)
	}
	ms := *snap.Model
	ms.Params = append([]float64(nil), snap.Model.Params...)
	ms.Filter = append([]float64(nil), snap.Model.Filter...)
	s.snap.Model = &ms
	s.snap.Guard = append([]float64(nil), snap.Guard...)
	s.tr, s.model, s.filter, s.design = tr, m, f, d
	s.setModelInfo()
	if s.cal != nil {
		// The record's calibration continues; a record without one
		// (format 1 or 2, or calibration just turned on, which changes
		// the fingerprint only when turned off) warms it as a fit does.
		if len(snap.Calibration) == 0 || s.cal.SetState(snap.Calibration) != nil {
			s.warmCalibrator()
		}
	}
	if len(s.snap.Window) > 0 {
		s.forecast() // the latest forecast is served again at once after a restart
	}
	return s, nil
}

// fixedDomain returns the transform that name fixes if it takes only
// positive values (log, and boxcox with or without λ: x > 0), else the
// zero Transform: auto leaves the choice to the fit, and none and
// scaled-exp take every finite value.
func fixedDomain(name string) transform.Transform {
	tr, err := transform.Parse(name)
	if err != nil || tr.Name != transform.Log && tr.Name != transform.BoxCox {
		return transform.Transform{}
	}
	return tr
}

func (set *Settings) check() error {
	switch {
	case set.Kind != "gauge" && set.Kind != "counter":
		return fmt.Errorf("%w: kind %q (want gauge or counter)", ErrSettings, set.Kind)
	case set.StepSeconds <= 0:
		return fmt.Errorf("%w: step %ds (want > 0)", ErrSettings, set.StepSeconds)
	case set.Horizon <= 0:
		return fmt.Errorf("%w: horizon %d (want > 0)", ErrSettings, set.Horizon)
	case set.Window < 2 || set.MinPoints < 2 || set.MinPoints > set.Window:
		return fmt.Errorf("%w: window %d and min_points %d (want 2 <= min_points <= window)", ErrSettings, set.Window, set.MinPoints)
	case set.RefitEvery < 1:
		return fmt.Errorf("%w: refit_every %d (want >= 1)", ErrSettings, set.RefitEvery)
	}
	if _, err := arima.ParseConstant(set.Constant); err != nil {
		return fmt.Errorf("%w: constant %q (want auto, none, mean or drift)", ErrSettings, set.Constant)
	}
	for _, l := range set.Levels {
		if !(l > 0 && l < 100) {
			return fmt.Errorf("%w: level %g (want 0 < level < 100)", ErrSettings, l)
		}
	}
	step := float64(set.StepSeconds)
	for i, L := range set.Seasons {
		switch {
		case !(L > 0) || math.IsInf(L, 0):
			return fmt.Errorf("%w: cycle %d is %v s (want a positive duration)", ErrSettings, i+1, L)
		case L < 2*step:
			return fmt.Errorf("%w: cycle %d (%v) is shorter than two steps of %v", ErrSettings, i+1, seconds(L), seconds(step))
		case L > float64(set.Window)*step:
			return fmt.Errorf("%w: cycle %d (%v) is longer than the window of %d steps of %v", ErrSettings, i+1, seconds(L), set.Window, seconds(step))
		}
	}
	return nil
}

// seconds renders a duration given in seconds.
func seconds(s float64) time.Duration { return time.Duration(s * float64(time.Second)) }

func (s *Series) initBuffers() {
	h := s.set.Horizon
	s.mf = ModelForecast{
		Topic:       s.snap.Topic,
		Kind:        s.set.Kind,
		StepSeconds: s.set.StepSeconds,
		Levels:      append([]float64(nil), s.set.Levels...),
		Z:           make([]float64, len(s.set.Levels)),
		Mean:        make([]float64, h),
		Variance:    make([]float64, h),
		Mult:        make([]float64, h*len(s.set.Levels)),
	}
	for i, l := range s.set.Levels {
		s.mf.Z[i] = distuv.UnitNormal.Quantile(0.5 + l/200)
	}
	// Shaped now, so that filling it never allocates.
	s.fc = Forecast{Levels: make([]float64, 0, len(s.set.Levels)), Points: make([]Point, h)}
	for i := range s.fc.Points {
		s.fc.Points[i].Lower = make([]Bound, len(s.set.Levels))
		s.fc.Points[i].Upper = make([]Bound, len(s.set.Levels))
		s.fc.Points[i].Scale = make([]float64, len(s.set.Levels))
	}
	s.mf.Fill(&s.fc) // the scratch too
}

// Topic returns the series key.
func (s *Series) Topic() string { return s.snap.Topic }

// Settings returns the settings the series runs under.
func (s *Series) Settings() Settings { return s.set }

// Position returns the input stream position the series reflects: the
// last message applied, wholly or in part, and how many of its
// observations were applied.
func (s *Series) Position() (seq uint64, applied uint32) {
	return s.snap.Seq, s.snap.SeqApplied
}

// Handled reports whether observation i (0-based) of the message at stream
// position seq has already been applied to this series, so that a
// redelivered message has no effect. Position 0 means "no position" (plain
// subscriptions) and is never handled.
func (s *Series) Handled(seq uint64, i int) bool {
	if seq == 0 {
		return false
	}
	return seq < s.snap.Seq || seq == s.snap.Seq && uint32(i) < s.snap.SeqApplied
}

// Advance records that observation i (0-based) of the message at stream
// position seq has been applied (or rejected). Positions never move back.
func (s *Series) Advance(seq uint64, i int) {
	switch {
	case seq == 0:
	case seq > s.snap.Seq:
		s.snap.Seq, s.snap.SeqApplied = seq, uint32(i+1)
	case seq == s.snap.Seq && uint32(i+1) > s.snap.SeqApplied:
		s.snap.SeqApplied = uint32(i + 1)
	}
}

// HasModel reports whether the series has a fitted model.
func (s *Series) HasModel() bool { return s.model != nil }

// Observe applies one observation at unix time t (nanoseconds) with value v
// in raw units. It returns ErrLate for a bucket that has already closed,
// and ErrDomain for a value the current transform cannot take (before the
// first fit, the transform the settings fix, if any); in both cases the
// series is unchanged. It does not allocate.
func (s *Series) Observe(t int64, v float64) (Outcome, error) {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return Absorbed, fmt.Errorf("%w: value %v", ErrNotFinite, v)
	}
	b := floorDiv(t, s.set.StepSeconds*int64(time.Second))
	sn := &s.snap
	if sn.HasOpen && b < sn.OpenBucket || !sn.HasOpen && len(sn.Window) > 0 && b <= sn.WindowEnd {
		sn.Late++
		return Absorbed, fmt.Errorf("%w: bucket starting %s has already closed",
			ErrLate, time.Unix(b*s.set.StepSeconds, 0).UTC().Format(time.RFC3339))
	}
	total := v
	if s.set.Kind == "counter" {
		total = v + sn.CounterOffset
		if sn.CounterHasRaw && v < sn.CounterLastRaw {
			total = v + sn.CounterOffset + sn.CounterLastRaw
		}
	}
	if s.model != nil {
		if _, err := s.tr.Forward(total); err != nil {
			return Absorbed, fmt.Errorf("%w: value %g under transform %s", ErrDomain, v, s.tr)
		}
	} else if s.fixed.Name != "" && !(total > 0) {
		return Absorbed, fmt.Errorf("%w: value %g under transform %s", ErrDomain, v, s.fixed)
	}
	if s.set.Kind == "counter" {
		if sn.CounterHasRaw && v < sn.CounterLastRaw {
			sn.CounterOffset += sn.CounterLastRaw
			sn.CounterResets++
		}
		sn.CounterLastRaw, sn.CounterHasRaw = v, true
	}
	out := Absorbed
	if sn.HasOpen && b > sn.OpenBucket {
		out = s.closeOpen()
	}
	sn.HasOpen, sn.OpenBucket, sn.OpenValue = true, b, total
	return out, nil
}

// CloseOpen closes the open bucket without a later observation (the
// close_after rule). It returns Absorbed when no bucket is open.
func (s *Series) CloseOpen() Outcome {
	if !s.snap.HasOpen {
		return Absorbed
	}
	out := s.closeOpen()
	s.snap.HasOpen = false
	return out
}

// closeOpen moves the open bucket into the window, filling any gap with
// missing values, and steps the filter.
func (s *Series) closeOpen() Outcome {
	sn := &s.snap
	b, v := sn.OpenBucket, sn.OpenValue
	if len(sn.Window) > 0 {
		gap := b - sn.WindowEnd - 1
		if gap >= int64(s.set.Window) {
			// Nothing of the window would survive the gap: start afresh.
			sn.Window = s.win[:0]
			s.dropModel()
		} else {
			for k := int64(0); k < gap; k++ {
				s.push(sn.WindowEnd+1+k, math.NaN())
			}
		}
	}
	s.push(b, v)
	sn.WindowEnd = b
	sn.Closed++
	sn.SinceRefit++
	run := transform.Welford{N: sn.Transform.RunN, Mean: sn.Transform.RunMean, M2: sn.Transform.RunM2}
	run.Add(v)
	sn.Transform.RunN, sn.Transform.RunMean, sn.Transform.RunM2 = run.N, run.Mean, run.M2

	if s.FitDue() {
		if !s.holdFit {
			s.fitOwed = false
			return NeedFit
		}
		s.fitOwed = true // ObserveIn: the refit moves to a later close of the message
	}
	if s.model == nil {
		return Warming
	}
	s.forecast()
	return Published
}

// NoMore is the ahead argument of ObserveIn for the last observation of
// its message.
const NoMore = math.MinInt64

// FitOwed reports that a refit fell due inside the message being applied
// and waits for a later close of it (ObserveIn). The record of a series
// in that state must not be stored: restored, its refit would look like
// one that was running (FitDue) and run at once, at another bucket than
// in an uninterrupted run. It is false between messages.
func (s *Series) FitOwed() bool { return s.fitOwed }

// ObserveIn is Observe for observation of a message that may carry
// several (a JSON array): ahead is the latest time (unix nanoseconds) of
// the observations that follow it in the same message, or NoMore for the
// last one. Refits that fall due inside one message are coalesced into
// one, at the last bucket the message closes: a refit point reached at a
// close made by an observation whose message goes on to close a later
// bucket publishes from the current model (Published; Warming before the
// first fit) and the refit waits, counted in SinceRefit, for that later
// close. If the message's last observation leaves a refit owed (the
// later close did not happen: its observation was refused), ObserveIn
// returns NeedFit after it, also with an error, and the refit is of the
// last closed bucket. That bucket's forecast came from the old model and
// is already out, so Install then returns Absorbed: the new model
// publishes from the next close, and no origin is published twice.
//
// Message boundaries are part of the input stream, so the rule depends on
// the data alone: a redelivered or replayed message ends the same way. A
// stream of one observation per message refits exactly as Observe.
func (s *Series) ObserveIn(t int64, v float64, ahead int64) (Outcome, error) {
	step := s.set.StepSeconds * int64(time.Second)
	s.holdFit = ahead != NoMore && floorDiv(ahead, step) > floorDiv(t, step)
	out, err := s.Observe(t, v)
	s.holdFit = false
	if ahead == NoMore && s.fitOwed && out != NeedFit {
		s.fitOwed = false
		if s.FitDue() {
			s.reissue = s.model != nil
			return NeedFit, err
		}
	}
	return out, err
}

// FitDue reports whether the last closed bucket is a refit point whose
// refit has not been installed yet: the first fit once MinPoints values
// are in (retried every RefitEvery closes after a failure), then every
// RefitEvery closes. A series restored from a record saved while its refit
// ran is due at once, so the refit happens at the same bucket as in an
// uninterrupted run.
func (s *Series) FitDue() bool {
	sn := &s.snap
	if len(sn.Window) == 0 {
		return false
	}
	if s.model == nil {
		return (sn.SinceRefit >= s.set.RefitEvery || sn.RefitFailures == 0) &&
			countFinite(sn.Window) >= s.set.MinPoints
	}
	return sn.SinceRefit >= s.set.RefitEvery
}

// push appends the value of closed bucket b to the window, dropping the
// oldest when full, and steps the filter when there is a model, at the
// bucket's start in data time (the phase of every regressor comes from it).
func (s *Series) push(b int64, v float64) {
	sn := &s.snap
	if len(sn.Window) == s.set.Window {
		if cap(sn.Window) == len(sn.Window) {
			// At the end of the buffer: back to its start, once every
			// windowCap − Window pushes.
			sn.Window = s.win[:copy(s.win, sn.Window)]
		}
		sn.Window = sn.Window[1:]
	}
	sn.Window = append(sn.Window, v)
	if s.filter != nil {
		w := math.NaN()
		if !math.IsNaN(v) {
			if x, err := s.tr.Forward(v); err == nil {
				w = x
			}
		}
		if s.cal != nil {
			s.cal.Observe(w) // resolves the forecasts issued for this bucket
		}
		s.filter.StepAt(float64(b*s.set.StepSeconds), w)
		if s.set.Guard {
			if vd, z := s.filter.LastVerdict(); vd != arima.VerdictNone {
				sn.Flag = GuardFlag{Bucket: b, Verdict: uint8(vd), Z: z}
				sn.Flags++
			}
		}
	}
}

// windowCap is the size of the buffer for a window of n buckets: an
// eighth more, so that a full window of 2000 buckets is copied once in
// 250 closes (instead of at every close) for 2 KB per series.
func windowCap(n int) int { return n + max(1, n/8) }

func (s *Series) dropModel() {
	s.model, s.filter, s.design, s.snap.Model, s.snap.Guard = nil, nil, nil, nil, nil
	s.snap.SinceRefit = 0
	if s.cal != nil {
		_ = s.initCalibrator() // the forecasts pending are of a window now gone; the settings were checked by New
	}
}

// Forecast returns the latest forecast in raw units, filling it from the
// model-scale forecast on the first call after it changed. It is valid
// until the next call that changes the series; callers encode or copy it
// at once.
func (s *Series) Forecast() *Forecast {
	if s.fcStale {
		s.mf.Fill(&s.fc)
		s.fcStale = false
	}
	return &s.fc
}

// ModelForecast returns the latest forecast on the model scale, with what
// its raw-unit form needs (read-only, valid until the series changes):
// ModelForecast().Fill gives what Forecast returns. A publisher copies it
// and fills the copy elsewhere.
func (s *Series) ModelForecast() *ModelForecast { return &s.mf }

// ModelScale returns the latest model-scale forecast means and variances
// (read-only views, valid until the series changes) and the transform, for
// threshold probabilities.
func (s *Series) ModelScale() (mean, variance []float64, tr transform.Transform) {
	return s.mf.Mean, s.mf.Variance, s.tr
}

// Joint fills cov (Horizon×Horizon, row-major) with the joint covariance of
// the model-scale forecast errors from the current origin.
func (s *Series) Joint(cov []float64) {
	if s.filter != nil {
		s.filter.ForecastJoint(s.mf.Mean, cov)
	}
}

// forecast computes the model-scale forecast from the filter at the new
// origin; the raw-unit one follows when asked for (Forecast).
func (s *Series) forecast() {
	s.filter.Forecast(s.mf.Mean, s.mf.Variance)
	if s.cal != nil {
		for i, v := range s.mf.Variance {
			s.sd[i] = math.Sqrt(v)
		}
		s.cal.Issue(s.mf.Mean, s.sd) // Gaussian on the model scale: the median is the mean
		s.cal.Thresholds(s.mf.Mult)
	}
	s.mf.End = s.snap.WindowEnd
	s.mf.Last = s.snap.Window[len(s.snap.Window)-1]
	s.mf.Taken, s.mf.TakenZ = "", 0
	if vd, z := s.filter.LastVerdict(); vd != arima.VerdictNone {
		s.mf.Taken, s.mf.TakenZ = verdictName(vd), z
	}
	s.mf.Transform = s.tr
	s.fcStale = true
}

// verdictName is the guard's verdict as the message and the page say it.
func verdictName(v arima.Verdict) string {
	switch v {
	case arima.VerdictOutlier:
		return "outlier"
	case arima.VerdictShift:
		return "level_shift"
	}
	return ""
}

func countFinite(x []float64) int {
	n := 0
	for _, v := range x {
		if !math.IsNaN(v) {
			n++
		}
	}
	return n
}

// floorDiv is floor(a/b) for b > 0.
func floorDiv(a, b int64) int64 {
	q := a / b
	if a%b != 0 && a < 0 {
		q--
	}
	return q
}

// Status is a one-word summary of a series for operators.
func (s *Series) Status() string {
	if s.model == nil {
		return "warming_up"
	}
	return "fitted"
}

// Snapshot returns the series state for persistence. The returned value
// shares slices with the series: encode it before the series changes.
func (s *Series) Snapshot() *Snapshot {
	if s.filter != nil && s.snap.Model != nil {
		s.snap.Model.Filter = s.filter.AppendState(s.snap.Model.Filter[:0])
		s.snap.Guard = s.filter.AppendGuardState(s.snap.Guard[:0])
	}
	if s.cal != nil {
		s.snap.Calibration = s.cal.AppendState(s.snap.Calibration[:0])
	} else {
		s.snap.Calibration = nil
	}
	return &s.snap
}

// Calibrator returns the series' calibrator (read-only; nil when the
// settings do not calibrate): thresholds, factors and realised coverage.
func (s *Series) Calibrator() *calibrate.Calibrator { return s.cal }

// initCalibrator makes the calibrator the settings ask for, with the
// model's own thresholds until a fit warms it.
func (s *Series) initCalibrator() error {
	if !s.set.Calibrate {
		return nil
	}
	c, err := calibrate.New(calibrate.Options{Horizon: s.set.Horizon, Levels: s.set.Levels})
	if err != nil {
		return fmt.Errorf("%w: %w", ErrSettings, err)
	}
	s.cal = c
	s.sd = make([]float64, s.set.Horizon)
	s.mf.Calibrated = true
	c.Thresholds(s.mf.Mult)
	return nil
}

// warmCalibrator sets the thresholds from the forecasts the current model
// would have issued over the window (calibrate.WarmStart: one filter pass
// and at most calibrate.DefaultWarmOrigins forecasts). When the window
// leaves no forecast to learn from, the thresholds go back to the model's
// own. A calibrator that has already updated online keeps its thresholds
// (calibrate.Calibrator.KeepsAtRefit).
func (s *Series) warmCalibrator() {
	if s.cal.KeepsAtRefit() {
		s.cal.Thresholds(s.mf.Mult)
		return
	}
	w := make([]float64, len(s.snap.Window))
	for i, v := range s.snap.Window {
		w[i] = math.NaN()
		if !math.IsNaN(v) {
			if x, err := s.tr.Forward(v); err == nil {
				w[i] = x
			}
		}
	}
	m := s.model
	if s.design != nil {
		// The filter with regressors filters u = y − xᵀβ and adds xᵀβ to
		// its forecasts, so its forecast errors are those of the model
		// without regressors on u: the calibrator warms on u.
		m0 := *m
		m0.Spec.NX, m0.Beta = 0, nil
		m = &m0
		x := make([]float64, s.design.NumRegressors())
		t0 := s.snap.WindowEnd - int64(len(w)) + 1
		for i := range w {
			s.design.Regressors(x, float64((t0+int64(i))*s.set.StepSeconds))
			for j, b := range s.model.Beta {
				w[i] -= b * x[j]
			}
		}
	}
	if _, err := s.cal.WarmStart(m, w, nil); err != nil {
		s.cal.Reset()
	}
	s.cal.Thresholds(s.mf.Mult)
}

// Alerts returns the alert states, one per rule evaluated, by rule name
// (read-only: EvaluateAlerts updates them).
func (s *Series) Alerts() *[]AlertSnapshot { return &s.snap.Alerts }
