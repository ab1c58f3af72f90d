package stationarity

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/stat"
)

// SeasonalStrength measures how much of x's variation, once the trend is removed, is a
// fixed seasonal pattern of the given period:
//
//	F_S = max(0, 1 − Var(R) / Var(S + R))
//
// where S and R are the seasonal and remainder parts of a classical additive decomposition,
// computed as R's decompose does: the trend T is a centred moving average of length s (for
// even s the 2×s average, weights ½, 1, …, 1, ½ over s + 1 points), the seasonal figure is
// the mean of x − T at each position in the cycle (counted from the first observation),
// centred to sum to zero, and R = x − T − S. The variances run over the points where R is
// defined (the moving average leaves ⌊s/2⌋ points undefined at each end; a missing value
// leaves its window undefined). Strength near 1 means a strong seasonal pattern.
//
// Errors: ErrBadArgument for period < 2; ErrTooShort for fewer than two full periods;
// ErrNotFinite for ±Inf; ErrConstant when S + R has no variation.
//
// References:
//   - Wang, X., Smith, K. A. & Hyndman, R. J. (2006). Characteristic-based clustering for time
//     series data. Data Mining and Knowledge Discovery 13(3), 335–364 (strength measures
//     from a decomposition; they use an STL decomposition, this uses the classical one).
//   - Kendall, M. & Stuart, A. (1983). The Advanced Theory of Statistics, vol. 3, §46
//     (classical decomposition by moving averages).
func SeasonalStrength(x []float64, period int) (float64, error) {
	if period < 2 {
		return 0, fmt.Errorf("stationarity: seasonal strength: period %d (want ≥ 2): %w", period, ErrBadArgument)
	}
	n := len(x)
	if n < 2*period {
		return 0, fmt.Errorf("stationarity: seasonal strength: %d values for period %d (need two full periods): %w", n, period, ErrTooShort)
	}
	for i, v := range x {
		if math.IsInf(v, 0) {
			return 0, fmt.Errorf("stationarity: seasonal strength: observation %d is %v: %w", i, v, ErrNotFinite)
		}
	}
	// Centred moving-average trend; NaN where the window runs off the series or holds a NaN.
	half := period / 2
	detr := make([]float64, n)
	for t := range detr {
		detr[t] = math.NaN()
		if t < half || t+half >= n {
			continue
		}
		var s float64
		if period%2 == 1 {
			for j := t - half; j <= t+half; j++ {
				s += x[j]
			}
		} else {
			s = (x[t-half] + x[t+half]) / 2
			for j := t - half + 1; j < t+half; j++ {
				s += x[j]
			}
		}
		detr[t] = x[t] - s/float64(period)
	}
	figure := make([]float64, period)
	var centre float64
	for i := range figure {
		var s float64
		m := 0
		for t := i; t < n; t += period {
			if !math.IsNaN(detr[t]) {
				s += detr[t]
				m++
			}
		}
		if m == 0 { // only with missing values: two full periods define every position once
			return 0, fmt.Errorf("stationarity: seasonal strength: no defined value at cycle position %d: %w", i, ErrTooShort)
		}
		figure[i] = s / float64(m)
		centre += figure[i]
	}
	centre /= float64(period)
	var rem, sr []float64
	for t, d := range detr {
		if math.IsNaN(d) {
			continue
		}
		sea := figure[t%period] - centre
		rem = append(rem, d-sea)
		sr = append(sr, d)
	}
	vsr := stat.Variance(sr, nil)
	if !(vsr > 0) {
		return 0, fmt.Errorf("stationarity: seasonal strength: %w", ErrConstant)
	}
	return math.Max(0, 1-stat.Variance(rem, nil)/vsr), nil
}
