package arima

import (
	"errors"
	"math"
	"strconv"
	"testing"

	"forewarn/engine/internal/refdata"
)

// xCase is one reference fit from testdata/r/xreg_refs.json, written by
// testdata/r/xreg_refs.R with R 4.2.2 stats::arima(xreg = fourier(...),
// method = "ML"), predict.Arima(newxreg = ...) and R forecast 8.20
// fourier().
type xCase struct {
	ID          string    `json:"id"`
	Data        string    `json:"data"`
	Transform   string    `json:"transform"`
	First       int       `json:"first"`
	Holes       []int     `json:"holes"`
	Periods     []float64 `json:"periods"`
	K           []int     `json:"K"`
	Order       []int     `json:"order"`
	Mean        bool      `json:"mean"`
	Drift       bool      `json:"drift"`
	H           int       `json:"h"`
	XNames      []string  `json:"xreg_names"`
	XFirst      []float64 `json:"xreg_first"`
	XLast       []float64 `json:"xreg_last"`
	NewXLast    []float64 `json:"newxreg_last"`
	CoefNames   []string  `json:"coef_names"`
	Coef        []float64 `json:"coef"`
	CoefSE      []float64 `json:"coef_se"`
	Sigma2      float64   `json:"sigma2"`
	LogLik      float64   `json:"loglik"`
	NObs        int       `json:"nobs"`
	Convergence int       `json:"convergence"`
	Forecast    []float64 `json:"forecast"`
	ForecastSE  []float64 `json:"forecast_se"`
}

type xRefs struct {
	Cases   []xCase `json:"cases"`
	Fourier struct {
		Periods     []float64   `json:"periods"`
		K           []int       `json:"K"`
		Names       []string    `json:"names"`
		Rows        []int       `json:"rows"`
		Values      [][]float64 `json:"values"`
		FutureRows  []int       `json:"future_rows"`
		Future      [][]float64 `json:"future"`
		SeriesLen   int         `json:"-"`
		SeriesStart float64     `json:"-"`
	} `json:"fourier"`
}

func loadXRefs(t testing.TB) xRefs {
	t.Helper()
	var doc xRefs
	refdata.JSON(t, "r/xreg_refs.json", &doc)
	if len(doc.Cases) == 0 {
		t.Fatal("no cases in r/xreg_refs.json")
	}
	return doc
}

func (c xCase) series(t testing.TB) []float64 {
	y := refdata.Dataset(t, c.Data)
	if c.First > 0 {
		y = y[:c.First]
	}
	for _, h := range c.Holes {
		y[h-1] = math.NaN()
	}
	if c.Transform == "log" {
		for i, v := range y {
			y[i] = math.Log(v)
		}
	}
	return y
}

// fourierOf builds the generator of the case's cycles on a clock of one
// time unit per step, so that observation i (1-based) is at time i: the
// origin of R's fourier() (see Fourier).
func fourierOf(t testing.TB, periods []float64, K []int) *Fourier {
	t.Helper()
	cyc := make([]Cycle, len(periods))
	for i, p := range periods {
		cyc[i] = Cycle{Seconds: p, K: K[i]}
	}
	f, err := NewFourier(cyc, 1)
	if err != nil {
		t.Fatal(err)
	}
	return f
}

// TestXRegAgainstR checks regression with ARIMA errors and Fourier terms
// against R 4.2.2 stats::arima(xreg = forecast::fourier(x, K)) (values in
// testdata/r/xreg_refs.json, made by testdata/r/xreg_refs.R): the
// log-likelihood within 0.01, every coefficient within 0.01 (the Fourier
// coefficients of the taylor case, in megawatts with R standard errors of
// about 100, within 0.01 standard errors), the forecasts within 2 % of R's
// standard error and the standard errors with β known within 2 % of R's
// (predict.Arima leaves β's uncertainty out; SEReg, which includes it, must
// not be smaller).
func TestXRegAgainstR(t *testing.T) {
	doc := loadXRefs(t)
	for _, c := range doc.Cases {
		c := c
		t.Run(c.ID, func(t *testing.T) {
			if c.Convergence != 0 {
				t.Fatalf("R did not converge (code %d)", c.Convergence)
			}
			y := c.series(t)
			n := len(y)
			fg := fourierOf(t, c.Periods, c.K)
			X := fg.Matrix(1, 1, n)
			Xf := fg.Matrix(float64(n+1), 1, c.H)
			off := 0
			if c.Drift {
				off = 1
			}
			if got, want := fg.NumRegressors(), len(c.XNames)-off; got != want {
				t.Fatalf("%d Fourier columns, R %d (%v)", got, want, c.XNames)
			}
			for j := 0; j < fg.NumRegressors(); j++ {
				for _, p := range []struct {
					got, want float64
					where     string
				}{{X[j][0], c.XFirst[j+off], "first row"}, {X[j][n-1], c.XLast[j+off], "last row"}, {Xf[j][c.H-1], c.NewXLast[j+off], "last future row"}} {
					if math.Abs(p.got-p.want) > 1e-9 {
						t.Errorf("column %s, %s: %v, R fourier() %v", c.XNames[j+off], p.where, p.got, p.want)
					}
				}
			}
			spec := Spec{P: c.Order[0], D: c.Order[1], Q: c.Order[2], Mean: c.Mean, Drift: c.Drift, NX: fg.NumRegressors()}
			res, err := FitX(y, X, spec, nil)
			if err != nil {
				t.Fatal(err)
			}
			if !res.Converged {
				t.Errorf("not converged: %s", res.Note)
			}
			if d := res.LogLik - c.LogLik; math.Abs(d) > 0.01 {
				t.Errorf("loglik %.6f, R %.6f (diff %.2g)", res.LogLik, c.LogLik, d)
			}
			if res.NObs != c.NObs {
				t.Errorf("nobs %d, R %d", res.NObs, c.NObs)
			}
			par := res.Model.Params()
			if len(par) != len(c.Coef) {
				t.Fatalf("%d coefficients, R %d (%v)", len(par), len(c.Coef), c.CoefNames)
			}
			maxAbs, maxSE := 0.0, 0.0 // largest difference: absolute (se ≤ 1), in R standard errors (se > 1)
			for i, v := range par {
				tol := 0.01
				d := math.Abs(v - c.Coef[i])
				if c.CoefSE[i] > 1 {
					tol = 0.01 * c.CoefSE[i]
					maxSE = math.Max(maxSE, d/c.CoefSE[i])
				} else {
					maxAbs = math.Max(maxAbs, d)
				}
				if d > tol {
					t.Errorf("%s = %.6f, R %.6f (diff %.2g, tolerance %.2g)", c.CoefNames[i], v, c.Coef[i], d, tol)
				}
			}
			fc, err := ForecastX(y, X, Xf, res, c.H)
			if err != nil {
				t.Fatal(err)
			}
			maxMean, maxFSE := 0.0, 0.0
			for k := 0; k < c.H; k++ {
				dm := math.Abs(fc.Mean[k]-c.Forecast[k]) / c.ForecastSE[k]
				ds := math.Abs(fc.SE[k]/c.ForecastSE[k] - 1)
				maxMean, maxFSE = math.Max(maxMean, dm), math.Max(maxFSE, ds)
				if dm > 0.02 {
					t.Errorf("h=%d: forecast %.6f, R %.6f: %.3f standard errors apart", k+1, fc.Mean[k], c.Forecast[k], dm)
				}
				if ds > 0.02 {
					t.Errorf("h=%d: se %.6f, R %.6f", k+1, fc.SE[k], c.ForecastSE[k])
				}
				if fc.SEReg[k] < fc.SE[k] {
					t.Errorf("h=%d: se with β's uncertainty %.6f below the se with β known %.6f", k+1, fc.SEReg[k], fc.SE[k])
				}
			}
			t.Logf("loglik diff %.2g, max coef diff %.2g (se ≤ 1) / %.2g se (se > 1), max forecast diff %.2g se, max se rel diff %.2g, SEReg/SE at h=1 %.4f, h=%d %.4f",
				res.LogLik-c.LogLik, maxAbs, maxSE, maxMean, maxFSE, fc.SEReg[0]/fc.SE[0], c.H, fc.SEReg[c.H-1]/fc.SE[c.H-1])
		})
	}
}

// TestFourierAgainstR checks the columns of NewFourier for the cycles 48
// and 336 with K = 10 each against R forecast 8.20 fourier(taylor,
// K = c(10, 10)) (testdata/r/xreg_refs.json): the same 38 columns in the
// same order (harmonic 7 of the weekly cycle is harmonic 1 of the daily
// one and is left out), the same values at rows 1, 2, 47, …, 4032 and at
// the first and last future rows, to 1e-9. R counts time from 1 at the
// first observation; here observation i is at time i.
func TestFourierAgainstR(t *testing.T) {
	fr := loadXRefs(t).Fourier
	fg := fourierOf(t, fr.Periods, fr.K)
	names := fg.Names()
	if len(names) != len(fr.Names) {
		t.Fatalf("%d columns %v, R %d %v", len(names), names, len(fr.Names), fr.Names)
	}
	for j, nm := range fr.Names {
		// R labels S<k>-<round(period)>; ours use the cycle length as given.
		if names[j] != nm {
			t.Errorf("column %d: %s, R %s", j+1, names[j], nm)
		}
	}
	row := make([]float64, fg.NumRegressors())
	check := func(tm float64, want []float64, what string) {
		fg.Regressors(row, tm)
		for j, w := range want {
			if math.Abs(row[j]-w) > 1e-9 {
				t.Errorf("%s, column %s: %.15f, R %.15f", what, fr.Names[j], row[j], w)
			}
		}
	}
	for i, r := range fr.Rows {
		check(float64(r), fr.Values[i], "row "+itoa(r))
	}
	const n = 4032 // length of taylor
	for i, r := range fr.FutureRows {
		check(float64(n+r), fr.Future[i], "future row "+itoa(r))
	}
}

func itoa(i int) string { return strconv.Itoa(i) }

// TestFourierAbsoluteTime is a property test: the terms depend on the
// absolute time alone. At Unix times of 2024 (t ≈ 1.7e9 s), with a step
// of 7 s that does not divide the day, each value equals the direct
// closed form sin/cos(2π k (t mod L)/L) to 1e-12, and a gap of any length
// lands on the same values as the uninterrupted clock.
func TestFourierAbsoluteTime(t *testing.T) {
	const day, week = 86400.0, 604800.0
	fg, err := NewFourier([]Cycle{{Seconds: day, K: 10}, {Seconds: week, K: 10}}, 7)
	if err != nil {
		t.Fatal(err)
	}
	if fg.NumRegressors() != 38 {
		t.Fatalf("%d columns, want 38 (20 + 20 less the duplicated weekly harmonic 7)", fg.NumRegressors())
	}
	row := make([]float64, fg.NumRegressors())
	t0 := 1717171717.0
	for i := 0; i < 5000; i += 37 {
		tm := t0 + 7*float64(i*i)
		fg.Regressors(row, tm)
		j := 0
		for _, c := range []struct {
			L float64
			K int
		}{{day, 10}, {week, 10}} {
			for k := 1; k <= c.K; k++ {
				if c.L == week && k == 7 {
					continue
				}
				ph := 2 * math.Pi * float64(k) * math.Mod(tm, c.L) / c.L
				if math.Abs(row[j]-math.Sin(ph)) > 1e-12 || math.Abs(row[j+1]-math.Cos(ph)) > 1e-12 {
					t.Fatalf("t=%v, harmonic %d of %v: (%v, %v), closed form (%v, %v)", tm, k, c.L, row[j], row[j+1], math.Sin(ph), math.Cos(ph))
				}
				j += 2
			}
		}
	}
	// LinearPath (rotations from t0) equals the row-by-row sum from
	// absolute time over a day of one-minute steps.
	beta := make([]float64, fg.NumRegressors())
	for i := range beta {
		beta[i] = math.Cos(float64(i))
	}
	path := make([]float64, 1440)
	fg.LinearPath(path, beta, t0, 60)
	for k, v := range path {
		fg.Regressors(row, t0+60*float64(k))
		if w := dot(beta, row); math.Abs(v-w) > 1e-11 {
			t.Fatalf("step %d: path %v, row by row %v", k, v, w)
		}
	}
}

// TestFilterXPhaseAfterRestart is a property test of the online filter
// with Fourier regressors on absolute time: a filter stepped through a
// series with a gap (missing buckets), and a second one saved mid-way by
// AppendState and restored by SetState into a filter built with a wrong
// start time, give the same forecasts bit for bit; a third, built afresh at
// the time of a later bucket (a handover without state), adds the same
// regression part x_tᵀβ at the same future times.
func TestFilterXPhaseAfterRestart(t *testing.T) {
	const step = 60.0
	fg, err := NewFourier([]Cycle{{Seconds: 86400, K: 3}, {Seconds: 7 * 86400, K: 2}}, step)
	if err != nil {
		t.Fatal(err)
	}
	beta := make([]float64, fg.NumRegressors())
	for i := range beta {
		beta[i] = float64(i+1) * 0.5
	}
	spec := Spec{P: 1, Q: 1, Mean: true, NX: fg.NumRegressors()}
	m, err := NewModel(spec, append([]float64{0.6, 0.2, 10}, beta...), 1)
	if err != nil {
		t.Fatal(err)
	}
	t0 := 1717171200.0
	row := make([]float64, fg.NumRegressors())
	y := make([]float64, 3000)
	for i := range y {
		fg.Regressors(row, t0+step*float64(i))
		y[i] = 10 + dot(beta, row) + math.Sin(float64(i)*0.37)
		if i >= 1200 && i < 1500 {
			y[i] = math.NaN() // a five-hour gap
		}
	}
	a, err := NewFilterX(m, 60, fg, t0, step)
	if err != nil {
		t.Fatal(err)
	}
	a.Steps(y)
	b, _ := NewFilterX(m, 60, fg, t0, step)
	b.Steps(y[:1100])
	st := b.AppendState(nil)
	c, _ := NewFilterX(m, 60, fg, 0, step) // wrong start: the state carries the clock
	if err := c.SetState(st); err != nil {
		t.Fatal(err)
	}
	for i := 1100; i < 2000; i++ {
		c.Step(y[i]) // the clock restored from the state
	}
	if got, want := c.NextTime(), t0+step*2000; got != want {
		t.Fatalf("restored filter's clock at %v, want %v", got, want)
	}
	for i := 2000; i < len(y); i++ {
		c.StepAt(t0+step*float64(i), y[i]) // the clock given
	}
	ma, va := make([]float64, 60), make([]float64, 60)
	mc, vc := make([]float64, 60), make([]float64, 60)
	a.Forecast(ma, va)
	c.Forecast(mc, vc)
	for k := range ma {
		if ma[k] != mc[k] || va[k] != vc[k] {
			t.Fatalf("h=%d: restored filter %v ± %v, uninterrupted %v ± %v", k+1, mc[k], vc[k], ma[k], va[k])
		}
	}
	// handover without state
	d, _ := NewFilterX(m, 60, fg, t0+step*2000, step)
	d.Steps(y[2000:])
	ra, rd := make([]float64, 60), make([]float64, 60)
	a.RegressionMean(ra)
	d.RegressionMean(rd)
	for k := range ra {
		if ra[k] != rd[k] {
			t.Fatalf("h=%d: regression part %v after a handover, %v uninterrupted", k+1, rd[k], ra[k])
		}
	}
	if a.NextTime() != t0+step*float64(len(y)) {
		t.Errorf("clock at %v, want %v", a.NextTime(), t0+step*float64(len(y)))
	}
}

// TestFilterXNoAlloc checks that Step and Forecast of a filter with 10 + 10
// Fourier pairs do not allocate (common practice for the online path).
func TestFilterXNoAlloc(t *testing.T) {
	f, _ := benchFilterX(t)
	mean, v := make([]float64, 60), make([]float64, 60)
	y := 5.0
	allocs := testing.AllocsPerRun(200, func() {
		f.Step(y)
		f.Forecast(mean, v)
		y = mean[0] + 0.3
	})
	if allocs != 0 {
		t.Errorf("%v allocations per step and forecast, want 0", allocs)
	}
}

// benchFilterX returns a filter of an ARIMA(1,0,1) + mean with the Fourier
// terms of a daily and a weekly cycle (K = 10 each) at one-minute steps,
// run through two days of data.
func benchFilterX(tb testing.TB) (*Filter, *Fourier) {
	fg, err := NewFourier([]Cycle{{Seconds: 86400, K: 10}, {Seconds: 7 * 86400, K: 10}}, 60)
	if err != nil {
		tb.Fatal(err)
	}
	nx := fg.NumRegressors()
	par := []float64{0.7, -0.3, 100}
	for i := 0; i < nx; i++ {
		par = append(par, 1/float64(i+1))
	}
	m, err := NewModel(Spec{P: 1, Q: 1, Mean: true, NX: nx}, par, 2)
	if err != nil {
		tb.Fatal(err)
	}
	f, err := NewFilterX(m, 60, fg, 1717171200, 60)
	if err != nil {
		tb.Fatal(err)
	}
	for i := 0; i < 2880; i++ {
		f.Step(100 + math.Sin(float64(i)))
	}
	return f, fg
}

func BenchmarkFilterXStepForecast60(b *testing.B) {
	f, _ := benchFilterX(b)
	mean, v := make([]float64, 60), make([]float64, 60)
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		f.Step(100 + mean[0]*1e-3)
		f.Forecast(mean, v)
	}
}

// TestXRegBadInput: wrong regressor shapes, non-finite values, collinear
// columns and a filter without its generator are clear errors.
func TestXRegBadInput(t *testing.T) {
	y := refdata.Dataset(t, "nottem")
	fg := fourierOf(t, []float64{12}, []int{2})
	X := fg.Matrix(1, 1, len(y))
	spec := Spec{P: 1, Mean: true, NX: 4}
	if _, err := FitX(y, X[:3], spec, nil); !errors.Is(err, ErrRegressors) {
		t.Errorf("3 columns for 4 regressors: %v", err)
	}
	bad := [][]float64{X[0], X[1], X[2], append([]float64(nil), X[3][:len(y)-1]...)}
	if _, err := FitX(y, bad, spec, nil); !errors.Is(err, ErrRegressors) {
		t.Errorf("short column: %v", err)
	}
	inf := [][]float64{X[0], X[1], X[2], append([]float64(nil), X[3]...)}
	inf[3][7] = math.Inf(1)
	if _, err := FitX(y, inf, spec, nil); !errors.Is(err, ErrRegressors) {
		t.Errorf("infinite value: %v", err)
	}
	col := [][]float64{X[0], X[1], X[2], X[0]}
	if _, err := FitX(y, col, spec, nil); !errors.Is(err, ErrRegressors) {
		t.Errorf("collinear columns: %v", err)
	}
	m, _ := NewModel(spec, []float64{0.5, 1, 1, 1, 1, 1}, 1)
	if _, err := NewFilter(m, 5); !errors.Is(err, ErrRegressors) {
		t.Errorf("NewFilter of a model with regressors: %v", err)
	}
	if _, err := NewFourier([]Cycle{{Seconds: 100, K: 1}}, 60); err == nil {
		t.Error("a cycle shorter than two steps was accepted")
	}
	if _, err := NewFourier([]Cycle{{Seconds: 600, K: 6}}, 60); err == nil {
		t.Error("K = 6 pairs for a cycle of 10 steps was accepted")
	}
}
