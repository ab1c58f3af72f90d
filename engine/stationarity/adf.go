package stationarity

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/stat/distuv"
)

// Regression is the deterministic part of a unit-root or stationarity test.
type Regression int

const (
	// Constant is a constant only ("c"): level stationarity.
	Constant Regression = iota
	// Trend is a constant and a linear time trend ("ct"): trend stationarity.
	Trend
)

// String is "c" or "ct".
func (r Regression) String() string {
	switch r {
	case Constant:
		return "c"
	case Trend:
		return "ct"
	}
	return fmt.Sprintf("Regression(%d)", int(r))
}

func (r Regression) check() error {
	if r != Constant && r != Trend {
		return fmt.Errorf("stationarity: regression %v: %w", r, ErrBadArgument)
	}
	return nil
}

// deterministic is the number of deterministic regressors.
func (r Regression) deterministic() int { return int(r) + 1 }

// ADFResult is the outcome of an augmented Dickey–Fuller test. NObs is the number of rows of
// the test regression, n − 1 − Lags; the critical values are for that T.
type ADFResult struct {
	Stat, PValue         float64
	Lags, NObs           int
	Crit1, Crit5, Crit10 float64
}

// ADF runs the augmented Dickey–Fuller test of a unit root in x by the regression
//
//	Δy_t = c (+ β·t) + ρ·y_{t−1} + Σ_{i=1..k} δ_i·Δy_{t−i} + ε_t,   t = k+2, …, n
//
// fitted by least squares (QR), with k = lags and t counted 1, 2, … over the regression's
// rows. The statistic is the t-ratio of ρ̂; H₀: ρ = 0 (a unit root). A negative lags takes
// k = ⌈12·(n/100)^{1/4}⌉ (Schwert 1989), capped at n/2 − j − 1 with j the number of
// deterministic terms; a lags above that cap returns ErrTooShort. The p-value is MacKinnon's
// (1994) response surface, the critical values MacKinnon's (2010) finite-sample ones at
// T = NObs (see MacKinnonP, MacKinnonCrit).
//
// References:
//   - Dickey, D. A. & Fuller, W. A. (1979). Distribution of the estimators for autoregressive
//     time series with a unit root. JASA 74(366), 427–431.
//   - Said, S. E. & Dickey, D. A. (1984). Testing for unit roots in autoregressive-moving
//     average models of unknown order. Biometrika 71(3), 599–607.
//   - Schwert, G. W. (1989). Tests for unit roots: a Monte Carlo investigation. JBES 7(2),
//     147–159.
func ADF(x []float64, lags int, reg Regression) (ADFResult, error) {
	if err := reg.check(); err != nil {
		return ADFResult{}, err
	}
	if err := checkSeries(x); err != nil {
		return ADFResult{}, fmt.Errorf("stationarity: adf: %w", err)
	}
	n := len(x)
	maxLag := n/2 - reg.deterministic() - 1
	if lags < 0 {
		lags = min(int(math.Ceil(12*math.Pow(float64(n)/100, 0.25))), maxLag)
	}
	if lags < 0 || lags > maxLag {
		return ADFResult{}, fmt.Errorf("stationarity: adf: %d lags on %d values (at most n/2 − %d = %d): %w",
			lags, n, reg.deterministic()+1, maxLag, ErrTooShort)
	}
	nobs := n - 1 - lags
	k := reg.deterministic() + lags + 1 // columns; the level y_{t−1} is the last one
	X := mat.NewDense(nobs, k, nil)
	y := mat.NewVecDense(nobs, nil)
	for r := range nobs {
		t := r + lags // index into Δy: Δy[t] = x[t+1] − x[t]
		y.SetVec(r, x[t+1]-x[t])
		X.Set(r, 0, 1)
		c := 1
		if reg == Trend {
			X.Set(r, 1, float64(r+1))
			c = 2
		}
		for i := 1; i <= lags; i++ {
			X.Set(r, c, x[t-i+1]-x[t-i])
			c++
		}
		X.Set(r, c, x[t])
	}
	stat, err := lastTRatio(X, y)
	if err != nil {
		return ADFResult{}, fmt.Errorf("stationarity: adf: %w", err)
	}
	res := ADFResult{Stat: stat, PValue: MacKinnonP(stat, reg), Lags: lags, NObs: nobs}
	res.Crit1, res.Crit5, res.Crit10 = MacKinnonCrit(reg, nobs)
	return res, nil
}

// lastTRatio fits y = Xβ + ε by least squares through the QR factorisation X = QR and
// returns the t-ratio of the last coefficient, β̂_k / sqrt(s²·[(XᵀX)⁻¹]_kk). With R upper
// triangular, [(XᵀX)⁻¹]_kk = 1/R_kk², and s² = RSS/(n − k).
func lastTRatio(X *mat.Dense, y *mat.VecDense) (float64, error) {
	n, k := X.Dims()
	if n <= k {
		return 0, fmt.Errorf("%d rows for %d coefficients: %w", n, k, ErrTooShort)
	}
	var qr mat.QR
	qr.Factorize(X)
	var r mat.Dense
	qr.RTo(&r)
	scale := 0.0
	for j := range k {
		scale = math.Max(scale, math.Abs(r.At(j, j)))
	}
	for j := range k {
		if math.Abs(r.At(j, j)) <= 1e-12*scale {
			return 0, ErrSingular
		}
	}
	var beta, fit mat.VecDense
	if err := qr.SolveVecTo(&beta, false, y); err != nil {
		return 0, ErrSingular
	}
	fit.MulVec(X, &beta)
	fit.SubVec(y, &fit)
	rss := mat.Dot(&fit, &fit)
	if rss == 0 {
		return 0, ErrConstant
	}
	s2 := rss / float64(n-k)
	rkk := r.At(k-1, k-1)
	return beta.AtVec(k-1) / math.Sqrt(s2/(rkk*rkk)), nil
}

// checkSeries rejects NaN and ±Inf, naming the first offending index.
func checkSeries(x []float64) error {
	for i, v := range x {
		if math.IsNaN(v) {
			return fmt.Errorf("observation %d: %w", i, ErrMissing)
		}
		if math.IsInf(v, 0) {
			return fmt.Errorf("observation %d is %v: %w", i, v, ErrNotFinite)
		}
	}
	return nil
}

// MacKinnon (1994) response surface for the p-value of the Dickey–Fuller τ statistic with one
// series (N = 1), Table 3 (small p, quadratic) and Table 4 (large p, cubic), as the published
// coefficients γ_0..γ_3 as they enter the polynomial (the paper prints some of the large-p
// ones with a power of ten factored out). Values as recalled from the paper, cross-checked in
// the tests against statsmodels 0.13.5 mackinnonp on a grid of τ.
var mackinnon1994 = [2]struct {
	tauStar, tauMin, tauMax float64
	small                   [3]float64
	large                   [4]float64
}{
	Constant: {-1.61, -18.83, 2.74, [3]float64{2.1659, 1.4412, 0.038269}, [4]float64{1.7339, 0.93202, -0.12745, -0.010368}},
	Trend:    {-2.89, -16.18, 0.7, [3]float64{3.2512, 1.6047, 0.049588}, [4]float64{2.5261, 0.61654, -0.37956, -0.060285}},
}

// MacKinnonP is the approximate p-value of a Dickey–Fuller τ statistic (one series):
//
//	p = Φ(γ_0 + γ_1 τ + γ_2 τ²)              for τ ≤ τ*  (small-p surface)
//	p = Φ(γ_0 + γ_1 τ + γ_2 τ² + γ_3 τ³)     for τ > τ*  (large-p surface)
//
// with Φ the standard normal distribution function; p = 0 below τ_min and 1 above τ_max, the
// range of the surfaces. τ* = −1.61 (c) and −2.89 (ct).
//
// References:
//   - MacKinnon, J. G. (1994). Approximate asymptotic distribution functions for unit-root
//     and cointegration tests. Journal of Business & Economic Statistics 12(2), 167–176.
func MacKinnonP(tau float64, reg Regression) float64 {
	if reg != Constant && reg != Trend || math.IsNaN(tau) {
		return math.NaN()
	}
	c := mackinnon1994[reg]
	switch {
	case tau > c.tauMax:
		return 1
	case tau < c.tauMin:
		return 0
	case tau <= c.tauStar:
		return distuv.UnitNormal.CDF(c.small[0] + tau*(c.small[1]+tau*c.small[2]))
	}
	return distuv.UnitNormal.CDF(c.large[0] + tau*(c.large[1]+tau*(c.large[2]+tau*c.large[3])))
}

// mackinnon2010 are the response-surface coefficients (β∞, β₁, β₂, β₃) for the 1 %, 5 % and
// 10 % critical values of τ with one series. Source: MacKinnon (2010), Table 2; the constant-
// only row is also given in NUMERICS-NOTES.md, the T → ∞ values in REFERENCES.md.
var mackinnon2010 = [2][3][4]float64{
	Constant: {
		{-3.43035, -6.5393, -16.786, -79.433},
		{-2.86154, -2.8903, -4.234, -40.040},
		{-2.56677, -1.5384, -2.809, 0},
	},
	Trend: {
		{-3.95877, -9.0531, -28.428, -134.155},
		{-3.41049, -4.3904, -9.036, -45.374},
		{-3.12705, -2.5856, -3.925, -22.380},
	},
}

// MacKinnonCrit returns the 1 %, 5 % and 10 % critical values of the Dickey–Fuller τ for a
// regression with T rows,
//
//	crit(T) = β∞ + β₁/T + β₂/T² + β₃/T³;
//
// T ≤ 0 gives the asymptotic values β∞. An unknown Regression gives NaN.
//
// References:
//   - MacKinnon, J. G. (2010). Critical values for cointegration tests. Queen's Economics
//     Department Working Paper 1227, Table 2.
func MacKinnonCrit(reg Regression, T int) (crit1, crit5, crit10 float64) {
	if reg != Constant && reg != Trend {
		return math.NaN(), math.NaN(), math.NaN()
	}
	var c [3]float64
	for i, b := range mackinnon2010[reg] {
		c[i] = b[0]
		if T > 0 {
			u := 1 / float64(T)
			c[i] += u * (b[1] + u*(b[2]+u*b[3]))
		}
	}
	return c[0], c[1], c[2]
}
