package stationarity

import (
	"errors"
	"fmt"
	"math"
)

// SeasonalThreshold is the seasonal strength above which NSDiffs takes a seasonal
// difference. 0.64 is common practice (the threshold used by Hyndman & Athanasopoulos,
// Forecasting: Principles and Practice, for the strength-based choice of D), not a
// published test level.
const SeasonalThreshold = 0.64

// NDiffs is the number of first differences d ≤ maxD after which x is level stationary by
// successive KPSS tests: while the KPSS (Constant) p-value is below alpha, difference once
// more. Missing values are dropped first. The KPSS lag truncation is
// ℓ = ⌊4·(n/100)^{1/4}⌋, the ℓ4 of Kwiatkowski et al. (1992). alpha must lie in
// [0.01, 0.10], the range of the KPSS table (common choice 0.05). A series that becomes
// constant, or too short to test, counts as stationary at that d.
//
// References:
//   - Hyndman, R. J. & Khandakar, Y. (2008). Automatic time series forecasting: the forecast
//     package for R. Journal of Statistical Software 27(3), §3.2 (successive KPSS tests).
//   - Kwiatkowski, D., Phillips, P. C. B., Schmidt, P. & Shin, Y. (1992). Journal of
//     Econometrics 54, 159–178.
func NDiffs(x []float64, alpha float64, maxD int) (int, error) {
	if !(alpha >= 0.01 && alpha <= 0.10) {
		return 0, fmt.Errorf("stationarity: ndiffs: alpha %v (want 0.01 ≤ alpha ≤ 0.10, the KPSS table's range): %w", alpha, ErrBadArgument)
	}
	if maxD < 0 {
		return 0, fmt.Errorf("stationarity: ndiffs: maxD %d: %w", maxD, ErrBadArgument)
	}
	y := make([]float64, 0, len(x))
	for _, v := range x {
		if !math.IsNaN(v) {
			y = append(y, v)
		}
	}
	for d := 0; ; d++ {
		if d == maxD {
			return d, nil
		}
		lags := int(4 * math.Pow(float64(len(y))/100, 0.25))
		res, err := KPSS(y, Constant, lags)
		switch {
		case errors.Is(err, ErrConstant) || errors.Is(err, ErrTooShort):
			return d, nil
		case err != nil:
			return 0, fmt.Errorf("stationarity: ndiffs: %w", err)
		case res.PValue >= alpha:
			return d, nil
		}
		y = difference(y, 1)
	}
}

// NSDiffs is the number of seasonal differences D ≤ maxD at the given period: while the
// seasonal strength (SeasonalStrength) exceeds SeasonalThreshold, take a seasonal difference
// x_t − x_{t−period}. Missing values are kept (they leave gaps, which SeasonalStrength skips).
// A series too short for the strength measure counts as needing no further difference.
func NSDiffs(x []float64, period int, maxD int) (int, error) {
	if period < 2 || maxD < 0 {
		return 0, fmt.Errorf("stationarity: nsdiffs: period %d, maxD %d (want period ≥ 2, maxD ≥ 0): %w", period, maxD, ErrBadArgument)
	}
	y := x
	for d := 0; ; d++ {
		if d == maxD {
			return d, nil
		}
		f, err := SeasonalStrength(y, period)
		switch {
		case errors.Is(err, ErrTooShort) || errors.Is(err, ErrConstant):
			return d, nil
		case err != nil:
			return 0, fmt.Errorf("stationarity: nsdiffs: %w", err)
		case f <= SeasonalThreshold:
			return d, nil
		}
		y = difference(y, period)
	}
}

// difference returns x_t − x_{t−lag}, t = lag, …, len(x)−1 (NaN propagates).
func difference(x []float64, lag int) []float64 {
	if len(x) <= lag {
		return nil
	}
	d := make([]float64, len(x)-lag)
	for t := range d {
		d[t] = x[t+lag] - x[t]
	}
	return d
}
