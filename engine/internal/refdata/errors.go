package refdata

import "errors"

var (
	// ErrNoModule is returned when no directory at or above the working
	// directory holds go.mod.
	ErrNoModule = errors.New("refdata: no go.mod at or above the working directory")

	// ErrHeader is returned when a series CSV does not start with the
	// header row "time,value".
	ErrHeader = errors.New("refdata: header is not time,value")

	// ErrValue is returned when a value cell is neither a number nor NA.
	ErrValue = errors.New("refdata: bad value row")
)
