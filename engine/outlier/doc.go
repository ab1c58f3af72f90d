// Package outlier finds additive outliers, level shifts and temporary
// changes in a series under a seasonal ARIMA model and fits them as
// regression terms, by the procedure of Chen & Liu (1993).
//
// # Effects
//
// An outlier of kind k at time T with size ω changes the observed series
// y*_t = y_t + ω L_k(B) I_t(T), with I_t(T) the pulse (1 at t = T, else 0):
//
//	AO (additive outlier)   L(B) = 1             column: pulse      x_t = 1{t = T}
//	LS (level shift)        L(B) = 1/(1 − B)     column: step       x_t = 1{t ≥ T}
//	TC (temporary change)   L(B) = 1/(1 − δB)    column: decaying   x_t = δ^{t−T} 1{t ≥ T}
//
// with δ = 0.7, the value Chen & Liu use. Column gives these regression
// columns (for any length, so also at future times for forecasts); the
// final model carries them as external regressors of arima.FitX and names
// them "KIND@time" (e.g. "LS@2026-11-02T04:55Z").
//
// # Test statistics
//
// Write the fitted model as π(B) y_t = e_t with
//
//	π(B) = φ(B) Φ(B^s) (1−B)^d (1−B^s)^D / (θ(B) Θ(B^s)) = 1 + π_1 B + π_2 B² + …
//
// (Weights). The residuals ê_t = π(B) y_t of a series with one outlier are
// ê_t = ω x_{t−T} + e_t with x_j the coefficients of π(B) L(B):
//
//	AO: x_j = π_j,   LS: x_j = Σ_{i≤j} π_i,   TC: x_j = δ x_{j−1} + π_j  (π_0 = 1),
//
// so ω is estimated by least squares and tested by its t statistic
// (Chen & Liu 1993, eqs. 6–9):
//
//	ω̂_k(T) = Σ_{t≥T} ê_t x_{t−T} / Σ_{t≥T} x_{t−T}²,
//	τ_k(T) = ω̂_k(T) (Σ_{t≥T} x_{t−T}²)^{1/2} / σ̂,
//
// σ̂ the robust residual scale 1.4826 · median |ê_t − median ê| (the
// median absolute deviation, one of the estimates Chen & Liu recommend, so
// that the outliers being sought do not inflate it). The residuals are the
// exact one-step prediction errors of the Kalman filter of the fit
// (arima.Result.Residuals times σ̂_ML), which equal π(B) y_t after the first
// few observations; missing residuals are left out of both sums.
//
// # Critical value
//
// An effect is kept when |τ| ≥ C. Chen & Liu study C between 2.5 and 4
// and find that longer series need a larger C to hold the false-alarm rate
// (more times are tested). CriticalValue follows the length rule of the
// R package tsoutliers (López-de-Lacalle), which implements their
// procedure: C = 3 for n ≤ 50, C = 4 for n ≥ 450, linear in n between.
// That rule is written here from memory of that package's documentation;
// it was not checked against its text (the package is not in Debian).
// (R forecast's tsoutliers() is a different, simpler method: residuals of
// a robust decomposition outside three interquartile ranges.)
//
// # Procedure (Chen & Liu 1993, §3)
//
//  1. Fit the model (with any caller regressors and the effects found so
//     far) by exact maximum likelihood (arima.FitX).
//  2. Inner loop, parameters fixed: compute τ_k(T) for every T and every
//     kind; if the largest |τ| is at least C, record that effect, remove
//     ω̂ x_{t−T} from the residuals, recompute σ̂ and repeat; at most one
//     effect per time index.
//  3. If the inner loop found anything, re-estimate the model with all
//     effects as regressors and go back to 2 (at most MaxIter rounds).
//  4. Joint estimation: with all effects in the fitted regression, drop
//     the effect whose t value β̂_j / se(β̂_j) (from the GLS covariance,
//     arima.Result.RegCov) is smallest in absolute value if it is below C,
//     refit, and repeat until every effect left is significant.
//
// Innovational outliers and seasonal level shifts are not sought.
//
// References:
//   - Chen, C. & Liu, L.-M. (1993). Joint estimation of model parameters and
//     outlier effects in time series. Journal of the American Statistical
//     Association 88(421), 284–297.
//   - Fox, A. J. (1972). Outliers in time series. JRSS B 34(3), 350–363
//     (additive and innovational outliers).
//   - López-de-Lacalle, J. R package tsoutliers, function tso, argument
//     cval (the length rule of CriticalValue).
package outlier
