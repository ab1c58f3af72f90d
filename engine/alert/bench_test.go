package alert

import "testing"

// BenchmarkFarFromThreshold is the path every bucket close takes for a
// series far from its rule's threshold (h = k = 60, union-bound skip).
func BenchmarkFarFromThreshold(b *testing.B) {
	e := newEval(b, 60, 0)
	q, joint := farQuery(60)
	b.ReportAllocs()
	for b.Loop() {
		if _, _, err := e.Probability(q, joint); err != nil {
			b.Fatal(err)
		}
	}
	if e.LastMethod() != MethodSkip {
		b.Fatalf("method %v, want skip", e.LastMethod())
	}
}

// BenchmarkMarginal is a counter rule (one tail probability).
func BenchmarkMarginal(b *testing.B) {
	e := newEval(b, 60, 0)
	q, joint := farQuery(60)
	q.Monotone = true
	b.ReportAllocs()
	for b.Loop() {
		if _, _, err := e.Probability(q, joint); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkNearThreshold simulates a drifting walk whose crossing
// probability is about 0.28 (h = k = 60, DefaultPaths paths), including the
// covariance callback and the Cholesky factorisation.
func BenchmarkNearThreshold(b *testing.B) {
	e := newEval(b, 60, DefaultPaths)
	c := refCase{name: "rw_drift_up", kind: "rw", x0: 0, a: 0.5, sigma: 1, threshold: 35, k: 60, h: 60, direction: "above"}
	_, _, joint := c.moments()
	q := c.query(false)
	b.ReportAllocs()
	for b.Loop() {
		if _, _, err := e.Probability(q, joint); err != nil {
			b.Fatal(err)
		}
	}
	if e.LastMethod() != MethodSimulation {
		b.Fatalf("method %v, want simulation", e.LastMethod())
	}
}

// benchArima sets up testdata/crossing_arima.csv case i: the query, the
// state space, and the joint covariance callback of the old path
// (Filter.ForecastJoint).
func benchArima(b *testing.B, i int) (*Query, *StateSpace, func([]float64), arimaCase) {
	c := loadArimaCases(b)[i]
	q, ss, f := c.setup(b)
	mean := make([]float64, c.k)
	joint := func(cov []float64) { f.ForecastJoint(mean, cov) }
	return q, ss, joint, c
}

// BenchmarkDecideK120 is one evaluation near the threshold at k = 120,
// m = 8 (ARIMA(1,1,2)(1,0,0)[6] with drift, p = 0.262 by pmvnorm), with
// the rule raised at 0.9 and cleared below 0.45: the stopping rule
// decides "below clear" after the first batch.
func BenchmarkDecideK120(b *testing.B) {
	q, ss, _, _ := benchArima(b, 1)
	e := newEval(b, 120, 0)
	rule := Rule{Raise: 0.9, Clear: 0.45}
	b.ReportAllocs()
	var est Estimate
	for b.Loop() {
		est, _ = e.Decide(q, ss, rule)
	}
	if est.Method != MethodSimulation || est.Decision != BelowClear {
		b.Fatalf("%v, %v", est.Method, est.Decision)
	}
	b.ReportMetric(float64(est.Paths), "paths")
}

// BenchmarkDecideK120Rule25 is the same forecast against a rule whose
// clear level (0.25) lies 0.012 below p: the hard case for the stopping
// rule.
func BenchmarkDecideK120Rule25(b *testing.B) {
	q, ss, _, _ := benchArima(b, 1)
	e := newEval(b, 120, 0)
	rule := Rule{Raise: 0.5, Clear: 0.25}
	b.ReportAllocs()
	var est Estimate
	for b.Loop() {
		est, _ = e.Decide(q, ss, rule)
	}
	b.ReportMetric(float64(est.Paths), "paths")
}

// BenchmarkDecideK120Full draws all DefaultPaths paths (no stopping rule).
func BenchmarkDecideK120Full(b *testing.B) {
	q, ss, _, _ := benchArima(b, 1)
	e := newEval(b, 120, 0)
	b.ReportAllocs()
	for b.Loop() {
		if _, err := e.Decide(q, ss, Rule{}); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkCholeskyK120 is the old path on the same forecast: the joint
// covariance (ForecastJoint), its 120×120 Cholesky factor and
// DefaultPaths paths W = m + L z.
func BenchmarkCholeskyK120(b *testing.B) {
	q, _, joint, _ := benchArima(b, 1)
	e := newEval(b, 120, 0)
	b.ReportAllocs()
	for b.Loop() {
		if _, _, err := e.Probability(q, joint); err != nil {
			b.Fatal(err)
		}
	}
	if e.LastMethod() != MethodSimulation {
		b.Fatalf("method %v", e.LastMethod())
	}
}

// BenchmarkDecideK360Full: k = 360, m = 27 (the airline model, period 12),
// all paths drawn.
func BenchmarkDecideK360Full(b *testing.B) {
	q, ss, _, _ := benchArima(b, 4)
	e := newEval(b, 360, 0)
	b.ReportAllocs()
	for b.Loop() {
		if _, err := e.Decide(q, ss, Rule{}); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkCholeskyK360 is the old path on the same k = 360 forecast.
func BenchmarkCholeskyK360(b *testing.B) {
	q, _, joint, _ := benchArima(b, 4)
	e := newEval(b, 360, 0)
	b.ReportAllocs()
	for b.Loop() {
		if _, _, err := e.Probability(q, joint); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkDecideK120NearClear is the forecast of BenchmarkDecideK120
// (p = 0.262) against a rule whose clear level lies next to p (Raise
// 0.9, Clear 0.26): placing p against both levels draws the whole budget
// (both_levels); a cleared rule asks only "p ≥ 0.9?" (cleared) and stops
// after the first batch.
func BenchmarkDecideK120NearClear(b *testing.B) {
	for _, st := range []State{Unknown, Cleared} {
		name := "both_levels"
		if st == Cleared {
			name = "cleared"
		}
		b.Run(name, func(b *testing.B) {
			q, ss, _, _ := benchArima(b, 1)
			e := newEval(b, 120, 0)
			rule := Rule{Raise: 0.9, Clear: 0.26, Current: st}
			b.ReportAllocs()
			var est Estimate
			for b.Loop() {
				est, _ = e.Decide(q, ss, rule)
			}
			if est.Method != MethodSimulation {
				b.Fatalf("%v", est.Method)
			}
			b.ReportMetric(float64(est.Paths), "paths")
		})
	}
}
