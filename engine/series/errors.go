package series

import "errors"

var (
	// ErrLate is returned by Observe for an observation whose bucket has
	// already closed.
	ErrLate = errors.New("series: late observation")
	// ErrDomain is returned by Observe for a value the series' transform
	// cannot take (for example a non-positive value under log).
	ErrDomain = errors.New("series: value outside the transform's domain")
	// ErrNotFinite is returned by Observe for NaN or ±Inf.
	ErrNotFinite = errors.New("series: value is not finite")
	// ErrSettings is returned by New and Restore for settings that cannot work.
	ErrSettings = errors.New("series: bad settings")
	// ErrIncompatible is returned by Restore when the snapshot was made
	// with another kind or step, so its window cannot be reused.
	ErrIncompatible = errors.New("series: snapshot incompatible with settings")
	// ErrNoData is returned by a fit job whose window holds too few values.
	ErrNoData = errors.New("series: too few values to fit")
	// ErrNoForecast is returned by EvaluateAlerts for a series without a
	// current forecast (no model yet, or a refit pending).
	ErrNoForecast = errors.New("series: no current forecast")
	// ErrAlertRule is returned by EvaluateAlerts for a rule that cannot
	// apply to the series (window beyond the horizon, bad levels).
	ErrAlertRule = errors.New("series: bad alert rule")
)
