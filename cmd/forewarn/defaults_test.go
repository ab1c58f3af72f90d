package main

import (
	"testing"

	"forewarn/config"
)

// forewarn state reads the data directory a daemon run without --data or
// state.dir writes: the configuration's default. The usage text needs the
// directory as a constant, so it is written twice; this keeps the two
// equal.
func TestStateDefaultDataIsTheConfigs(t *testing.T) {
	if want := config.Default().State.Dir; stateDefaultData != want {
		t.Errorf("forewarn state --data defaults to %q, the daemon's state.dir to %q", stateDefaultData, want)
	}
}
