package auto

import (
	"errors"
	"math"
	"strings"
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

// TestPoolMatchesFourier: the columns the search selects for a K vector
// are those of arima.NewFourier for the same cycles and K, in the same
// order, including the pruning of a weekly harmonic that repeats a daily
// one and of the all-zero Nyquist sine (half-hourly data: 48 and 336
// steps; the column rules are R forecast 8.20 fourier()'s, checked against
// R in engine/arima's xreg tests).
func TestPoolMatchesFourier(t *testing.T) {
	o := Options{Seasons: []float64{day, week}, Step: 1800, Start: 1800, MaxARIMAPeriod: -1}
	if err := o.normalise(); err != nil {
		t.Fatal(err)
	}
	cs, err := o.splitCycles()
	if err != nil {
		t.Fatal(err)
	}
	p := newPool(&o, cs)
	const n = 700
	X := p.columns(n)
	for _, K := range [][]int{{10, 10}, {1, 7}, {0, 10}, {3, 0}, {10, 1}} {
		sel := p.selected(K)
		gen, err := arima.NewFourier(p.cycles(K), o.Step)
		if err != nil {
			t.Fatal(err)
		}
		if gen.NumRegressors() != len(sel) {
			t.Fatalf("K %v: %d columns selected, NewFourier makes %d (%v)", K, len(sel), gen.NumRegressors(), gen.Names())
		}
		G := gen.Matrix(o.Start, o.Step, n)
		for j, col := range sel {
			for i := 0; i < n; i++ {
				if math.Abs(X[col][i]-G[j][i]) > 1e-9 {
					t.Fatalf("K %v: column %d (%s) row %d: %v, NewFourier %v", K, j, gen.Names()[j], i, X[col][i], G[j][i])
				}
			}
		}
	}
}

// TestSplitCycles: a single whole cycle of at most MaxARIMAPeriod steps
// gets seasonal ARIMA terms; with several cycles every cycle gets Fourier
// terms with K ≤ min(MaxK, ⌊m/2⌋) (FPP3 §10.5, §12.1), as does a cycle
// that is not a whole number of steps or is longer.
func TestSplitCycles(t *testing.T) {
	for _, tc := range []struct {
		seasons []float64
		step    float64
		arima   int
		kmax    []int
	}{
		{[]float64{day, week}, 1800, 0, []int{10, 10}},
		{[]float64{day, week}, 60, 0, []int{10, 10}},
		{[]float64{16.5 * 60, day}, 60, 0, []int{8, 10}},
		{[]float64{7}, 0, 7, nil},
		{[]float64{5.5, 7}, 0, 0, []int{2, 3}},
		{[]float64{400}, 0, 0, []int{10}},
	} {
		o := Options{Seasons: tc.seasons, Step: tc.step}
		if err := o.normalise(); err != nil {
			t.Fatal(err)
		}
		cs, err := o.splitCycles()
		if err != nil {
			t.Fatal(err)
		}
		if cs.period != tc.arima || len(cs.kmax) != len(tc.kmax) {
			t.Errorf("%v step %v: ARIMA period %d, K max %v; want %d, %v", tc.seasons, tc.step, cs.period, cs.kmax, tc.arima, tc.kmax)
			continue
		}
		for i := range cs.kmax {
			if cs.kmax[i] != tc.kmax[i] {
				t.Errorf("%v: K max %v, want %v", tc.seasons, cs.kmax, tc.kmax)
			}
		}
	}
}

// TestSeasonsBadOptions: a cycle shorter than two steps, and cycles a
// fixed model cannot use, are clear errors (issue 12, bad input).
func TestSeasonsBadOptions(t *testing.T) {
	y := minuteSeries(t, 300, 0)
	for _, tc := range []struct {
		o    Options
		want string
	}{
		{Options{Seasons: []float64{90}, Step: 60}, "at least 2"},
		{Options{Seasons: []float64{-5}, Step: 60}, "positive"},
		{Options{Seasons: []float64{day}, Step: 60, Model: "1,0,1"}, "no seasonal orders"},
		{Options{Seasons: []float64{600, 1200}, Step: 60, Model: "0,1,1 x 0,1,1"}, "uses one cycle"},
		{Options{Seasons: []float64{630}, Step: 60, Model: "0,1,1 x 0,1,1"}, "whole number of steps"},
	} {
		_, err := Select(y, tc.o)
		if err == nil || !errors.Is(err, ErrBadOptions) || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%+v: error %v, want ErrBadOptions naming %q", tc.o.Seasons, err, tc.want)
		}
	}
}

// TestSeasonsWarm: a warm refit on 60 more minutes keeps the transform,
// the differencing and each cycle's K, records them, and tries at most the
// ±1 neighbours of p and q (package doc, "Several cycles").
func TestSeasonsWarm(t *testing.T) {
	if testing.Short() {
		t.Skip("a 20 160-point search")
	}
	const t0 = 1.7e9
	y := minuteSeries(t, 20160, t0)
	o := Options{Seasons: []float64{day, week}, Step: 60, Start: t0 + 60*60, Transform: "none"}
	c, err := Select(y[60:], o)
	if err != nil {
		t.Fatal(err)
	}
	w := &Warm{Spec: c.Spec, Params: c.Result.Model.Params(), Transform: c.Transform, Seasons: c.Seasons}
	o.Start, o.Warm = t0, w
	c2, err := Select(y, o)
	if err != nil {
		t.Fatal(err)
	}
	for i := range c.Seasons {
		if c2.Seasons[i] != c.Seasons[i] {
			t.Errorf("cycle %d: warm %+v, cold %+v", i, c2.Seasons[i], c.Seasons[i])
		}
	}
	if c2.Spec.D != c.Spec.D || c2.Spec.NX != c.Spec.NX || c2.Transform.String() != c.Transform.String() {
		t.Errorf("warm %s %s, cold %s %s", c2.Spec.Label(), c2.Transform, c.Spec.Label(), c.Transform)
	}
	if len(c2.Tried) > 7 {
		t.Errorf("warm refit tried %d fits, want at most 7", len(c2.Tried))
	}
	if math.Abs(c2.Result.Model.Beta[0]-c.Result.Model.Beta[0]) > 0.5 {
		t.Errorf("first coefficient moved from %.3f to %.3f: the phase did not follow the data time", c.Result.Model.Beta[0], c2.Result.Model.Beta[0])
	}
}
