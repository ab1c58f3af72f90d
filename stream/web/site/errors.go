package site

import "errors"

// ErrNotRunning is returned by a Source when it cannot be read because
// the daemon behind it is not running (starting or shutting down).
var ErrNotRunning = errors.New("site: daemon not running")
