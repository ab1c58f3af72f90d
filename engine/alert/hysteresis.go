package alert

import (
	"fmt"
	"math"
)

// Rule holds the two levels of an alert's hysteresis.
type Rule struct {
	// Fire: a resolved rule starts firing when p ≥ Fire.
	Fire float64
	// Resolve: a firing rule resolves when p < Resolve. Zero means
	// Fire/2 (see WithDefaults).
	Resolve float64
}

// WithDefaults returns r with a zero Resolve replaced by Fire/2.
func (r Rule) WithDefaults() Rule {
	if r.Resolve == 0 {
		r.Resolve = r.Fire / 2
	}
	return r
}

// Validate reports whether 0 < Resolve < Fire ≤ 1.
func (r Rule) Validate() error {
	if math.IsNaN(r.Fire) || math.IsNaN(r.Resolve) || !(0 < r.Resolve && r.Resolve < r.Fire && r.Fire <= 1) {
		return fmt.Errorf("alert: rule fire %v resolve %v: %w", r.Fire, r.Resolve, ErrRule)
	}
	return nil
}

// Next is the two-state hysteresis machine of an alert rule:
//
//	resolved → firing   when p ≥ Fire
//	firing   → resolved when p < Resolve
//
// and no change otherwise; with Resolve < Fire a probability that hovers
// about either level does not flap. changed is true on a transition (the
// moment to publish an alert message). A NaN probability changes nothing.
func Next(firing bool, p float64, r Rule) (firingNow, changed bool) {
	if firing {
		if p < r.Resolve {
			return false, true
		}
		return true, false
	}
	if p >= r.Fire {
		return true, true
	}
	return false, false
}
