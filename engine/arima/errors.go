package arima

import (
	"errors"
	"fmt"
)

// Sentinel errors. Functions wrap them with %w and the operation, so test
// with errors.Is.
var (
	// ErrSpec is returned (wrapped in a *SpecError) when a model
	// specification is malformed or impossible.
	ErrSpec = errors.New("arima: invalid model specification")

	// ErrParams is returned by NewModel when the parameter vector does not
	// match the specification or holds a non-finite value.
	ErrParams = errors.New("arima: invalid parameters")

	// ErrData is returned when the series holds +Inf, -Inf or a value too
	// large in magnitude to square safely (|y| > MaxAbsValue).
	ErrData = errors.New("arima: invalid data")

	// ErrTooShort is returned when, after differencing and dropping missing
	// values, fewer observations remain than the model needs.
	ErrTooShort = errors.New("arima: series too short for the model")

	// ErrConstant is returned when the differenced series has no variation,
	// so the innovation variance would be zero and the likelihood unbounded.
	ErrConstant = errors.New("arima: series is constant after differencing")

	// ErrNonStationary is returned when an AR polynomial has a root on or
	// inside the unit circle where a stationary model is required.
	ErrNonStationary = errors.New("arima: AR part is not stationary")

	// ErrNumerical is returned when the Kalman filter meets a non-positive
	// or non-finite prediction variance it cannot recover from.
	ErrNumerical = errors.New("arima: numerical failure in the Kalman filter")

	// ErrNotReady is returned by Filter.PathSystem before the filter has
	// seen the d + s·D observations that anchor its forecasts.
	ErrNotReady = errors.New("arima: filter not ready: anchors unknown")
	// ErrState is returned by Filter.SetState for a state vector that was
	// not produced by AppendState of a filter of the same model shape.
	ErrState = errors.New("arima: invalid filter state")
	// ErrRegressors is returned when the regressors of a model with
	// Spec.NX > 0 are missing, of the wrong shape, non-finite, or
	// collinear.
	ErrRegressors = errors.New("arima: invalid regressors")
)

// MaxAbsValue is the largest magnitude accepted in a series. Squares and
// sums of squares of larger values can overflow float64.
const MaxAbsValue = 1e100

// SpecError reports which part of a specification is wrong. It wraps ErrSpec.
type SpecError struct {
	Field  string // "p", "d", "q", "P", "D", "Q", "period", "mean", "drift", "regressors" or "syntax"
	Value  string // the offending value as written
	Reason string
}

func (e *SpecError) Error() string {
	if e.Value == "" {
		return fmt.Sprintf("arima: invalid model specification: %s: %s", e.Field, e.Reason)
	}
	return fmt.Sprintf("arima: invalid model specification: %s = %s: %s", e.Field, e.Value, e.Reason)
}

// Unwrap returns ErrSpec.
func (e *SpecError) Unwrap() error { return ErrSpec }
