// Package auto chooses a transform and a seasonal ARIMA order for a series
// automatically, and fits the chosen model.
//
// # Procedure (Select)
//
// Deterministic: the same series and options give the same choice.
//
//  1. Candidate transforms. With Transform "auto": none; log and boxcox(λ),
//     λ by Guerrero (1993) on [−1, 2], when every observed value is > 0;
//     scaled-exp when the series shows concave growth (see below). A fixed
//     transform is the only candidate ("boxcox" without λ gets Guerrero's λ).
//     Scaled-exp is tried only when a least-squares quadratic trend
//     a + b·t + c·t² through the observed values rises (b + 2c·t̄ > 0 at the
//     mean time t̄) and bends down with c < 0 at a t-ratio below −2: the
//     saturating growth it is meant for (a heuristic; common practice).
//  2. Differencing, once, shared by every transform (a comparison of
//     likelihoods across transforms through the log-Jacobian is only valid
//     at equal differencing orders). The orders are chosen on the
//     variance-stabilised series: the boxcox(λ) candidate when the series is
//     positive, the raw series otherwise. D = NSDiffs (seasonal strength >
//     0.64) when the period s ≥ 2 and at least 2s + 2 values are observed,
//     else 0; then d = NDiffs (successive KPSS level tests at 5 %, d ≤ 2) on
//     the series differenced D times at lag s.
//  3. Transform choice. The four starting models of Hyndman & Khandakar
//     (2008) are fitted on the base candidate (the one of step 2), and the
//     best of them is fitted under every other candidate; the transform
//     with the lowest raw-scale AICc at that order wins (one comparison
//     order instead of a search per transform, to keep Select fast).
//  4. Order search, on the winning transform: the stepwise search of
//     Hyndman & Khandakar (2008) from the best starting model. The
//     neighbours of the current model, tried in a fixed order, are ±1 on
//     one of p, q, P, Q; ±1 on p and q together; ±1 on P and Q together; the
//     constant on or off. The first neighbour with a lower AICc becomes the
//     current model and the search repeats; it stops when no neighbour
//     improves or after 60 fits. Each neighbour's fit starts from the
//     current model's coefficients, cut or padded with zeros (a nested
//     start, so a larger neighbour starts where the current model is).
//     Orders are bounded by MaxP, MaxQ, MaxSP, MaxSQ. The constant is a
//     mean when d + D = 0 and a drift when d + D = 1; there is none when
//     d + D ≥ 2 or when Options.Constant is arima.ConstantNone.
//  5. The chosen order is refitted under every other candidate transform
//     and the transform with the lowest raw-scale AICc is kept.
//
// A fit is rejected (listed in Choice.Tried with its reason) when it fails,
// when its log-likelihood is not finite, or when a root of its AR, MA,
// seasonal AR or seasonal MA polynomial lies within 1.001 of the unit circle
// (|z| ≤ 1.001; seasonal polynomials in z^s). Roots are the eigenvalues of
// the companion matrix. The root rule steers the order search only: with a
// fixed Model the fit is kept and the finding is added to its Note.
//
// # Raw-scale AICc
//
// With w = g(x) the transformed series, the model gives log L_w on the
// model scale, and the raw series has
//
//	log L_x = log L_w + J,   J = Σ_t log |g'(x_t)|
//	AICc_x  = −2·log L_x + 2(k+1) + 2(k+1)(k+2)/(n−k−2)
//
// where the sum runs over the n observations that enter the likelihood of
// the differenced series (the observed values after the first d + sD
// observed ones) and k is the number of estimated coefficients.
//
// # Fixed model, warm start
//
// With a fixed Model only the transform is chosen (the spec fitted under
// each candidate). With Warm set, the previous spec and transform are
// refitted first from the previous parameters; then the reduced
// neighbourhood of ±1 on p and on q (each fit warm-started from the
// previous parameters) is tried, and the best is kept. Differencing and
// the transform are not re-chosen on a warm refit.
//
// # Several cycles (Options.Seasons)
//
// A single cycle of a whole number of steps, at most MaxARIMAPeriod (350,
// the bound of FPP3 §12.1), is the period of the procedure above. Every
// other case — several cycles, a cycle that is not a whole number of steps
// or a longer one — is dynamic harmonic regression: each cycle of m steps
// gets K sin/cos pairs (arima.Fourier, phase from the absolute data time
// Options.Start + i·Step), K from 0 (no terms) to min(MaxK = 10, ⌊m/2⌋),
// chosen by AICc (Hyndman & Athanasopoulos, FPP3 §10.5 and §12.1):
//
//  1. Transforms as in step 1 (Guerrero's λ on subseries of the shortest
//     cycle).
//  2. d by KPSS (NDiffs) on the residuals of the least-squares regression
//     of the base series on a constant and every Fourier column at the
//     largest K (the series less its cycles).
//  3. K, cycle by cycle from the shortest, each over 0…K max with the
//     others at their current choice: the Fourier coefficients are
//     concentrated out by least squares on the differenced data (cross
//     products computed once), and the AICc is that of an ARMA(1,1) fit to
//     the residuals with the least-squares coefficients counted.
//  4. The stepwise order search of step 4 on the residuals at the chosen K.
//  5. The chosen orders on every transform's residuals; the lowest
//     raw-scale AICc wins.
//  6. The constant (mean or drift), when allowed, by AICc: the chosen
//     orders on the concentrated residuals with and without the constant
//     column (Hyndman & Khandakar 2008 decide it by AICc in the search).
//  7. One FitX of the regression with ARIMA errors (β by GLS inside the
//     exact likelihood) at the chosen orders, K and constant; its AICc is
//     the one reported.
//
// A warm refit with Warm.Seasons keeps the transform, d, the constant and
// each cycle's K, compares the previous orders and ±1 on p and on q on the
// residuals, and fits the best by FitX from the previous coefficients.
// Choice.Seasons records the terms per cycle, Choice.Fourier the
// regressors.
//
// # Decomposition plus ARIMA (SelectMSTL)
//
// The published alternative for several whole cycles on a complete series
// (Bandara, Hyndman & Bergmeir 2021): MSTL splits off one seasonal
// component per cycle (STL, Cleveland et al. 1990, with its default
// windows), Select without seasonal terms chooses the model of the
// seasonally adjusted series, and each component is carried forward by its
// last cycle. Its seasonal shape follows the recent cycles, where Fourier
// terms hold one shape over the whole window; on taylor it forecasts
// better (TestTaylorMSTLAgainstR).
//
// # Choosing the route (Select with Options.Seasons)
//
// Select expresses the decomposition route as a regression with ARIMA
// errors, so that one online filter runs either route: the profile route.
// MSTL of the series (cycles rounded to whole steps; the fixed transform,
// or none when it is automatic, as R's stlm by default) gives one seasonal
// component per cycle; the last cycle of each, looked up by the phase
// (t mod L)/L of absolute data time, is one column of an arima.Profile;
// the automatic non-seasonal choice above runs on the MSTL-adjusted series
// (trend plus remainder); the profile coefficients are fixed at 1. Fixed,
// not estimated: GLS in FitX on the repeated last-cycle columns gave
// β ≈ (0.98, 1.02) on taylor, with the ARIMA errors refitted to the
// series less those columns, and a MASE of 0.720 at the five origins of
// TestTaylorAgainstR, against 0.623 with the coefficients at 1 — the
// columns repeat the last cycle over the whole window, so a coefficient
// estimated there describes the old cycles, not the next one.
//
// The AICc of the two routes cannot decide between them: they are
// likelihoods of different data (the series, and the series less an
// estimated decomposition). Select compares their forecasts out of
// sample instead (Tashman 2000, rolling-origin evaluation; Hyndman &
// Athanasopoulos, FPP3 §5.10, time-series cross-validation):
//
//  1. Holdout: the last H steps, H the longest cycle rounded up; leads
//     scored up to h, the shortest cycle rounded (at most H).
//  2. Both routes are chosen and fitted on the series before the holdout.
//  3. Each model's filter then runs through the holdout, absorbing every
//     observation (parameters not re-estimated); at 64 origins evenly
//     spaced over it (every step when H ≤ 64) its forecasts of leads 1…h
//     (raw scale) are scored against the observations. The score is the
//     mean absolute error over all (origin, lead) pairs (Choice.Score).
//  4. The route with the lower score is fitted again on the whole series,
//     warm from its holdout fit (a tie or a failed profile route keeps
//     Fourier).
//
// The cost is bounded by one cold choice per route on the shorter series,
// one warm refit and the filter runs of the holdout (H filter steps and at
// most 64·h forecast steps).
// The comparison is skipped, and the Fourier route taken, for a fixed
// model, a warm refit (which keeps its route: Warm.Route), a series with
// missing values (MSTL needs a complete series), or when fewer than two
// longest cycles and one more step precede the holdout. Choice.Route
// records the route; for the profile route Choice.ProfileCycles and
// Choice.ProfileShapes hold the columns (Choice.Profile generates them).
//
// # Contract
//
// Pure computation: no I/O, no goroutines; safe for concurrent use on
// different inputs. Missing values are NaN. Errors wrap the sentinels of
// errors.go.
//
// References:
//   - Hyndman, R. J. & Khandakar, Y. (2008). Automatic time series
//     forecasting: the forecast package for R. Journal of Statistical
//     Software 27(3), §3.2 (the stepwise algorithm).
//   - Guerrero, V. M. (1993). Time-series analysis supported by power
//     transformations. Journal of Forecasting 12(1), 37–48.
//   - Box, G. E. P. & Cox, D. R. (1964). An analysis of transformations.
//     Journal of the Royal Statistical Society B 26(2), 211–252 (the
//     Jacobian term).
//   - Hyndman, R. J. & Athanasopoulos, G. (2021). Forecasting: Principles
//     and Practice, 3rd ed., §10.5 (dynamic harmonic regression) and §12.1
//     (complex seasonality).
//   - Hurvich, C. M. & Tsai, C.-L. (1989). Regression and time series model
//     selection in small samples. Biometrika 76(2), 297–307 (AICc).
//   - Tashman, L. J. (2000). Out-of-sample tests of forecasting accuracy:
//     an analysis and review. International Journal of Forecasting 16(4),
//     437–450 (rolling-origin evaluation).
//   - Bandara, K., Hyndman, R. J. & Bergmeir, C. (2021). MSTL: a
//     seasonal-trend decomposition algorithm for time series with multiple
//     seasonal patterns. arXiv:2107.13462.
//   - Kwiatkowski, D., Phillips, P. C. B., Schmidt, P. & Shin, Y. (1992).
//     Testing the null hypothesis of stationarity against the alternative
//     of a unit root. Journal of Econometrics 54, 159–178.
package auto
