// Package engine is the umbrella of forewarn's pure computation. It holds
// no code itself; the work lives in its subpackages:
//
//   - engine/arima: exact-likelihood seasonal ARIMA models in state-space
//     form — maximum-likelihood fits, forecasts, and the allocation-free
//     online filter step.
//   - engine/transform: maps a raw series onto the model's scale and
//     forecasts back into raw units.
//   - engine/stationarity: tests that decide how a series is differenced.
//   - engine/auto: chooses a transform and a seasonal ARIMA order.
//   - engine/alert: turns a forecast into threshold-crossing probabilities.
//   - engine/backtest: rolling-origin evaluation of a forecaster.
//   - engine/series: the state machine of one metric series.
//
// Every subpackage works on plain values (float64 slices, times, small
// structs), performs no I/O, starts no goroutine of its own, and imports
// neither stream nor state. Two caveats: gonum/optimize, which the ARIMA
// fit uses, runs its evaluations on goroutines it owns for the duration of
// one Minimize call; and engine/internal/refdata, support for tests only,
// reads the committed reference files under testdata/.
package engine
