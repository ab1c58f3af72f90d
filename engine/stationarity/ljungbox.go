package stationarity

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/stat/distuv"
)

// LjungBox is the Ljung–Box portmanteau test that the residuals are white noise:
//
//	Q = n(n+2)·Σ_{k=1..h} r_k² / (n − k),   p = P(χ²_{h−fitdf} > Q)
//
// with h = lags, n the number of non-missing residuals and fitdf the number of estimated
// ARMA coefficients (p + q + P + Q). Missing residuals (NaN) are handled as R's Box.test
// does through acf(na.action = na.pass): the mean is that of the non-missing values, and the
// lag-k autocovariance sums the products over the m_k pairs with both values present and
// divides by m_k + k; r_k is its ratio to the lag-0 one.
//
// Errors: ErrBadArgument for lags < 1 or lags − fitdf < 1; ErrTooShort when lags ≥ n;
// ErrConstant when the residuals have no variation; ErrNotFinite for ±Inf.
//
// References:
//   - Ljung, G. M. & Box, G. E. P. (1978). On a measure of lack of fit in time series
//     models. Biometrika 65(2), 297–303.
func LjungBox(resid []float64, lags, fitdf int) (q, p float64, err error) {
	if lags < 1 || fitdf < 0 || lags-fitdf < 1 {
		return 0, 0, fmt.Errorf("stationarity: ljung-box: lags %d, fitdf %d (want lags ≥ 1, 0 ≤ fitdf < lags): %w", lags, fitdf, ErrBadArgument)
	}
	var mean float64
	n := 0
	for i, v := range resid {
		if math.IsInf(v, 0) {
			return 0, 0, fmt.Errorf("stationarity: ljung-box: residual %d is %v: %w", i, v, ErrNotFinite)
		}
		if !math.IsNaN(v) {
			mean += v
			n++
		}
	}
	if lags >= n {
		return 0, 0, fmt.Errorf("stationarity: ljung-box: %d lags on %d residuals: %w", lags, n, ErrTooShort)
	}
	mean /= float64(n)
	acov := func(k int) float64 {
		var s float64
		m := 0
		for t := k; t < len(resid); t++ {
			a, b := resid[t], resid[t-k]
			if math.IsNaN(a) || math.IsNaN(b) {
				continue
			}
			s += (a - mean) * (b - mean)
			m++
		}
		if m == 0 {
			return 0
		}
		return s / float64(m+k)
	}
	c0 := acov(0)
	if !(c0 > 0) {
		return 0, 0, fmt.Errorf("stationarity: ljung-box: %w", ErrConstant)
	}
	nf := float64(n)
	for k := 1; k <= lags; k++ {
		r := acov(k) / c0
		q += r * r / (nf - float64(k))
	}
	q *= nf * (nf + 2)
	p = distuv.ChiSquared{K: float64(lags - fitdf)}.Survival(q)
	return q, p, nil
}
