package alert

import (
	"errors"
	"math"
	"testing"
)

// Two-level hysteresis (common practice for alerting: fire at one level,
// clear at a lower one so a value hovering near the firing level does not
// flap). The sequence fires once, stays firing while p ≥ Resolve, resolves
// below Resolve, and fires again.
func TestNextHysteresis(t *testing.T) {
	r := Rule{Fire: 0.9}.WithDefaults()
	if r.Resolve != 0.45 {
		t.Fatalf("default resolve %v, want Fire/2 = 0.45", r.Resolve)
	}
	steps := []struct {
		p              float64
		firing, change bool
	}{
		{0.10, false, false},
		{0.89, false, false},
		{0.90, true, true}, // p ≥ Fire fires
		{0.95, true, false},
		{0.50, true, false}, // between levels: no repeat, no resolve
		{0.91, true, false}, // above Fire again: no repeat
		{0.45, true, false}, // exactly Resolve: still firing
		{0.44, false, true}, // p < Resolve resolves
		{0.60, false, false},
		{math.NaN(), false, false},
		{1.00, true, true}, // re-fires
		{math.NaN(), true, false},
		{0.00, false, true},
	}
	firing, fires, resolves := false, 0, 0
	for i, s := range steps {
		var changed bool
		firing, changed = Next(firing, s.p, r)
		if firing != s.firing || changed != s.change {
			t.Errorf("step %d p=%v: firing %v changed %v, want %v %v", i, s.p, firing, changed, s.firing, s.change)
		}
		if changed && firing {
			fires++
		}
		if changed && !firing {
			resolves++
		}
	}
	if fires != 2 || resolves != 2 {
		t.Errorf("fires %d resolves %d, want 2 and 2", fires, resolves)
	}
}

func TestRuleValidate(t *testing.T) {
	for _, r := range []Rule{{0.9, 0.45}, {1, 0.5}, {0.2, 0.01}} {
		if err := r.Validate(); err != nil {
			t.Errorf("%+v: %v", r, err)
		}
	}
	for _, r := range []Rule{{0.9, 0.9}, {0.5, 0.6}, {1.1, 0.5}, {0.5, 0}, {0, 0}, {math.NaN(), 0.1}, {0.5, math.NaN()}} {
		if err := r.Validate(); !errors.Is(err, ErrRule) {
			t.Errorf("%+v: err %v, want ErrRule", r, err)
		}
	}
}
