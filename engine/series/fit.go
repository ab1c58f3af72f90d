package series

import (
	"fmt"
	"math"
	"time"

	"forewarn/engine/arima"
	"forewarn/engine/auto"
	"forewarn/engine/transform"
)

// FitJob is a self-contained refit: a copy of the window and everything the
// model choice needs. Run is pure and may be called on any goroutine.
type FitJob struct {
	Topic    string
	Window   []float64 // raw units, NaN = missing; Window[len-1] is bucket End
	End      int64
	Settings Settings
	Warm     *auto.Warm
}

// FitResult is the outcome of a FitJob.
type FitResult struct {
	Choice  *auto.Choice
	Err     error
	Elapsed time.Duration
	End     int64
}

// FitJob returns the refit the series needs now. It copies the window.
func (s *Series) FitJob() *FitJob {
	j := &FitJob{
		Topic:    s.snap.Topic,
		Window:   append([]float64(nil), s.snap.Window...),
		End:      s.snap.WindowEnd,
		Settings: s.set,
	}
	// Warm starts serve the order search. A fixed order is fitted cold, so
	// that the daemon's model at a refit point is exactly the one an
	// offline fit of the same window gives.
	if s.model != nil && (s.set.Model == "" || s.set.Model == "auto") {
		j.Warm = &auto.Warm{Spec: s.model.Spec, Params: s.model.Params(), Transform: s.tr}
	}
	return j
}

// Run chooses and fits the model. It never panics on data; every problem
// comes back in FitResult.Err.
func (j *FitJob) Run() (r FitResult) {
	start := time.Now()
	r.End = j.End
	defer func() { r.Elapsed = time.Since(start) }()
	if countFinite(j.Window) < j.Settings.MinPoints {
		r.Err = fmt.Errorf("%w: %d values, need %d", ErrNoData, countFinite(j.Window), j.Settings.MinPoints)
		return r
	}
	constant, err := arima.ParseConstant(j.Settings.Constant)
	if err != nil {
		r.Err = fmt.Errorf("series: refit %q: %w", j.Topic, err)
		return r
	}
	c, err := auto.Select(j.Window, auto.Options{
		Period:    j.Settings.Period,
		Transform: j.Settings.Transform,
		Model:     j.Settings.Model,
		Constant:  constant,
		Warm:      j.Warm,
	})
	if err != nil {
		r.Err = fmt.Errorf("series: refit %q: %w", j.Topic, err)
		return r
	}
	r.Choice = c
	return r
}

// Install applies a finished refit. On success the new model replaces the
// old, its filter runs over the window, and the forecast for the bucket
// that triggered the refit is computed (Published). On failure the
// previous model is kept (Published, from it) or, without one, the series
// stays warming up (Warming); the failure is counted and its note kept.
func (s *Series) Install(r FitResult) (Outcome, error) {
	sn := &s.snap
	sn.SinceRefit = 0
	if r.Err == nil {
		r.Err = s.install(r.Choice, r.End)
	}
	if r.Err != nil {
		sn.RefitFailures++
		sn.LastRefitNote = r.Err.Error()
		if s.model == nil {
			return Warming, r.Err
		}
		s.forecast()
		return Published, r.Err
	}
	sn.LastRefitNote = r.Choice.Result.Note
	s.forecast()
	return Published, nil
}

func (s *Series) install(c *auto.Choice, end int64) error {
	m := c.Result.Model
	f, err := arima.NewFilter(m, s.set.Horizon)
	if err != nil {
		return fmt.Errorf("series: install model for %q: %w", s.snap.Topic, err)
	}
	for _, v := range s.snap.Window {
		w := math.NaN()
		if !math.IsNaN(v) {
			if x, err := c.Transform.Forward(v); err == nil {
				w = x
			}
		}
		f.Step(w)
	}
	s.model, s.filter, s.tr = m, f, c.Transform
	s.snap.Transform.Name = string(c.Transform.Name)
	s.snap.Transform.Lambda = c.Transform.Lambda
	s.snap.Transform.Loc = c.Transform.Loc
	s.snap.Transform.Scale = c.Transform.Scale
	sp := m.Spec
	s.snap.Model = &ModelSnapshot{
		Order:    [3]int{sp.P, sp.D, sp.Q},
		Seasonal: [3]int{sp.SP, sp.SD, sp.SQ},
		Period:   sp.Period,
		Mean:     sp.Mean,
		Drift:    sp.Drift,
		Params:   m.Params(),
		Sigma2:   m.Sigma2,
		LogLik:   c.Result.LogLik,
		AICc:     c.RawAICc,
		NObs:     c.Result.NObs,
		FittedAt: end,
	}
	s.setModelInfo()
	if s.cal != nil {
		s.warmCalibrator()
	}
	return nil
}

func (s *Series) setModelInfo() {
	ms := s.snap.Model
	s.fcStale = true
	s.mf.Model = ModelInfo{
		Spec:      s.model.Spec.Label(),
		Transform: s.tr.String(),
		FittedAt:  time.Unix(ms.FittedAt*s.set.StepSeconds, 0).UTC(),
		NObs:      ms.NObs,
		AICc:      ms.AICc,
	}
}

func transformFromSnapshot(t TransformSnapshot) (transform.Transform, error) {
	tr := transform.Transform{Name: transform.Name(t.Name), Lambda: t.Lambda, Loc: t.Loc, Scale: t.Scale}
	if _, err := transform.Parse(tr.String()); err != nil {
		return tr, err
	}
	return tr, nil
}

func modelFromSnapshot(ms *ModelSnapshot, horizon int) (*arima.Model, *arima.Filter, error) {
	spec := ms.Spec()
	if err := spec.Validate(); err != nil {
		return nil, nil, err
	}
	m, err := arima.NewModel(spec, ms.Params, ms.Sigma2)
	if err != nil {
		return nil, nil, err
	}
	f, err := arima.NewFilter(m, horizon)
	if err != nil {
		return nil, nil, err
	}
	if err := f.SetState(ms.Filter); err != nil {
		return nil, nil, err
	}
	return m, f, nil
}
