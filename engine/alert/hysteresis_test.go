package alert

import (
	"errors"
	"math"
	"testing"
)

// Two-level hysteresis (common practice for alerting: raise at one level,
// clear at a lower one so a value hovering near the raise level does not
// flap; the states are ITU-T X.733's raised and cleared). The sequence is
// raised once, stays raised while p ≥ Clear, is cleared below Clear, and
// is raised again.
func TestNextHysteresis(t *testing.T) {
	r := Rule{Raise: 0.9}.WithDefaults()
	if r.Clear != 0.45 {
		t.Fatalf("default clear %v, want Raise/2 = 0.45", r.Clear)
	}
	steps := []struct {
		p              float64
		raised, change bool
	}{
		{0.10, false, false},
		{0.89, false, false},
		{0.90, true, true}, // p ≥ Raise raises
		{0.95, true, false},
		{0.50, true, false}, // between levels: no repeat, no clear
		{0.91, true, false}, // above Raise again: no repeat
		{0.45, true, false}, // exactly Clear: still raised
		{0.44, false, true}, // p < Clear clears
		{0.60, false, false},
		{math.NaN(), false, false},
		{1.00, true, true}, // raised again
		{math.NaN(), true, false},
		{0.00, false, true},
	}
	raised, raises, clears := false, 0, 0
	for i, s := range steps {
		var changed bool
		raised, changed = Next(raised, s.p, r)
		if raised != s.raised || changed != s.change {
			t.Errorf("step %d p=%v: raised %v changed %v, want %v %v", i, s.p, raised, changed, s.raised, s.change)
		}
		if changed && raised {
			raises++
		}
		if changed && !raised {
			clears++
		}
	}
	if raises != 2 || clears != 2 {
		t.Errorf("raises %d clears %d, want 2 and 2", raises, clears)
	}
}

func TestRuleValidate(t *testing.T) {
	for _, r := range []Rule{{Raise: 0.9, Clear: 0.45}, {Raise: 1, Clear: 0.5}, {Raise: 0.2, Clear: 0.01}} {
		if err := r.Validate(); err != nil {
			t.Errorf("%+v: %v", r, err)
		}
	}
	for _, r := range []Rule{{Raise: 0.9, Clear: 0.9}, {Raise: 0.5, Clear: 0.6}, {Raise: 1.1, Clear: 0.5}, {Raise: 0.5}, {}, {Raise: math.NaN(), Clear: 0.1}, {Raise: 0.5, Clear: math.NaN()}} {
		if err := r.Validate(); !errors.Is(err, ErrRule) {
			t.Errorf("%+v: err %v, want ErrRule", r, err)
		}
	}
}
