package calibrate

import "errors"

var (
	// ErrOptions is returned by New for a horizon, level, rate or bound that
	// cannot be used.
	ErrOptions = errors.New("calibrate: bad options")

	// ErrState is returned by SetState and SetPending for a state that does
	// not fit the calibrator (another layout version, horizon or levels, or
	// a value out of range); the calibrator is then unchanged.
	ErrState = errors.New("calibrate: state does not fit")

	// ErrWarm is returned (wrapped) by WarmStart when the model's filter
	// cannot be built or the window gives no forecast error to learn from.
	ErrWarm = errors.New("calibrate: warm start")
)
