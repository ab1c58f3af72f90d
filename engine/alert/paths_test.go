package alert

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"
)

// stateSpace writes the case's process (testdata/crossing.R) in the form
// of StateSpace: the random walk with drift as ARIMA(0,1,0) with constant
// a (r = 1, δ = (1), level x0), the AR(1) about b as ARMA(1,0) with mean b.
func (c refCase) stateSpace() *StateSpace {
	if c.kind == "rw" {
		return &StateSpace{Phi: []float64{0}, Theta: []float64{1}, Delta: []float64{1},
			C: c.a, Sigma2: c.sigma * c.sigma, X: []float64{0, c.x0}, P: []float64{1, 0, 0, 0}}
	}
	return &StateSpace{Phi: []float64{c.a}, Theta: []float64{1},
		C: c.b, Sigma2: c.sigma * c.sigma, X: []float64{c.a * (c.x0 - c.b)}, P: []float64{1}}
}

// Gauge mode through the state-space paths, all paths drawn (zero Rule):
// against R mvtnorm 1.1-3 pmvnorm (Genz 1992; tolerance 4·sqrt(SE² +
// err²)) and R's brute-force simulation (10⁶ paths, 4 combined SE).
func TestDecideAgainstReferences(t *testing.T) {
	e := newEval(t, 60, 0)
	sims := 0
	for _, c := range loadCases(t) {
		q := c.query(false)
		est, err := e.Decide(q, c.stateSpace(), Rule{})
		if err != nil {
			t.Fatalf("%s: %v", c.name, err)
		}
		se := est.StdErr
		if est.Method == MethodSimulation {
			sims++
			if est.Paths != e.Paths() || est.Decision != Undecided {
				t.Errorf("%s: %d paths, decision %v; want all %d, undecided", c.name, est.Paths, est.Decision, e.Paths())
			}
		}
		comb := math.Hypot(se, c.genzErr)
		if math.Abs(est.P-c.pGenz) > 4*comb+1e-9 {
			t.Errorf("%s: p = %.5f, pmvnorm %.5f, tol %.5f", c.name, est.P, c.pGenz, 4*comb)
		}
		if tol := 4 * math.Hypot(se, c.simSE); math.Abs(est.P-c.pSim) > tol+1e-9 {
			t.Errorf("%s: p = %.5f, R simulation %.5f, tol %.5f", c.name, est.P, c.pSim, tol)
		}
		t.Logf("%s: p = %.5f (%v, SE %.5f, %d paths), pmvnorm %.5f ± %.1e, |diff|/comb SE %.2f",
			c.name, est.P, est.Method, se, est.Paths, c.pGenz, c.genzErr, ratio(est.P-c.pGenz, comb))
	}
	if sims < 4 {
		t.Errorf("only %d cases simulated, crossing.csv has 4 gauge cases that need it", sims)
	}
}

// ratio returns |diff|/se, 0 when diff is within rounding (an exact value).
func ratio(diff, se float64) float64 {
	if math.Abs(diff) < 1e-12 {
		return 0
	}
	return math.Abs(diff) / se
}

// The stopping rule places p against the rule's levels and stops early
// when the levels are far from p. The true p is R mvtnorm pmvnorm's
// (crossing.csv, rw_drift_up, p = 0.2768): levels well above, around and
// below it must give BelowClear, Between and AboveRaise within two
// batches; levels straddling it closely cannot be decided, so all paths
// are drawn and Decision is Undecided.
func TestDecideStopsEarly(t *testing.T) {
	e := newEval(t, 60, 0)
	c := loadCases(t)[0]
	if c.name != "rw_drift_up" {
		t.Fatalf("first case %s, want rw_drift_up", c.name)
	}
	q, ss := c.query(false), c.stateSpace()
	for _, tc := range []struct {
		rule Rule
		want Decision
	}{
		{Rule{Raise: 0.9, Clear: 0.45}, BelowClear},
		{Rule{Raise: 0.6, Clear: 0.1}, Between},
		{Rule{Raise: 0.15, Clear: 0.05}, AboveRaise},
		{Rule{Raise: 0.2775, Clear: 0.2765}, Undecided},
	} {
		est, err := e.Decide(q, ss, tc.rule)
		if err != nil {
			t.Fatal(err)
		}
		if est.Decision != tc.want {
			t.Errorf("%+v: decision %v, want %v (p = %.4f, [%.4f, %.4f], pmvnorm %.4f)", tc.rule, est.Decision, tc.want, est.P, est.Lo, est.Hi, c.pGenz)
		}
		if tc.want != Undecided && est.Paths > 2*Batch {
			t.Errorf("%+v: %d paths, want at most %d", tc.rule, est.Paths, 2*Batch)
		}
		if tc.want == Undecided && est.Paths != e.Paths() {
			t.Errorf("%+v: %d paths, want all %d", tc.rule, est.Paths, e.Paths())
		}
		if !(est.Lo <= c.pGenz && c.pGenz <= est.Hi) {
			t.Errorf("%+v: interval [%.4f, %.4f] misses pmvnorm %.4f", tc.rule, est.Lo, est.Hi, c.pGenz)
		}
		t.Logf("%+v: %v after %d paths, p = %.4f in [%.4f, %.4f]", tc.rule, est.Decision, est.Paths, est.P, est.Lo, est.Hi)
	}
}

// Error rate of the stopping rule (property test, seeded): with levels
// 0.03 on either side of the true p (R pmvnorm, rw_drift_up and
// rw_driftless), over 200 seeds each a decision that contradicts pmvnorm
// must be rare. The confidence sequence promises at most DecisionError =
// 1 % per evaluation; 8 or more wrong of 400 would have probability below
// 0.1 % at that rate (binomial), so the test allows 7.
func TestDecideErrorRate(t *testing.T) {
	e := newEval(t, 60, 0)
	wrong, decided := 0, 0
	for _, c := range loadCases(t)[:3] {
		if c.name == "rw_drift_down_below" {
			continue
		}
		q, ss := c.query(false), c.stateSpace()
		for _, rule := range []Rule{{Raise: c.pGenz + 0.03, Clear: c.pGenz - 0.03}, {Raise: c.pGenz - 0.01, Clear: c.pGenz - 0.03}} {
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
				if est.Decision != place(c.pGenz, c.pGenz, rule) {
					wrong++
				}
			}
		}
	}
	if decided < 300 || wrong > 7 {
		t.Errorf("%d wrong of %d decided (of 400)", wrong, decided)
	}
	t.Logf("%d wrong of %d decided", wrong, decided)
}

// Same input, same estimate: the seed comes from the query's values; an
// explicit Seed changes the draws.
func TestDecideDeterministic(t *testing.T) {
	e := newEval(t, 60, 0)
	c := loadCases(t)[2]
	q, ss := c.query(false), c.stateSpace()
	a, err := e.Decide(q, ss, Rule{})
	if err != nil {
		t.Fatal(err)
	}
	e2 := newEval(t, 60, 0)
	b, _ := e2.Decide(c.query(false), c.stateSpace(), Rule{})
	if a != b {
		t.Errorf("two evaluators: %+v vs %+v", a, b)
	}
	q.Seed = 12345
	d, _ := e.Decide(q, ss, Rule{})
	if d.P == a.P {
		t.Errorf("seed 12345 gave the same p %.6f as the derived seed", d.P)
	}
}

// In steady state Decide does not allocate, for a k = 120 seasonal model
// (m = 8) with the stopping rule on and off.
func TestDecideDoesNotAllocate(t *testing.T) {
	e := newEval(t, 360, 0)
	c := loadArimaCases(t)[1]
	q, ss, _ := c.setup(t)
	for _, rule := range []Rule{{}, {Raise: 0.9, Clear: 0.45}} {
		_, _ = e.Decide(q, ss, rule)
		allocs := testing.AllocsPerRun(3, func() { _, _ = e.Decide(q, ss, rule) })
		if allocs != 0 || e.LastMethod() != MethodSimulation {
			t.Errorf("%+v: %v allocations, method %v", rule, allocs, e.LastMethod())
		}
	}
}

// Bad input gives the named error: no system, a system that disagrees with
// the query, a malformed system, a bad rule.
func TestDecideBadInput(t *testing.T) {
	e := newEval(t, 60, 0)
	c := loadCases(t)[0]
	q := c.query(false)
	if _, err := e.Decide(q, nil, Rule{}); !errors.Is(err, ErrNoStateSpace) {
		t.Errorf("nil system: %v", err)
	}
	ss := c.stateSpace()
	ss.C += 0.01 // drift off by 0.01: means disagree
	if _, err := e.Decide(q, ss, Rule{}); !errors.Is(err, ErrStateSpace) {
		t.Errorf("wrong drift: %v", err)
	}
	ss = c.stateSpace()
	ss.P[0] = 2 // variance at step 1 twice the query's
	if _, err := e.Decide(q, ss, Rule{}); !errors.Is(err, ErrStateSpace) {
		t.Errorf("wrong variance: %v", err)
	}
	ss = c.stateSpace()
	ss.X = ss.X[:1]
	if _, err := e.Decide(q, ss, Rule{}); !errors.Is(err, ErrStateSpace) {
		t.Errorf("short state: %v", err)
	}
	ss = c.stateSpace()
	ss.Phi[0] = math.NaN()
	if _, err := e.Decide(q, ss, Rule{}); !errors.Is(err, ErrStateSpace) {
		t.Errorf("NaN φ: %v", err)
	}
	if _, err := e.Decide(q, c.stateSpace(), Rule{Raise: 0.3, Clear: 0.5}); !errors.Is(err, ErrRule) {
		t.Errorf("clear above raise: %v", err)
	}
}

// With the rule's state given, Decide asks only the question that can
// change it. The true p is R mvtnorm pmvnorm's (crossing.csv,
// rw_drift_up, p = 0.2768). Against Raise 0.6 / Clear 0.2775 (Clear 0.0007
// above p), both levels cannot be decided within the budget, but a
// cleared rule only needs "p < 0.6" and a raised rule with Clear 0.1 /
// Raise 0.2775 only needs "p ≥ 0.1": both stop after the first batch. A
// raised rule with Clear 0.2775 must still draw every path (p is within
// the Monte Carlo error of that level).
func TestDecideOnlyTheLevelThatMatters(t *testing.T) {
	e := newEval(t, 60, 0)
	c := loadCases(t)[0]
	if c.name != "rw_drift_up" {
		t.Fatalf("first case %s, want rw_drift_up", c.name)
	}
	q, ss := c.query(false), c.stateSpace()
	for _, tc := range []struct {
		rule     Rule
		want     Decision
		maxPaths int
	}{
		{Rule{Raise: 0.6, Clear: 0.2775}, Undecided, e.Paths()},
		{Rule{Raise: 0.6, Clear: 0.2775, Current: Cleared}, BelowRaise, Batch},
		{Rule{Raise: 0.6, Clear: 0.2775, Current: Raised}, Undecided, e.Paths()},
		{Rule{Raise: 0.2775, Clear: 0.1, Current: Raised}, AboveClear, Batch},
		{Rule{Raise: 0.2775, Clear: 0.1, Current: Cleared}, Undecided, e.Paths()},
		{Rule{Raise: 0.15, Clear: 0.1, Current: Cleared}, AboveRaise, 2 * Batch},
		{Rule{Raise: 0.9, Clear: 0.45, Current: Raised}, BelowClear, 2 * Batch},
	} {
		est, err := e.Decide(q, ss, tc.rule)
		if err != nil {
			t.Fatal(err)
		}
		if est.Decision != tc.want {
			t.Errorf("%+v: decision %v, want %v (p = %.4f, [%.4f, %.4f], pmvnorm %.4f)", tc.rule, est.Decision, tc.want, est.P, est.Lo, est.Hi, c.pGenz)
		}
		if est.Paths > tc.maxPaths || tc.want == Undecided && est.Paths != e.Paths() {
			t.Errorf("%+v: %d paths, want at most %d", tc.rule, est.Paths, tc.maxPaths)
		}
		if !(est.Lo <= est.P && est.P <= est.Hi && est.Lo <= c.pGenz && c.pGenz <= est.Hi) {
			t.Errorf("%+v: interval [%.4f, %.4f], p %.4f, pmvnorm %.4f", tc.rule, est.Lo, est.Hi, est.P, c.pGenz)
		}
		// The transition Next takes on P agrees with the decision.
		if raised, changed := Next(tc.rule.Current == Raised, est.P, tc.rule); tc.want != Undecided &&
			changed != (tc.want == AboveRaise && tc.rule.Current == Cleared || tc.want == BelowClear && tc.rule.Current == Raised) {
			t.Errorf("%+v: Next on p %.4f gives raised %v changed %v against decision %v", tc.rule, est.P, raised, changed, est.Decision)
		}
		t.Logf("%+v: %v after %d paths, p = %.4f in [%.4f, %.4f]", tc.rule, est.Decision, est.Paths, est.P, est.Lo, est.Hi)
	}
}

// With Rule.Precision the estimate after the decision comes from fresh
// paths planned for a standard error of Precision (checked to within
// 1.5 times it: the plan uses the deciding paths' variance); without it,
// the decision alone stops the simulation (TestDecideStopsEarly). The true p
// is R mvtnorm pmvnorm's (crossing.csv, rw_drift_up, p = 0.2768), far
// from the levels 0.9 / 0.45, so the decision comes within two batches
// (common practice: a published probability needs a stated precision;
// the estimate must lie within 4 of its standard errors and pmvnorm's
// error of pmvnorm). A negative or NaN precision is an invalid rule.
func TestDecidePrecision(t *testing.T) {
	e := newEval(t, 60, 0)
	c := loadCases(t)[0]
	q, ss := c.query(false), c.stateSpace()
	base, err := e.Decide(q, ss, Rule{Raise: 0.9, Clear: 0.45})
	if err != nil {
		t.Fatal(err)
	}
	for _, prec := range []float64{PrecisionSE, 0.004} {
		est, err := e.Decide(q, ss, Rule{Raise: 0.9, Clear: 0.45, Precision: prec})
		if err != nil {
			t.Fatal(err)
		}
		if est.Decision != BelowClear {
			t.Errorf("precision %v: decision %v, want %v", prec, est.Decision, BelowClear)
		}
		if est.StdErr > 1.5*prec || est.Paths <= base.Paths {
			t.Errorf("precision %v: stopped at SE %.4f after %d paths (decision alone: SE %.4f after %d)",
				prec, est.StdErr, est.Paths, base.StdErr, base.Paths)
		}
		if d := math.Abs(est.P - c.pGenz); d > 4*math.Hypot(est.StdErr, c.genzErr) {
			t.Errorf("precision %v: p %.4f, pmvnorm %.4f", prec, est.P, c.pGenz)
		}
		t.Logf("precision %v: p %.4f ± %.4f after %d paths; decision alone %.4f ± %.4f after %d", prec, est.P, est.StdErr, est.Paths, base.P, base.StdErr, base.Paths)
	}
	for _, prec := range []float64{-0.01, math.NaN(), 1} {
		if _, err := e.Decide(q, ss, Rule{Raise: 0.9, Clear: 0.45, Precision: prec}); !errors.Is(err, ErrRule) {
			t.Errorf("precision %v: error %v, want ErrRule", prec, err)
		}
	}
	if _, err := e.Decide(q, ss, Rule{Raise: 0.9, Clear: 0.45, Precision: PrecisionSE, PrecisionDraws: -1}); !errors.Is(err, ErrRule) {
		t.Errorf("precision draws -1: error %v, want ErrRule", err)
	}

	// PrecisionDraws loosens the target where p is away from 0: the
	// estimate is planned for the standard error of PrecisionN independent
	// draws at p (binomial, common practice), with fewer paths than the
	// absolute Precision asks for, and it still agrees with pmvnorm.
	abs, err := e.Decide(q, ss, Rule{Raise: 0.9, Clear: 0.45, Precision: PrecisionSE})
	if err != nil {
		t.Fatal(err)
	}
	rel, err := e.Decide(q, ss, Rule{Raise: 0.9, Clear: 0.45, Precision: PrecisionSE, PrecisionDraws: PrecisionN})
	if err != nil {
		t.Fatal(err)
	}
	target := math.Sqrt(c.pGenz * (1 - c.pGenz) / PrecisionN)
	if target <= PrecisionSE {
		t.Fatalf("case p %.4f: √(p(1−p)/%d) = %.4f does not loosen %v; the check needs a middling p", c.pGenz, PrecisionN, target, PrecisionSE)
	}
	if rel.StdErr > 1.5*target || rel.Paths >= abs.Paths || rel.Paths <= base.Paths {
		t.Errorf("precision draws %d: SE %.4f after %d paths, want about %.4f with fewer paths than Precision alone (%d) and more than the decision (%d)",
			PrecisionN, rel.StdErr, rel.Paths, target, abs.Paths, base.Paths)
	}
	if d := math.Abs(rel.P - c.pGenz); d > 4*math.Hypot(rel.StdErr, c.genzErr) {
		t.Errorf("precision draws %d: p %.4f, pmvnorm %.4f", PrecisionN, rel.P, c.pGenz)
	}
	t.Logf("precision draws %d: p %.4f ± %.4f after %d paths (target %.4f); Precision alone %d paths", PrecisionN, rel.P, rel.StdErr, rel.Paths, target, abs.Paths)
}

// Query.Scale widens each step's error by its own factor, W_j = m_j +
// f_j·e_j. Against a brute-force simulation of the case's process (common
// practice: paths drawn step by step, each step's deviation from its mean
// scaled by f_j), Decide (state-space paths) and Probability (joint
// covariance) agree within 4 combined standard errors for every case of
// crossing.csv with a gauge window, with factors rising from 0.8 to 1.3
// over the window; and an unscaled run differs from the scaled reference
// somewhere by more than that. A Scale of the wrong length or with a
// non-positive factor is an error.
func TestScalePerStep(t *testing.T) {
	e := newEval(t, 60, 0)
	differs := false
	for _, c := range loadCases(t) {
		if c.k < 2 {
			continue
		}
		q := c.query(false)
		mean, variance, joint := c.moments()
		scale := make([]float64, c.h)
		for j := range scale {
			scale[j] = 0.8 + 0.5*float64(min(j, c.k-1))/float64(c.k-1)
		}
		sq := *q
		sq.Scale = scale
		sq.Variance = make([]float64, c.h)
		for j := range variance {
			sq.Variance[j] = variance[j] * scale[j] * scale[j]
		}
		// Brute force: the process's own paths, scaled about their means.
		rng := rand.New(rand.NewPCG(5, 5))
		const n = 40000
		hits := 0
		for range n {
			x, crossed := c.x0, false
			for j := 1; j <= c.k; j++ {
				x = c.step(x, rng)
				crossed = crossed || c.beyond(mean[j-1]+scale[j-1]*(x-mean[j-1]))
			}
			if crossed {
				hits++
			}
		}
		want := float64(hits) / n
		seW := math.Sqrt(want * (1 - want) / n)
		est, err := e.Decide(&sq, c.stateSpace(), Rule{})
		if err != nil {
			t.Fatalf("%s: %v", c.name, err)
		}
		pj, _, err := e.Probability(&sq, joint)
		if err != nil {
			t.Fatalf("%s: %v", c.name, err)
		}
		seJ := e.StdErr()
		for _, got := range []struct {
			name  string
			p, se float64
		}{{"Decide", est.P, est.StdErr}, {"Probability", pj, seJ}} {
			if d := math.Abs(got.p - want); d > 4*math.Hypot(got.se, seW)+1e-12 {
				t.Errorf("%s, %s: p %.4f ± %.4f with per-step scale, brute force %.4f ± %.4f", c.name, got.name, got.p, got.se, want, seW)
			}
		}
		raw, err := e.Decide(q, c.stateSpace(), Rule{})
		if err != nil {
			t.Fatal(err)
		}
		if math.Abs(raw.P-want) > 4*math.Hypot(raw.StdErr, seW)+0.01 {
			differs = true
		}
		t.Logf("%s: scaled Decide %.4f, Probability %.4f, brute force %.4f; unscaled %.4f", c.name, est.P, pj, want, raw.P)
	}
	if !differs {
		t.Error("the unscaled probabilities match the scaled reference everywhere: the test cannot tell")
	}
	c := loadCases(t)[0]
	q := c.query(false)
	for _, bad := range [][]float64{make([]float64, c.h-1), append(make([]float64, c.h-1), -1)} {
		q.Scale = bad
		if _, err := e.Decide(q, c.stateSpace(), Rule{}); err == nil {
			t.Errorf("scale %v: no error", bad)
		}
	}
}
