package stationarity

import "errors"

var (
	// ErrMissing is returned by ADF and KPSS for a series with a missing value (NaN).
	ErrMissing = errors.New("stationarity: missing value")

	// ErrNotFinite is returned for a series with ±Inf.
	ErrNotFinite = errors.New("stationarity: value not finite")

	// ErrTooShort is returned when the series is too short for the test and its lags.
	ErrTooShort = errors.New("stationarity: series too short")

	// ErrBadArgument is returned for an unusable argument other than the data: a negative
	// lag count where none is allowed, a level outside the table, an unknown Regression.
	ErrBadArgument = errors.New("stationarity: bad argument")

	// ErrConstant is returned when the series (or its residuals) has no variation, so the
	// statistic is undefined.
	ErrConstant = errors.New("stationarity: series is constant")

	// ErrSingular is returned by ADF when the regressors are linearly dependent.
	ErrSingular = errors.New("stationarity: singular regression")
)
