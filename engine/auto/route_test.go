package auto

import (
	"math"
	"testing"

	"forewarn/engine/arima"
	"forewarn/engine/internal/refdata"
)

// TestRouteProfileTaylor: on taylor (R forecast 8.20's half-hourly demand,
// cycles 48 and 336) Select compares its two routes on the last week and
// takes the profile route, whose holdout error is less than half the
// Fourier route's (package doc, "Choosing the route"; the accuracy against
// R is TestTaylorAgainstR). The profile choice is one mechanism with the
// regression with ARIMA errors: its forecast equals the ARIMA part's
// forecast of the series less the profile columns, plus the columns at the
// future times. A warm refit keeps the route without a new comparison.
func TestRouteProfileTaylor(t *testing.T) {
	if testing.Short() {
		t.Skip("two automatic choices on 3 984 points")
	}
	x := refdata.Dataset(t, "taylor")
	y := x[:3984]
	c, err := Select(y, Options{Seasons: []float64{48, 336}, Start: 1})
	if err != nil {
		t.Fatal(err)
	}
	if c.Route != RouteProfile || c.Profile == nil || c.Score == nil {
		t.Fatalf("route %q, profile %v, score %+v: want the profile route chosen by the holdout", c.Route, c.Profile != nil, c.Score)
	}
	t.Logf("holdout MAE: Fourier %.1f, profile %.1f (%d steps, leads ≤ %d); errors %s", c.Score.Fourier, c.Score.Profile, c.Score.Holdout, c.Score.Horizon, c.Spec.Label())
	if !(c.Score.Profile < 0.5*c.Score.Fourier) || c.Score.Holdout != 336 || c.Score.Horizon != 48 {
		t.Errorf("score %+v: want holdout 336, leads 48, profile below half of Fourier", c.Score)
	}
	if len(c.ProfileCycles) != 2 || len(c.ProfileShapes[0]) != 48 || len(c.ProfileShapes[1]) != 336 || c.Spec.NX != 2 {
		t.Fatalf("profile cycles %v, shapes %d/%d, NX %d", c.ProfileCycles, len(c.ProfileShapes[0]), len(c.ProfileShapes[1]), c.Spec.NX)
	}
	for _, b := range c.Result.Model.Beta {
		if b != 1 {
			t.Fatalf("profile coefficients %v: want 1", c.Result.Model.Beta)
		}
	}
	const h = 48
	f, err := c.Filter(h)
	if err != nil {
		t.Fatal(err)
	}
	f.Steps(y)
	mean, v := make([]float64, h), make([]float64, h)
	f.Forecast(mean, v)
	// the same by hand: ARIMA part on y less the columns
	m0 := *c.Result.Model
	m0.Spec.NX, m0.Beta = 0, nil
	g, err := arima.NewFilter(&m0, h)
	if err != nil {
		t.Fatal(err)
	}
	X := c.Profile.Matrix(1, 1, len(y)+h)
	for i, v := range y {
		g.Step(v - X[0][i] - X[1][i])
	}
	m2, v2 := make([]float64, h), make([]float64, h)
	g.Forecast(m2, v2)
	for k := range mean {
		want := m2[k] + X[0][len(y)+k] + X[1][len(y)+k]
		if math.Abs(mean[k]-want) > 1e-6*math.Abs(want) || math.Abs(v[k]-v2[k]) > 1e-9*v2[k] {
			t.Fatalf("lead %d: forecast %v (variance %v), by hand %v (%v)", k+1, mean[k], v[k], want, v2[k])
		}
	}
	w, err := Select(x[:4032], Options{Seasons: []float64{48, 336}, Start: 1, Warm: c.warm()})
	if err != nil {
		t.Fatal(err)
	}
	if w.Route != RouteProfile || w.Score != nil || len(w.ProfileShapes) != 2 {
		t.Errorf("warm refit: route %q, score %+v: want the profile route kept, no comparison", w.Route, w.Score)
	}
}

// TestRouteSkipped: with a missing value (MSTL needs a complete series) or
// too short a series (two longest cycles and a step before the holdout)
// the comparison is not made and the Fourier route is taken (package doc,
// "Choosing the route").
func TestRouteSkipped(t *testing.T) {
	if testing.Short() {
		t.Skip("two automatic choices")
	}
	x := refdata.Dataset(t, "taylor")
	y := append([]float64(nil), x[:1000]...)
	c, err := Select(y, Options{Seasons: []float64{48, 336}, Start: 1, MaxK: 3})
	if err != nil {
		t.Fatal(err)
	}
	if c.Route != RouteFourier || c.Score != nil {
		t.Errorf("1 000 values (not more than 336 + 2·336): route %q, score %+v: want Fourier, no comparison", c.Route, c.Score)
	}
	y = append([]float64(nil), x[:1400]...)
	y[700] = math.NaN()
	c, err = Select(y, Options{Seasons: []float64{48, 336}, Start: 1, MaxK: 3})
	if err != nil {
		t.Fatal(err)
	}
	if c.Route != RouteFourier || c.Score != nil {
		t.Errorf("a missing value: route %q, score %+v: want Fourier, no comparison", c.Route, c.Score)
	}
}
