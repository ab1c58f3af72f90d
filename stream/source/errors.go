package source

import "errors"

var (
	// ErrTopic is returned by DecodeToken and ParseTopic for a string that
	// AppendToken or AppendTopic cannot have written.
	ErrTopic = errors.New("source: not a source topic")

	// ErrOptions is returned by New for options it cannot run with.
	ErrOptions = errors.New("source: bad options")
)
