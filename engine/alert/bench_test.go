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
