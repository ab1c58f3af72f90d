package alert

import "fmt"

// Screen answers q for rule by the cheap shortcuts alone (exact marginal,
// skip bound, bracket), exactly as Decide would, and reports done false,
// without drawing a path, when Decide would have to simulate. It lets a
// caller keep the cheap answers where they are asked for and hand only
// the costly ones to another goroutine (Decide with the state space
// there). Screen does not allocate unless q or rule is bad.
func (e *Evaluator) Screen(q *Query, rule Rule) (est Estimate, done bool, err error) {
	noStop := rule.Raise == 0 && rule.Clear == 0
	if !noStop {
		if err := rule.Validate(); err != nil {
			return Estimate{}, true, fmt.Errorf("alert: decide: %w", err)
		}
	}
	var sc screened
	p, done, err := e.screen(q, &sc)
	est = Estimate{Eta: sc.eta}
	if err != nil {
		return est, true, err
	}
	if !done {
		return est, false, nil
	}
	est.P, est.Method, est.Lo, est.Hi = p, e.method, sc.lo, sc.hi
	if !noStop {
		est.Decision = place(sc.lo, sc.hi, rule)
	}
	return est, true, nil
}
