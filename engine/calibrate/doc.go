// Package calibrate widens or narrows a series' prediction bands, per
// horizon and level, so that they hold their nominal level on the series'
// own forecast errors.
//
// # Scores
//
// A forecast issued at origin t for horizon h has median m_{t,h} and
// standard deviation s_{t,h} on the model's scale (after the transform).
// When y_{t+h} is realised its standardised error is
//
//	z = (y_{t+h} − m_{t,h})/s_{t,h},   S = min(|z|, B),
//
// with B (Options.Bound, default 10) a cap on the score. For each horizon
// h = 1..H and level l (nominal miss rate α_l = 1 − level/100) the
// calibrator holds a threshold q_{h,l}; the calibrated band is
//
//	m ± q_{h,l}·s   on the model's scale,
//
// the model's own band with its multiplier Φ⁻¹(1 − α_l/2) replaced by q
// (Factor is the ratio of the two). The band keeps the model's shape, and
// the caller maps its ends through the exact inverse transform, which keeps
// quantiles because the inverse is monotone (a counter's floor is then
// applied as before).
//
// # Warm start (Learn, WarmStart)
//
// Empirical prediction intervals (Williams & Goodman 1971; Lee & Scholtes
// 2014) take the band's spread from the errors of forecasts made on the
// series' own past. Learn takes the |z| of such forecasts per horizon and,
// per level, the finite-sample conformal quantile, the ⌈(n_h+1)(1−α_l)⌉-th
// smallest (Vovk, Gammerman & Shafer 2005; Angelopoulos & Bates 2021), or
// the normal-shape scale √(Σz²/n_h)·Φ⁻¹(1 − α_l/2) when n_h is too small for
// that rank; each factor is shrunk towards the previous horizon's with
// weight n₀ = Prior (towards 1 at h = 1). WarmStart collects the errors
// by running a fitted model's filter once over a window and forecasting at
// up to N
// evenly spaced origins; its parameters were fitted on that window, so its
// errors leave out the parameters' uncertainty. Refitting at earlier
// origins (as forewarn backtest does) includes it, at the cost of a fit per
// origin.
//
// # Online update (Observe, Issue)
//
// Each closed bucket resolves the forecasts issued for it, one per horizon
// (issued h buckets earlier), and moves every threshold by quantile tracking
// (Angelopoulos, Candès & Tibshirani 2023, §2, the P part of conformal PID
// control), err being the miss of the band as it was published (q' the
// threshold at issue, Threshold(h, l) then):
//
//	err = 1{S > q'},   q_{h,l} ← q_{h,l} + η·(err − α_l).
//
// Written in α_t = 1 − q/B this is adaptive conformal inference (Gibbs &
// Candès 2021, eq. 2), α_{t+1} = α_t + γ(α − err_t) with γ = η/B, over the
// nested sets C(α) = {y : S(y) ≤ B(1 − α)}, which are everything for α ≤ 0
// and empty for α > 1. Their Proposition 1 therefore holds for every
// horizon and level, whatever the data:
//
//	|(1/T)·Σ_{t≤T} err_t − α| ≤ (max(α_1, 1 − α_1) + γ)/(γT).
//
// Forecasts for horizon h arrive h buckets late, so α_t moves up to h
// steps before its first feedback; the identity Σ(α − err_t) = (α_{T+1} −
// α_1)/γ behind the bound still holds (each update adds γ(α − err)), and
// since a miss needs q' < B and a hit q' ≥ 0, α_t stays in [−hγ, 1 + hγ]:
//
//	|(1/T)·Σ_{t≤T} err_t − α| ≤ (max(α_1, 1 − α_1) + hγ)/(γT)
//
// for the T forecasts of horizon h resolved so far, err_t the miss of the
// band as published.
//
// # Refits
//
// A series refits its model every so often; a refit changes the score
// function, which adaptive conformal inference allows at every step (Gibbs
// & Candès 2021, §2). So once the calibrator has updated online, a refit
// keeps its thresholds (KeepsAtRefit) and the bound above holds for the
// running series across refits; the warm start serves only a calibrator
// that has seen no realised value yet.
//
// # State and cost
//
// The fixed state (AppendState) is 8 + 3L + H·L float64 values: 1 072 bytes
// at H = 60 with two levels. The forecasts issued and not yet realised are
// H(H+1)/2 (median, 1/sd, L thresholds at issue) tuples, 12 + 4L bytes each
// in memory (36 600 bytes at H = 60 with two levels); AppendPending writes
// them as float64 (58 560 bytes) for a restart that continues every update
// exactly. The record of a series
// keeps the fixed state only: a restart without the pending forecasts
// loses at most h updates of horizon h, which moves no threshold by more
// than h·η·max(α, 1 − α), and on a seeded t(3) simulation changes the
// coverage of the next 3000 buckets by under 0.001 (TestRestartWithoutPending).
// Observe costs O(H·L) and Issue O(H); they
// do not allocate.
//
// # Concurrency
//
// A Calibrator is owned by one goroutine. The package does no I/O and
// starts no goroutine.
//
// References:
//   - Williams, W. H. & Goodman, M. L. (1971). A simple method for the
//     construction of empirical confidence limits for economic forecasts.
//     Journal of the American Statistical Association 66(336), 752–754.
//   - Lee, Y. S. & Scholtes, S. (2014). Empirical prediction intervals
//     revisited. International Journal of Forecasting 30(2), 217–234.
//   - Vovk, V., Gammerman, A. & Shafer, G. (2005). Algorithmic Learning in
//     a Random World. Springer (split conformal prediction).
//   - Angelopoulos, A. N. & Bates, S. (2021). A gentle introduction to
//     conformal prediction and distribution-free uncertainty
//     quantification. arXiv:2107.07511, §1.1.
//   - Gibbs, I. & Candès, E. (2021). Adaptive conformal inference under
//     distribution shift. Advances in Neural Information Processing Systems
//     34 (Proposition 1).
//   - Angelopoulos, A. N., Candès, E. J. & Tibshirani, R. J. (2023).
//     Conformal PID control for time series prediction. Advances in Neural
//     Information Processing Systems 36.
package calibrate
