package auto

import (
	"math"
	"testing"

	"forewarn/engine/arima"
)

// minuteTruth is the known truth of the seeded one-minute series: a
// level, a daily cycle of two harmonics, a weekly cycle of one harmonic,
// and AR(1) errors φ = 0.6, σ = 1 (a property test: seeded simulation
// with known truth).
var minuteTruth = struct {
	level                        float64
	dS1, dC1, dS2, dC2, wS1, wC1 float64
	phi                          float64
}{200, 8, -5, 0, 3, 6, 2, 0.6}

// minuteSeries returns n one-minute values starting at data time t0
// (seconds) with daily (86 400 s) and weekly (604 800 s) cycles.
func minuteSeries(t testing.TB, n int, t0 float64) []float64 {
	m := mustModel(t, "1,0,0", 0, false, []float64{minuteTruth.phi}, 1)
	u := simulate(t, m, n, 0, 14)
	tr := minuteTruth
	y := make([]float64, n)
	for i := range y {
		tt := t0 + 60*float64(i)
		a := 2 * math.Pi * math.Mod(tt, 86400) / 86400
		b := 2 * math.Pi * math.Mod(tt, 604800) / 604800
		y[i] = tr.level + tr.dS1*math.Sin(a) + tr.dC1*math.Cos(a) + tr.dS2*math.Sin(2*a) + tr.dC2*math.Cos(2*a) +
			tr.wS1*math.Sin(b) + tr.wC1*math.Cos(b) + u[i]
	}
	return y
}

const day, week = 86400.0, 604800.0

// TestSeasonsChoiceMinute: 14 days of one-minute data with daily and
// weekly cycles. Both cycles are too long for seasonal ARIMA terms, so
// both get Fourier terms; the daily K covers the two true harmonics, and
// the regression coefficients of the true harmonics are recovered within
// 4 standard errors (property test, seeded simulation with known truth).
func TestSeasonsChoiceMinute(t *testing.T) {
	if testing.Short() {
		t.Skip("a 20 160-point search")
	}
	const t0 = 1.7e9
	y := minuteSeries(t, 20160, t0)
	c, err := Select(y, Options{Seasons: []float64{day, week}, Step: 60, Start: t0, Transform: "none"})
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("%s, seasons %+v, AICc %.2f, %d fits", c.Spec.Label(), c.Seasons, c.RawAICc, len(c.Tried))
	if len(c.Seasons) != 2 || c.Seasons[0].Terms != TermsFourier || c.Seasons[1].Terms != TermsFourier {
		t.Fatalf("seasons %+v: want Fourier terms for both cycles", c.Seasons)
	}
	if c.Seasons[0].K < 2 {
		t.Errorf("daily K = %d: the truth has two harmonics", c.Seasons[0].K)
	}
	if c.Fourier == nil || c.Fourier.NumRegressors() != c.Spec.NX || len(c.Result.Model.Beta) != c.Spec.NX {
		t.Fatalf("generator/regressors mismatch: NX %d", c.Spec.NX)
	}
	names := c.Fourier.Names()
	want := map[string]float64{"S1-86400": minuteTruth.dS1, "C1-86400": minuteTruth.dC1, "C2-86400": minuteTruth.dC2,
		"S1-604800": minuteTruth.wS1, "C1-604800": minuteTruth.wC1}
	k0 := 0
	if c.Spec.Mean || c.Spec.Drift {
		k0 = 1
	}
	kc := c.Spec.NX + k0
	for j, nm := range names {
		tv, ok := want[nm]
		if !ok {
			continue
		}
		b := c.Result.Model.Beta[j]
		se := math.Sqrt(c.Result.RegCov[(j+k0)*kc+j+k0])
		if math.Abs(b-tv) > 4*se+1e-9 {
			t.Errorf("%s = %.3f ± %.3f, truth %.3f", nm, b, se, tv)
		}
		delete(want, nm)
	}
	if len(want) > 0 && c.Spec.D == 0 {
		t.Errorf("true terms missing from the model: %v (columns %v)", want, names)
	}
	// The generator's columns are the columns the model was fitted on: the
	// filter from absolute time reproduces the fit's log-likelihood.
	X := c.Fourier.Matrix(t0, 60, len(y))
	ll, _, _, err := arima.LogLikX(y, X, c.Result.Model)
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(ll-c.Result.LogLik) > 1e-6*math.Abs(ll) {
		t.Errorf("log-likelihood from the generator %.6f, fit %.6f", ll, c.Result.LogLik)
	}
}
