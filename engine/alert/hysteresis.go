package alert

import (
	"fmt"
	"math"
)

// Rule holds the two levels of an alert's hysteresis. The states are
// those of an ITU-T X.733 alarm: raised and cleared.
type Rule struct {
	// Raise: a cleared rule is raised when p ≥ Raise.
	Raise float64
	// Clear: a raised rule is cleared when p < Clear. Zero means
	// Raise/2 (see WithDefaults).
	Clear float64
	// Current is the rule's state for Evaluator.Decide. Unknown (the zero
	// value) places p against both levels; Cleared asks only whether
	// p ≥ Raise and Raised only whether p < Clear, the one question whose
	// answer can change that state, so the stopping rule of Decide is not
	// held up by the other level. Next ignores it.
	Current State
	// Precision, when positive, is the Monte Carlo standard error Decide
	// plans the estimate for once the decision is known, from fresh paths
	// when the deciding ones were fewer (PrecisionSE for a probability
	// that is published). Zero: the estimate of the deciding paths. Next
	// ignores it.
	Precision float64
	// PrecisionDraws, when positive, loosens Precision where p is far
	// from 0: the standard error aimed at is no smaller than that of
	// PrecisionDraws independent draws at the deciding estimate p,
	// √(p(1−p)/PrecisionDraws) (PrecisionN for a published probability).
	// A small p is still estimated to Precision, a middling one to the
	// precision of that many draws, which bounds the paths a published
	// estimate costs. Zero: Precision alone.
	PrecisionDraws int
}

// State is an alert rule's hysteresis state as Decide takes it.
type State int

const (
	// Unknown: test both levels.
	Unknown State = iota
	// Cleared: the rule is cleared; only Raise matters.
	Cleared
	// Raised: the rule is raised; only Clear matters.
	Raised
)

// StateOf returns Raised or Cleared.
func StateOf(raised bool) State {
	if raised {
		return Raised
	}
	return Cleared
}

// WithDefaults returns r with a zero Clear replaced by Raise/2.
func (r Rule) WithDefaults() Rule {
	if r.Clear == 0 {
		r.Clear = r.Raise / 2
	}
	return r
}

// Validate reports whether 0 < Clear < Raise ≤ 1 and 0 ≤ Precision < 1.
func (r Rule) Validate() error {
	if math.IsNaN(r.Raise) || math.IsNaN(r.Clear) || !(0 < r.Clear && r.Clear < r.Raise && r.Raise <= 1) {
		return fmt.Errorf("alert: rule raise %v clear %v: %w", r.Raise, r.Clear, ErrRule)
	}
	if r.PrecisionDraws < 0 {
		return fmt.Errorf("alert: rule precision draws %d: %w", r.PrecisionDraws, ErrRule)
	}
	if !(r.Precision >= 0 && r.Precision < 1) {
		return fmt.Errorf("alert: rule precision %v: %w", r.Precision, ErrRule)
	}
	return nil
}

// Next is the two-state hysteresis machine of an alert rule:
//
//	cleared → raised  when p ≥ Raise
//	raised  → cleared when p < Clear
//
// and no change otherwise; with Clear < Raise a probability that hovers
// about either level does not flap. changed is true on a transition (the
// moment to publish an alert message). A NaN probability changes nothing.
func Next(raised bool, p float64, r Rule) (raisedNow, changed bool) {
	if raised {
		if p < r.Clear {
			return false, true
		}
		return true, false
	}
	if p >= r.Raise {
		return true, true
	}
	return false, false
}
