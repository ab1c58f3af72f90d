package transform

import (
	"fmt"
	"math"
)

// Guerrero chooses the Box–Cox λ on [lower, upper] (a common default is [−1, 2]) by the
// method of Guerrero (1993). The series is cut into consecutive subseries of length
// period, aligned to its end (an incomplete first block is dropped); a period below 2 is
// read as 2. For each subseries j with mean m_j and sample standard deviation s_j,
//
//	r_j(λ) = s_j / m_j^{1−λ}
//
// and λ minimises the coefficient of variation sd(r)/mean(r) across subseries: a variance-
// stabilising power makes the subseries spreads proportional to a power of their levels.
// Missing values are skipped; a subseries needs two non-missing values. The minimum is found
// by a grid of 61 points on [lower, upper], refined by golden-section search in the bracket
// around the best grid point (deterministic).
//
// Errors: ErrBadArgument for an empty or non-finite interval, ErrDomain for a value ≤ 0 or
// ±Inf, ErrTooShort for fewer than two usable subseries, ErrConstant when no subseries varies.
//
// References:
//   - Guerrero, V. M. (1993). Time-series analysis supported by power transformations.
//     Journal of Forecasting 12(1), 37–48.
func Guerrero(x []float64, period int, lower, upper float64) (float64, error) {
	if !(lower < upper) || math.IsInf(lower, 0) || math.IsInf(upper, 0) {
		return 0, fmt.Errorf("transform: guerrero: λ interval [%v, %v]: %w", lower, upper, ErrBadArgument)
	}
	if period < 2 {
		period = 2
	}
	for i, v := range x {
		if !math.IsNaN(v) && !(v > 0 && !math.IsInf(v, 0)) {
			return 0, fmt.Errorf("transform: guerrero: observation %d is %v (want x > 0): %w", i, v, ErrDomain)
		}
	}
	var logm, logs []float64 // log mean and log sd per usable subseries
	for end := len(x); end-period >= 0; end -= period {
		var acc Welford
		for _, v := range x[end-period : end] {
			acc.Add(v)
		}
		if acc.N < 2 {
			continue
		}
		logm = append(logm, math.Log(acc.Mean))
		logs = append(logs, math.Log(acc.Std()))
	}
	if len(logm) < 2 {
		return 0, fmt.Errorf("transform: guerrero: %d usable subseries of length %d in %d values (need 2): %w", len(logm), period, len(x), ErrTooShort)
	}
	cv := func(lambda float64) float64 {
		var acc Welford
		for j := range logm {
			acc.Add(math.Exp(logs[j] - (1-lambda)*logm[j]))
		}
		return acc.Std() / acc.Mean
	}
	const grid = 61
	step := (upper - lower) / (grid - 1)
	best, bestv := 0, math.Inf(1)
	for i := range grid {
		if v := cv(lower + float64(i)*step); v < bestv {
			best, bestv = i, v
		}
	}
	if math.IsInf(bestv, 1) {
		return 0, fmt.Errorf("transform: guerrero: subseries without variation: %w", ErrConstant)
	}
	a := lower + float64(max(best-1, 0))*step
	b := lower + float64(min(best+1, grid-1))*step
	return goldenMin(cv, a, b, 1e-10), nil
}

// goldenMin minimises f on [a, b] by golden-section search to an interval of width tol.
//
// References:
//   - Kiefer, J. (1953). Sequential minimax search for a maximum. Proceedings of the American
//     Mathematical Society 4(3), 502–506.
func goldenMin(f func(float64) float64, a, b, tol float64) float64 {
	invphi := (math.Sqrt(5) - 1) / 2
	c, d := b-invphi*(b-a), a+invphi*(b-a)
	fc, fd := f(c), f(d)
	for b-a > tol {
		if fc <= fd {
			b, d, fd = d, c, fc
			c = b - invphi*(b-a)
			fc = f(c)
		} else {
			a, c, fc = c, d, fd
			d = a + invphi*(b-a)
			fd = f(d)
		}
	}
	return (a + b) / 2
}
