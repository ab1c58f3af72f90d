package series

import (
	"fmt"
	"math"
	"strconv"
	"strings"
	"time"

	"forewarn/engine/arima"
	"forewarn/engine/auto"
	"forewarn/engine/outlier"
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
	// Known are the effects of the model being replaced and SearchedTo
	// the last bucket its outlier search saw (0: none): the search starts
	// from them and looks for new effects only after SearchedTo less
	// outlierMargin (detect).
	Known      []OutlierFound
	SearchedTo int64
}

// FitResult is the outcome of a FitJob.
type FitResult struct {
	Choice *auto.Choice
	// Design is the model's regression columns (Choice.Result.Model.Beta
	// in the same order), Outliers the effects found among them, Cycles
	// the choice per cycle of Settings.Seasons.
	Design   []ColumnSet
	Outliers []OutlierFound
	Cycles   []CycleChoice
	// Searched: the outlier search ran to its end (found or not).
	Searched bool
	Err      error
	Elapsed  time.Duration
	End      int64
}

// Refit-time outlier search bounds (common practice, our own choice): the
// window needs outlierMinPoints observed values (Chen & Liu's procedure
// estimates the model first, and the critical value is set for series of
// 50 and more), the search covers the last outlierSpan buckets, at most
// outlierMax effects are kept and at most two detect–re-estimate rounds
// run.
const (
	outlierMinPoints = 100
	outlierMax       = 10
	outlierRounds    = 2
	outlierSpan      = 1000 // the most recent buckets searched
	outlierMargin    = 100  // buckets before the last refit's end searched again
)

// FitJob returns the refit the series needs now. It copies the window.
func (s *Series) FitJob() *FitJob {
	j := &FitJob{
		Topic:    s.snap.Topic,
		Window:   append([]float64(nil), s.snap.Window...),
		End:      s.snap.WindowEnd,
		Settings: s.set,
	}
	if ms := s.snap.Model; ms != nil && s.set.Outliers && ms.SearchedTo > 0 {
		// the last refit searched its window (detect): its effects are
		// known, and only the buckets since are new
		j.Known = append([]OutlierFound(nil), ms.Outliers...)
		j.SearchedTo = ms.SearchedTo
	}
	// Warm starts serve the order search. A fixed order is fitted cold, so
	// that the daemon's model at a refit point is exactly the one an
	// offline fit of the same window gives.
	if s.model != nil && (s.set.Model == "" || s.set.Model == "auto") {
		// β (Fourier pairs, outlier effects) is estimated afresh.
		sp := s.model.Spec
		sp.NX = 0
		p := s.model.Params()
		j.Warm = &auto.Warm{Spec: sp, Params: p[:len(p)-s.model.Spec.NX], Transform: s.tr}
		if ms := s.snap.Model; len(ms.Cycles) > 0 {
			// the route is kept (auto.Warm.Route)
			j.Warm.Route = auto.RouteFourier
			if len(ms.Design) > 0 && ms.Design[0].Kind == SetProfile {
				j.Warm.Route = auto.RouteProfile
			}
		}
		for _, c := range s.snap.Model.Cycles {
			j.Warm.Seasons = append(j.Warm.Seasons, auto.SeasonChoice{Length: c.Seconds,
				Steps: c.Seconds / float64(s.set.StepSeconds), Terms: c.Terms, K: c.K})
		}
	}
	return j
}

// cycles reports whether the refit chooses per cycle (model auto with
// seasons).
func (set *Settings) cycles() bool {
	return len(set.Seasons) > 0 && (set.Model == "" || set.Model == "auto")
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
	set := &j.Settings
	step := float64(set.StepSeconds)
	t0 := float64((j.End - int64(len(j.Window)) + 1) * set.StepSeconds)
	o := auto.Options{
		Period:    set.Period,
		Transform: set.Transform,
		Model:     set.Model,
		Constant:  constant,
		Warm:      j.Warm,
	}
	if set.cycles() {
		// As forewarn fit --seasons: the cycles in seconds, the phase of
		// every Fourier term from the bucket's start in data time.
		o.Period, o.Seasons, o.Step, o.Start = 0, set.Seasons, step, t0
	}
	c, err := auto.Select(j.Window, o)
	if err != nil {
		r.Err = fmt.Errorf("series: refit %q: %w", j.Topic, err)
		return r
	}
	r.Choice = c
	for _, sc := range c.Seasons {
		r.Cycles = append(r.Cycles, CycleChoice{Seconds: sc.Length, Terms: sc.Terms, K: sc.K})
	}
	var X [][]float64
	switch {
	case c.Profile != nil:
		// the profile route: one shape column per cycle, coefficient 1
		r.Design = append(r.Design, profileSet(c.ProfileCycles, c.ProfileShapes))
		X = c.Profile.Matrix(t0, step, len(j.Window))
	case c.Fourier != nil:
		v := []float64{step}
		for _, cy := range c.Cycles {
			v = append(v, cy.Seconds, float64(cy.K))
		}
		r.Design = append(r.Design, ColumnSet{Kind: SetFourier, Values: v})
		X = c.Fourier.Matrix(t0, step, len(j.Window))
	}
	if set.Outliers && countFinite(j.Window) >= outlierMinPoints {
		j.detect(&r, X)
	}
	return r
}

// detect looks for outliers in the recent part of the window under the
// chosen model and, when it finds any, adds their columns to the choice's
// model.
//
// Cost bound (our own simplification of Chen & Liu 1993's joint
// estimation): the search (outlier.Detect) runs on the last outlierSpan
// buckets of the window less the choice's seasonal part x_tᵀβ̂ (Fourier or
// profile), with the choice's ARIMA orders and constant, so that its fits
// are short and carry only the outlier columns (the joint search over
// 20 160 buckets with 40 columns took 20 s a refit). At a refit after one
// that searched (FitJob.Known, SearchedTo), the effects it found that are
// still in the span start in the model, as if found in an earlier round
// of the procedure, and are re-estimated and re-tested jointly with any
// new ones (Chen & Liu's stage II); new effects are sought only in the
// buckets after SearchedTo less outlierMargin (the margin judges again
// the last buckets the previous search saw with few values after them).
// What Chen & Liu's procedure keeps: its test statistics and critical
// value, the iterative detect–re-estimate rounds and the joint
// re-estimation that drops effects no longer significant; what it gives
// up: a search of older buckets under the new model. The model keeps the
// choice's coefficients and gains the effects' coefficients from the
// search's final fit. A failure keeps the choice as it is.
func (j *FitJob) detect(r *FitResult, X [][]float64) {
	c := r.Choice
	m := c.Result.Model
	nf := len(X)
	n := len(j.Window)
	off := max(0, n-outlierSpan)
	w := make([]float64, n-off)
	if err := c.Transform.ForwardSlice(w, j.Window[off:]); err != nil {
		return
	}
	for i := range w {
		for k, b := range m.Beta[:nf] {
			w[i] -= b * X[k][off+i]
		}
	}
	sp := m.Spec
	sp.NX = 0
	first := j.End - int64(n) + 1 + int64(off) // the bucket of w[0]
	opt := &outlier.Options{MaxOutliers: outlierMax, MaxIter: outlierRounds}
	if j.SearchedTo > 0 {
		for _, o := range j.Known {
			if o.Bucket >= first && o.Bucket <= j.End {
				opt.Known = append(opt.Known, outlier.Outlier{Kind: outlier.Kind(o.Kind), Index: int(o.Bucket - first)})
			}
		}
		opt.From = int(min(max(j.SearchedTo-outlierMargin+1-first, 0), int64(len(w))))
	}
	d, err := outlier.Detect(w, nil, sp, opt)
	if err != nil {
		return
	}
	r.Searched = true
	if len(d.Outliers) == 0 || d.Fit == nil {
		return
	}
	full := m.Spec
	full.NX = nf + len(d.Outliers)
	beta := d.Fit.Model.Beta
	params := append(m.Params(), beta...)
	nm, err := arima.NewModel(full, params, m.Sigma2)
	if err != nil {
		return
	}
	t0 := first
	v := []float64{d.Delta}
	for i, o := range d.Outliers {
		v = append(v, float64(o.Kind), float64(t0+int64(o.Index)))
		r.Outliers = append(r.Outliers, OutlierFound{Kind: uint8(o.Kind), Bucket: t0 + int64(o.Index), Size: beta[i], Tau: o.Tau})
	}
	r.Design = append(r.Design, ColumnSet{Kind: SetEffects, Values: v})
	res := *c.Result
	res.Model = nm
	res.Note = joinNote(res.Note, fmt.Sprintf("%d outliers in the last %d buckets", len(d.Outliers), n-off))
	res.StdErr, res.RegCov, res.Residuals = nil, nil, nil
	ch := *c
	ch.Result, ch.Spec = &res, full
	r.Choice = &ch
}

func joinNote(a, b string) string {
	if a == "" {
		return b
	}
	return a + "; " + b
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
		r.Err = s.install(&r)
	}
	if r.Err != nil {
		sn.RefitFailures++
		sn.LastRefitNote = r.Err.Error()
	} else {
		sn.LastRefitNote = r.Choice.Result.Note
	}
	reissue := s.reissue // see ObserveIn: this origin's forecast is already out
	s.reissue = false
	switch {
	case s.model == nil:
		return Warming, r.Err
	case reissue:
		s.forecast()
		return Absorbed, r.Err
	}
	s.forecast()
	return Published, r.Err
}

func (s *Series) install(r *FitResult) error {
	c, end := r.Choice, r.End
	m := c.Result.Model
	f, d, err := newFilter(m, r.Design, s.set)
	if err != nil {
		return fmt.Errorf("series: install model for %q: %w", s.snap.Topic, err)
	}
	t0 := s.snap.WindowEnd - int64(len(s.snap.Window)) + 1
	for i, v := range s.snap.Window {
		w := math.NaN()
		if !math.IsNaN(v) {
			if x, err := c.Transform.Forward(v); err == nil {
				w = x
			}
		}
		f.StepAt(float64((t0+int64(i))*s.set.StepSeconds), w)
	}
	s.model, s.filter, s.tr, s.design = m, f, c.Transform, d
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
		NX:       sp.NX,
		Design:   r.Design,
		Cycles:   r.Cycles,
		Outliers: r.Outliers,
	}
	if r.Searched {
		s.snap.Model.SearchedTo = end
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
		Spec:      modelLabel(s.model.Spec, ms.Design),
		Transform: s.tr.String(),
		FittedAt:  time.Unix(ms.FittedAt*s.set.StepSeconds, 0).UTC(),
		NObs:      ms.NObs,
		AICc:      ms.AICc,
	}
}

// modelLabel is the model's label (arima.Spec.Label); a profile-route
// model says so: "ARIMA 1,0,1 + mean + profile of 2 cycles" (its other
// regression columns, outlier effects, counted after it).
func modelLabel(sp arima.Spec, sets []ColumnSet) string {
	if len(sets) == 0 || sets[0].Kind != SetProfile {
		return sp.Label()
	}
	cycles, _, err := profileValues(sets[0].Values)
	if err != nil {
		return sp.Label()
	}
	others := sp.NX - len(cycles)
	sp.NX = 0
	l := sp.Label() + " + profile of " + strconv.Itoa(len(cycles)) + " cycle"
	if len(cycles) > 1 {
		l += "s"
	}
	if others > 0 {
		l += strings.TrimPrefix(arima.Spec{NX: others}.Label(), arima.Spec{}.Label())
	}
	return l
}

func transformFromSnapshot(t TransformSnapshot) (transform.Transform, error) {
	tr := transform.Transform{Name: transform.Name(t.Name), Lambda: t.Lambda, Loc: t.Loc, Scale: t.Scale}
	if _, err := transform.Parse(tr.String()); err != nil {
		return tr, err
	}
	return tr, nil
}

// newFilter returns the online filter of m with the regressors of the
// design (none: a plain filter), its check on when the settings ask. The
// regressors' clock is set by each StepAt (or a restored state).
func newFilter(m *arima.Model, sets []ColumnSet, set Settings) (*arima.Filter, *design, error) {
	var f *arima.Filter
	var d *design
	var err error
	if m.Spec.NX > 0 {
		if d, err = newDesign(sets, float64(set.StepSeconds), set.Horizon); err != nil {
			return nil, nil, err
		}
		f, err = arima.NewFilterX(m, set.Horizon, d, 0, float64(set.StepSeconds))
	} else if len(sets) > 0 {
		err = fmt.Errorf("series: %d column sets for a model without regressors", len(sets))
	} else {
		f, err = arima.NewFilter(m, set.Horizon)
	}
	if err != nil {
		return nil, nil, err
	}
	if set.Guard {
		if err := f.SetGuard(arima.DefaultGuard); err != nil {
			return nil, nil, err
		}
	}
	return f, d, nil
}

// modelFromSnapshot rebuilds the model and its filter, with the check's
// state when the record has one and the settings run the check (a record
// made without it starts the check afresh).
func modelFromSnapshot(ms *ModelSnapshot, guard []float64, set Settings) (*arima.Model, *arima.Filter, *design, error) {
	spec := ms.Spec()
	if err := spec.Validate(); err != nil {
		return nil, nil, nil, err
	}
	m, err := arima.NewModel(spec, ms.Params, ms.Sigma2)
	if err != nil {
		return nil, nil, nil, err
	}
	f, d, err := newFilter(m, ms.Design, set)
	if err != nil {
		return nil, nil, nil, err
	}
	if d != nil && d.NumRegressors() != spec.NX {
		return nil, nil, nil, fmt.Errorf("series: the design has %d columns, the model %d", d.NumRegressors(), spec.NX)
	}
	if err := f.SetState(ms.Filter); err != nil {
		return nil, nil, nil, err
	}
	if set.Guard && len(guard) > 0 {
		if err := f.SetGuardState(guard); err != nil {
			return nil, nil, nil, err
		}
	}
	return m, f, d, nil
}
