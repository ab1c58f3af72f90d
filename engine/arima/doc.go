// Package arima fits and runs seasonal ARIMA models, orders (p,d,q)×(P,D,Q)
// with period s in the multiplicative notation of Box & Jenkins (1976), by
// exact Gaussian maximum likelihood in state-space form.
//
// # Model
//
//	φ(B) Φ(B^s) (1−B)^d (1−B^s)^D (y_t − μ − δ t) = θ(B) Θ(B^s) ε_t,   ε_t ~ N(0, σ²),
//
// AR polynomials 1 − Σ φ_i z^i, MA polynomials 1 + Σ θ_i z^i (MA terms enter
// with a plus sign). A mean μ is estimated only when d+D = 0, a drift δ
// only when d+D = 1 (see Spec). All values are on the model's scale: any
// transform is applied by the caller.
//
// # Writing a model
//
// Configuration and command line give the orders as "p,d,q" or
// "p,d,q x P,D,Q" (ParseOrders), the period apart (from the seasonal
// cycles) and the constant as auto, none, mean or drift (ParseConstant);
// NewSpec checks them together. Spec.Label renders a model for people as
// "ARIMA 0,1,1 × 0,1,1 s=12 + drift", and Spec.Orders gives back the
// syntax ParseOrders reads. ParseLegacySpec reads the spelling of state
// records of format version 1 and nothing else.
//
// # Conventions (equal to R 4.2.2 stats::arima, method "ML")
//
//   - The log-likelihood is the exact Gaussian log-likelihood of the
//     differenced series, constant included, σ² concentrated out;
//     nobs = non-missing observations − (d + s·D);
//     AIC = −2 log L + 2(k+1), k = Spec.NumParams().
//   - The ARMA block uses the Harvey form (state dimension
//     r = max(p+sP, q+sQ+1)) started at its stationary covariance, computed
//     in O(r²) from autocovariances (never an O(r⁴) Kronecker solve).
//   - Differencing sits outside the ARMA filter: the differenced series is
//     filtered and the last d + s·D levels are kept as explicit anchors. For
//     a complete series this is the exact likelihood; R's approximate
//     diffuse prior (κ = 1e6·σ² on the levels) differs from it by
//     O(level²/(κσ²)) per level: at most 0.003 in log-likelihood on the
//     reference datasets, and 4.6 (R lower) for the period-168 benchmark,
//     where 169 levels carry the prior. When a differenced series has missing values, simple
//     differencing would discard information, so the levels are put in the
//     state with R's κ prior and its F < 1e4 counting rule; this reproduces
//     R's numbers to 1e-8 (see testdata/r/arima_refs.R).
//   - A missing observation (NaN) is a prediction-only step.
//
// # Estimation
//
// Fit starts from a conditional-sum-of-squares fit (falling back to zero
// coefficients, never aborting), keeps every AR block stationary through
// its partial autocorrelations (tanh, Durbin–Levinson; Jones 1980, Monahan
// 1984), concentrates σ² and profiles the mean or drift out by GLS,
// minimises with gonum/optimize BFGS, reflects non-invertible MA roots and
// takes standard errors from a numerical Hessian. Result.Converged and
// Result.Note say whether and why not it converged.
//
// # Speed
//
// Without missing values the likelihood uses the Chandrasekhar recursions
// (O(r) per observation instead of O(r²)) with a steady-state switch; the
// transition is applied through its companion structure, never as a dense
// product. A fit of the (0,1,1)(0,1,1)[168] model, n = 2000, needs well
// under a megabyte of working memory.
//
// # Regression with ARIMA errors and Fourier terms
//
// With Spec.NX > 0 the model is y_t = μ + δ·t + x_tᵀβ + u_t with u_t the
// ARIMA process (FitX, LogLikX): β is profiled out of the exact likelihood
// by generalised least squares on the data and the regressor columns
// filtered with the same gains, missing values included; the mean or
// drift is the first regression column. NewFilterX keeps β and computes
// the regressors itself at each step's data time; Fourier gives the
// sin/cos terms of cycles given as durations, their phase taken from
// absolute time. ForecastX forecasts with future regressor values and
// gives standard errors with and without β's uncertainty (R's
// predict.Arima reports the latter).
//
// # Online use
//
// Filter absorbs one observation at a time (Step) and forecasts with
// variances (Forecast, ForecastJoint) without allocating; PathSystem writes
// the forecast distribution in state-space form (system, state mean and
// covariance) for path simulation into caller-owned buffers; AppendState and
// SetState save and restore it exactly. A Filter is not safe for concurrent
// use; distinct Filters are independent. Fit, LogLik and the other
// functions keep no shared state and may be called concurrently.
//
// # Errors
//
// Bad input (Inf, magnitudes above MaxAbsValue, series too short or
// constant, impossible orders) returns an error wrapping one of the
// sentinels in errors.go; nothing in this package panics on data.
//
// References:
//   - Box, G. E. P. & Jenkins, G. M. (1976). Time Series Analysis:
//     Forecasting and Control, revised ed. Holden-Day, ch. 9 (the
//     multiplicative seasonal model).
//   - Durbin, J. & Koopman, S. J. (2012). Time Series Analysis by State Space
//     Methods, 2nd ed. Oxford University Press.
//   - Gardner, G., Harvey, A. C. & Phillips, G. D. A. (1980). Algorithm AS 154.
//     Applied Statistics 29(3), 311–322.
//   - Harvey, A. C. (1989). Forecasting, Structural Time Series Models and the
//     Kalman Filter. Cambridge University Press.
//   - Jones, R. H. (1980). Technometrics 22(3), 389–395.
//   - Monahan, J. F. (1984). Biometrika 71(2), 403–404.
//   - Morf, M., Sidhu, G. S. & Kailath, T. (1974). IEEE Trans. Automatic
//     Control 19(4), 315–323.
//   - Herbst, E. (2015). Computational Economics 45(4), 693–705.
//   - Anderson, B. D. O. & Moore, J. B. (1979). Optimal Filtering.
//     Prentice-Hall, §6.7 (doubling algorithm).
package arima
