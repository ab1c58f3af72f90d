package chart

import "errors"

var (
	// ErrShape is returned when Data.Times and Data.Values differ in
	// length, or a forecast point carries a different number of bounds
	// than Data.Levels has levels.
	ErrShape = errors.New("chart: mismatched lengths")

	// ErrOrder is returned when history times or forecast times go
	// backwards.
	ErrOrder = errors.New("chart: times out of order")

	// ErrLevel is returned when a level is not strictly between 0 and 100.
	ErrLevel = errors.New("chart: interval level outside (0, 100)")

	// ErrSize is returned when the requested width or height is outside
	// [MinWidth, MaxWidth] or [MinHeight, MaxHeight].
	ErrSize = errors.New("chart: size out of range")

	// ErrFormat is returned for an output format or file extension other
	// than SVG or PNG.
	ErrFormat = errors.New("chart: unknown output format")
)
