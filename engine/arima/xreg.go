package arima

import (
	"fmt"
	"math"
)

// columns is a Regressors over stored columns: row i at time i.
type columns struct {
	X [][]float64
	n int // rows
}

func (c *columns) NumRegressors() int { return len(c.X) }

func (c *columns) Regressors(dst []float64, t float64) {
	i := int(t)
	for j, col := range c.X {
		if i >= 0 && i < c.n {
			dst[j] = col[i]
		} else {
			dst[j] = math.NaN()
		}
	}
}

// XForecast holds the forecasts of a regression with ARIMA errors.
type XForecast struct {
	Mean []float64 // x_{n+k}ᵀβ̂ + û_{n+k}
	// SE is the standard error with β known (the ARIMA part alone), what
	// R's predict.Arima reports.
	SE []float64
	// SEReg adds the estimation uncertainty of the regression
	// coefficients (the mean or drift and β): with g_k = x_{n+k} − x̂_{n+k},
	// x̂ the columns' own forecasts from their past under the ARIMA part,
	//
	//	SEReg_k² = SE_k² + g_kᵀ Cov(β̂) g_k,   Cov(β̂) = σ̂² S⁻¹ (Result.RegCov),
	//
	// the forecast error variance of the GLS predictor (Harvey 1989, §3.4;
	// Durbin & Koopman 2012, §6.2.2, the forecast from the augmented
	// filter with β diffuse; Kohn & Ansley 1985).
	SEReg []float64
}

// ForecastX forecasts h steps after y from a fit of FitX (res), given the
// in-sample regressors X (as passed to FitX) and their future values Xf
// (NX columns of h values each, finite). It runs the online filter
// (NewFilterX) through the series, so its forecasts are those a Filter
// gives.
func ForecastX(y []float64, X, Xf [][]float64, res *Result, h int) (*XForecast, error) {
	if res == nil || res.Model == nil {
		return nil, fmt.Errorf("arima: forecast: %w: nil result", ErrParams)
	}
	m := res.Model
	n := len(y)
	if err := checkRegressors(X, n, m.Spec.NX); err != nil {
		return nil, fmt.Errorf("arima: forecast %s: %w", m.Spec, err)
	}
	if err := checkRegressors(Xf, h, m.Spec.NX); err != nil {
		return nil, fmt.Errorf("arima: forecast %s: future values: %w", m.Spec, err)
	}
	for j, c := range Xf {
		for i, v := range c {
			if math.IsNaN(v) {
				return nil, fmt.Errorf("arima: forecast %s: %w: future value %d of column %d is missing", m.Spec, ErrRegressors, i+1, j+1)
			}
		}
	}
	if h < 1 {
		return nil, fmt.Errorf("arima: forecast %s: %w: horizon %d", m.Spec, ErrParams, h)
	}
	all := make([][]float64, len(X))
	for j := range X {
		all[j] = append(append([]float64(nil), X[j]...), Xf[j]...)
	}
	yy := maskRows(y, X)
	f, err := NewFilterX(m, h, &columns{X: all, n: n + h}, 0, 1)
	if err != nil {
		return nil, err
	}
	f.Steps(yy)
	out := &XForecast{Mean: make([]float64, h), SE: make([]float64, h), SEReg: make([]float64, h)}
	v := make([]float64, h)
	f.Forecast(out.Mean, v)
	for k := range v {
		out.SE[k] = math.Sqrt(v[k])
	}
	// The regression columns in levels: the mean (ones) or the drift
	// (1..n), then X, each followed by its future values.
	var cols [][]float64
	switch {
	case m.Spec.Mean:
		cols = append(cols, constSlice(n+h, 1))
	case m.Spec.Drift:
		c := make([]float64, n+h)
		for i := range c {
			c[i] = float64(i + 1)
		}
		cols = append(cols, c)
	}
	cols = append(cols, all...)
	kc := len(cols)
	if res.RegCov == nil || len(res.RegCov) != kc*kc {
		copy(out.SEReg, out.SE)
		return out, nil
	}
	// x̂: each column filtered by the ARIMA part alone (no constant).
	m0 := *m
	m0.Spec.Mean, m0.Spec.Drift, m0.Spec.NX = false, false, 0
	m0.Mean, m0.Drift, m0.Beta = 0, 0, nil
	g := make([][]float64, kc)
	col := make([]float64, n)
	junk := make([]float64, h)
	for j, c := range cols {
		fj, err := NewFilter(&m0, h)
		if err != nil {
			return nil, err
		}
		for i := 0; i < n; i++ {
			col[i] = c[i]
			if math.IsNaN(yy[i]) {
				col[i] = math.NaN()
			}
		}
		fj.Steps(col)
		g[j] = make([]float64, h)
		fj.Forecast(g[j], junk)
		for k := 0; k < h; k++ {
			g[j][k] = c[n+k] - g[j][k]
		}
	}
	for k := 0; k < h; k++ {
		q := 0.0
		for i := 0; i < kc; i++ {
			for j := 0; j < kc; j++ {
				q += g[i][k] * res.RegCov[i*kc+j] * g[j][k]
			}
		}
		out.SEReg[k] = math.Sqrt(v[k] + q)
	}
	return out, nil
}
