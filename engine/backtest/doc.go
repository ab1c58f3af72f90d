// Package backtest evaluates a forecaster by rolling-origin evaluation on one
// series, in raw units, against a seasonal-naive baseline.
//
// # Procedure
//
// For a series y of length n, a horizon h and N origins K steps apart, the
// origins are the training lengths T = n−h−(N−1)K, …, n−h−K, n−h: the last N
// positions, K apart, from which a full h-step forecast can still be compared
// with observed values (K = 1: every position). At each origin
// the forecaster sees y[0:T] only and forecasts y[T], …, y[T+h−1]; the
// seasonal-naive baseline forecasts the same values from the same data.
// Origins at which the forecaster fails are counted in Report.Failed and left
// out of every score (the model's and the baseline's), so both are scored on
// the same errors. Missing actual values (NaN) are skipped.
//
// # Scores
//
//   - MASE (Hyndman & Koehler 2006): each absolute error is divided by the
//     in-sample mean absolute error of the seasonal-naive forecast on that
//     origin's training data, Q_T = mean_{t} |y_t − y_{t−m}| (m the period;
//     m = 1, the naive forecast, for a non-seasonal series), and the scaled
//     errors are averaged over all origins and horizons. An origin whose
//     training data give Q_T = 0 (a constant series) is left out of the MASE.
//   - sMAPE, the definition 200·|y − ŷ| / (|y| + |ŷ|) averaged over all origins
//     and horizons, in percent (Makridakis 1993, with absolute values in the
//     denominator as in Hyndman & Koehler 2006, §3); a term with y = ŷ = 0 is 0.
//   - Coverage: the share of actual values inside each prediction interval
//     [lower, upper]; a NaN bound is an unbounded side.
//
// # Contract
//
// Run is pure computation: deterministic, no I/O, no goroutines. The
// forecaster is called once per origin, in order of increasing T, with a
// slice it must not keep or modify. The progress callback, when not nil, is
// called after each origin.
//
// References:
//   - Hyndman, R. J. & Koehler, A. B. (2006). Another look at measures of
//     forecast accuracy. International Journal of Forecasting 22(4), 679–688.
//   - Makridakis, S. (1993). Accuracy measures: theoretical and practical
//     concerns. International Journal of Forecasting 9(4), 527–529.
//   - Tashman, L. J. (2000). Out-of-sample tests of forecasting accuracy: an
//     analysis and review. International Journal of Forecasting 16(4),
//     437–450 (rolling-origin evaluation).
package backtest
