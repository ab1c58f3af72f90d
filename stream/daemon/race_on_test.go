//go:build race

package daemon

// raceEnabled: the race detector slows every goroutine several times, so
// wall-clock acceptance bounds are logged, not asserted, under it.
const raceEnabled = true
