// Package stationarity holds the tests that decide how a series is differenced before an
// ARIMA model is fitted, and the residual check after: the augmented Dickey–Fuller unit-root
// test, the KPSS stationarity test (level and trend), a seasonal-strength measure with the
// seasonal-differencing decision built on it, and the Ljung–Box portmanteau test.
//
// Every function takes a plain []float64 in time order and returns values; nothing is kept
// between calls, so any function may be called from several goroutines at once. These run at
// refit time, not per observation: clarity comes before saving allocations.
//
// # Missing values
//
// ADF and KPSS need a gap-free series and return ErrMissing on NaN. NDiffs drops the missing
// values before testing. SeasonalStrength and LjungBox skip them as R's decompose and
// Box.test do (see each function).
//
// # Conventions
//
// ADF and KPSS follow the definitions in statsmodels 0.13.5 (adfuller with a fixed lag,
// kpss), which the tests check to 1e-6; LjungBox follows R 4.2.2 Box.test; SeasonalStrength
// follows R 4.2.2 decompose. A test's p-value below the chosen level is read as a rejection
// of its null: a unit root for ADF, stationarity for KPSS (common practice).
package stationarity
