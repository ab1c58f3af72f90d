package backtest

import "errors"

var (
	// ErrBadOptions is returned by Run for a horizon, origin count, period or
	// level that cannot be used.
	ErrBadOptions = errors.New("backtest: bad options")

	// ErrTooShort is returned by Run when the series is too short for the
	// requested horizon and number of origins.
	ErrTooShort = errors.New("backtest: series too short")

	// ErrAllFailed is returned by Run when the forecaster failed at every
	// origin; it wraps the last failure's message.
	ErrAllFailed = errors.New("backtest: the forecaster failed at every origin")

	// ErrBadForecast is returned (wrapped, per origin) when a forecaster
	// returns slices of the wrong length.
	ErrBadForecast = errors.New("backtest: forecast has the wrong shape")
)
