package alert

import (
	"math"
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
