package auto

import "errors"

var (
	// ErrBadOptions is returned by Select for options it cannot use: an
	// unknown transform or model string, a negative period or order bound.
	ErrBadOptions = errors.New("auto: bad options")

	// ErrTooShort is returned by Select when the series has too few
	// observed values to fit any candidate model.
	ErrTooShort = errors.New("auto: series too short")

	// ErrDomain is returned by Select when a fixed transform cannot be
	// applied to the series (e.g. log of a value ≤ 0).
	ErrDomain = errors.New("auto: transform cannot be applied to the series")

	// ErrNoModel is returned by Select when every candidate fit failed or
	// was rejected; it names the last reason.
	ErrNoModel = errors.New("auto: no acceptable model")
)
