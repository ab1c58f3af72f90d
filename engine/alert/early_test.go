package alert

import "testing"

// Error rate of the stopping rule at its first checks (property test,
// seeded): with the level that can change the rule's state 0.02, 0.05 and
// 0.08 above or below the true p (R mvtnorm pmvnorm, the cases of
// TestDecideErrorRate), many decisions are taken after one or two
// batches, where the confidence sequence has seen few paths and its
// normal approximation is weakest. Over 100 seeds per case and rule, a
// decision that contradicts pmvnorm must stay as rare as the 1 % the
// sequence promises: 8 or more wrong of 400 would have probability below
// 0.1 % at that rate (binomial), so the test allows 7 per 400. It also
// checks that at least a third of the decisions are that early, so that
// the test covers what it names.
func TestDecideErrorRateEarly(t *testing.T) {
	e := newEval(t, 60, 0)
	wrong, decided, early := 0, 0, 0
	for _, c := range loadCases(t)[:3] {
		if c.name == "rw_drift_down_below" {
			continue
		}
		q, ss := c.query(false), c.stateSpace()
		var rules []Rule
		for _, dp := range []float64{0.02, 0.05, 0.08} {
			rules = append(rules,
				Rule{Raise: c.pGenz + dp, Clear: c.pGenz / 2, Current: Cleared},
				Rule{Raise: c.pGenz - dp, Clear: (c.pGenz - dp) / 2, Current: Cleared},
				Rule{Raise: 0.95, Clear: c.pGenz + dp, Current: Raised},
				Rule{Raise: 0.95, Clear: c.pGenz - dp, Current: Raised})
		}
		for _, rule := range rules {
			if err := rule.Validate(); err != nil {
				t.Fatalf("%s: rule %+v: %v", c.name, rule, err)
			}
			for s := uint64(1); s <= 100; s++ {
				q.Seed = s
				est, err := e.Decide(q, ss, rule)
				if err != nil {
					t.Fatal(err)
				}
				if est.Decision == Undecided {
					continue
				}
				decided++
				if est.Paths <= 2*Batch {
					early++
				}
				if est.Decision != place(c.pGenz, c.pGenz, rule) {
					wrong++
				}
			}
		}
	}
	if decided < 2000 || wrong > 7*decided/400 {
		t.Errorf("%d wrong of %d decided (of 2400)", wrong, decided)
	}
	if early < decided/3 {
		t.Errorf("only %d of %d decisions within two batches of %d paths: the test does not test the first checks", early, decided, Batch)
	}
	t.Logf("%d wrong of %d decided, %d within two batches of %d paths", wrong, decided, early, Batch)
}
