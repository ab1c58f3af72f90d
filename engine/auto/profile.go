package auto

import (
	"fmt"
	"math"

	"forewarn/engine/arima"
	"forewarn/engine/transform"
)

// Routes of a choice with several cycles (Choice.Route).
const (
	// RouteFourier: Fourier terms per cycle (or seasonal ARIMA terms for
	// one short cycle), dynamic harmonic regression.
	RouteFourier = "fourier"
	// RouteProfile: one profile column per cycle, the last cycle of its
	// MSTL seasonal component (arima.Profile), with non-seasonal ARIMA
	// errors: the decomposition-plus-ARIMA route as a regression with
	// ARIMA errors.
	RouteProfile = "profile"
	// TermsProfile marks a cycle carried by a profile column.
	TermsProfile = "profile"
)

// RouteScore is the holdout comparison that chose between the routes
// (package doc, "Choosing the route"): the mean absolute error on the raw
// scale of each route's forecasts over the holdout, NaN for a route that
// could not be fitted or forecast.
type RouteScore struct {
	Fourier, Profile float64
	Holdout          int // steps held out (the last ones of the series)
	Horizon          int // longest forecast lead scored
}

// profileRoute fits the profile route to s.y (package doc, "Choosing the
// route"): MSTL of the series on the model scale (the fixed transform, or
// none when the transform is automatic) at every cycle rounded to whole
// steps; the last cycle of each seasonal component, looked up by the
// phase of absolute time, becomes a profile column (arima.Profile); the
// automatic non-seasonal choice of Select runs on the MSTL-adjusted series
// (trend plus remainder); the profile coefficients are fixed at 1.
func (s *selector) profileRoute() (*Choice, error) {
	o := s.o
	n := len(s.y)
	tr := transform.Transform{Name: transform.None}
	if o.Transform != "auto" {
		t, err := transform.Parse(o.Transform)
		if err != nil {
			return nil, fmt.Errorf("%w: transform %q: %w", ErrBadOptions, o.Transform, err)
		}
		tr = transform.Freeze(t, s.y)
	}
	w := make([]float64, n)
	if err := tr.ForwardSlice(w, s.y); err != nil {
		return nil, fmt.Errorf("%w: %w", ErrDomain, err)
	}
	for i, v := range w {
		if math.IsNaN(v) {
			return nil, fmt.Errorf("%w: the profile route needs a complete series; value %d is missing", ErrBadOptions, i+1)
		}
	}
	periods := make([]int, len(o.Seasons))
	for i, L := range o.Seasons {
		periods[i] = int(math.Round(L / o.Step))
	}
	d, err := MSTL(w, periods)
	if err != nil {
		return nil, err
	}
	var cycles []float64
	var shapes [][]float64
	for i, L := range o.Seasons {
		for j, m := range d.Periods {
			if m != periods[i] {
				continue
			}
			sh, err := arima.LastCycleShape(d.Seasonal[j], o.Start, o.Step, L)
			if err != nil {
				return nil, fmt.Errorf("%w: %v", ErrNoModel, err)
			}
			cycles, shapes = append(cycles, L), append(shapes, sh)
			break
		}
	}
	if len(cycles) == 0 {
		return nil, fmt.Errorf("%w: no cycle has two full cycles of data for MSTL", ErrTooShort)
	}
	prof, err := arima.NewProfile(cycles, shapes)
	if err != nil {
		return nil, fmt.Errorf("%w: %v", ErrNoModel, err)
	}
	io := o
	io.Seasons, io.Period, io.Warm, io.Transform = nil, 0, nil, "none"
	if w := o.Warm; w != nil && w.Route == RouteProfile && w.Spec.NX <= len(w.Params) {
		// the ARIMA errors start from the previous choice
		ws := w.Spec
		ws.NX = 0
		io.Warm = &Warm{Spec: ws, Params: w.Params[:len(w.Params)-w.Spec.NX], Transform: transform.Transform{Name: transform.None}}
	}
	inner, err := Select(d.Adjusted(), io)
	if err != nil {
		return nil, err
	}
	im := inner.Result.Model
	spec := im.Spec
	spec.NX = len(cycles)
	params := append(im.Params(), constSlice(spec.NX, 1)...)
	m, err := arima.NewModel(spec, params, im.Sigma2)
	if err != nil {
		return nil, fmt.Errorf("%w: %v", ErrNoModel, err)
	}
	res := *inner.Result
	res.Model = m
	res.RegCov = nil
	res.StdErr = append(append([]float64(nil), inner.Result.StdErr...), constSlice(spec.NX, 0)...)
	ch := &Choice{Spec: spec, Transform: tr, Result: &res, RawAICc: math.NaN(), Tried: inner.Tried,
		Route: RouteProfile, Profile: prof, ProfileCycles: cycles, ProfileShapes: prof.Shapes(),
		Start: o.Start, Step: o.Step}
	ch.Seasons = make([]SeasonChoice, len(o.Seasons))
	for i, L := range o.Seasons {
		ch.Seasons[i] = SeasonChoice{Length: L, Steps: L / o.Step, Terms: TermsNone}
		for _, c := range cycles {
			if c == L {
				ch.Seasons[i].Terms = TermsProfile
			}
		}
	}
	return ch, nil
}

// Regressors returns the generator of the choice's regressors for
// arima.NewFilterX (Fourier or Profile), nil when it has none.
func (c *Choice) Regressors() arima.Regressors {
	switch {
	case c.Profile != nil:
		return c.Profile
	case c.Fourier != nil:
		return c.Fourier
	}
	return nil
}

// Filter returns the online filter of the choice on the model scale, with
// its regressors (from absolute time, the clock at Start) when it has any.
func (c *Choice) Filter(maxHorizon int) (*arima.Filter, error) {
	if g := c.Regressors(); g != nil {
		return arima.NewFilterX(c.Result.Model, maxHorizon, g, c.Start, c.Step)
	}
	return arima.NewFilter(c.Result.Model, maxHorizon)
}

// maxOrigins bounds the forecast origins of the holdout (a bound of our
// own, on the cost: at most maxOrigins·h forecast steps).
const maxOrigins = 64

// holdoutMAE scores a choice fitted to y[:origin] by rolling origins
// through the rest of y (Tashman 2000: rolling-origin evaluation, with the
// forecasts updated by each new observation and the parameters not
// re-estimated): at every origin o ≥ origin, spaced ⌈(len(y) −
// origin)/maxOrigins⌉ steps apart (every step for a holdout of at most
// maxOrigins steps), the forecasts of leads
// 1…min(h, len(y) − o) (the median on the raw scale, the inverse of the
// transform) are compared with the observations. It returns the mean
// absolute error over every scored lead; NaN when the series leaves the
// transform's domain or a forecast the inverse's.
func holdoutMAE(c *Choice, y []float64, origin, h int) float64 {
	w := make([]float64, len(y))
	if err := c.Transform.ForwardSlice(w, y); err != nil {
		return math.NaN()
	}
	f, err := c.Filter(h)
	if err != nil {
		return math.NaN()
	}
	f.Steps(w[:origin])
	mean, v := make([]float64, h), make([]float64, h)
	sum, cnt := 0.0, 0
	every := (len(y) - origin + maxOrigins - 1) / maxOrigins
	for o := origin; o < len(y); o++ {
		if (o-origin)%every != 0 {
			f.Step(w[o])
			continue
		}
		f.Forecast(mean, v)
		for k := 0; k < h && o+k < len(y); k++ {
			if math.IsNaN(y[o+k]) {
				continue
			}
			yk, ok := c.Transform.Inverse(mean[k])
			if !ok || math.IsNaN(yk) {
				return math.NaN()
			}
			sum += math.Abs(yk - y[o+k])
			cnt++
		}
		f.Step(w[o])
	}
	if cnt == 0 {
		return math.NaN()
	}
	return sum / float64(cnt)
}
