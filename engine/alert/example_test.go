package alert_test

import (
	"fmt"

	"forewarn/engine/alert"
)

// A disk gauge forecast as a random walk with drift: 80 now, +0.5 a step,
// unit innovation variance. Where does the 90 threshold stand within 12
// steps, and when does the median forecast pass it? (R 4.2.2 with mvtnorm
// 1.1-3: 1 - pmvnorm(upper = rep(90, 12), mean = 80 + 0.5*(1:12),
// sigma = outer(1:12, 1:12, pmin)) = 0.1363; 1 - pnorm(90, 86, sqrt(12)) =
// 0.1241; eta: 80 + 0.5 j > 90 first at j = 21.)
func ExampleEvaluator_Probability() {
	e, err := alert.NewEvaluator(24, 0)
	if err != nil {
		panic(err)
	}
	const h = 24
	mean := make([]float64, h)
	variance := make([]float64, h)
	for j := 1; j <= h; j++ {
		mean[j-1] = 80 + 0.5*float64(j)
		variance[j-1] = float64(j)
	}
	joint := func(cov []float64) { // cov(i, j) = min(i, j) for a random walk
		for i := 1; i <= h; i++ {
			for j := 1; j <= h; j++ {
				cov[(i-1)*h+j-1] = float64(min(i, j))
			}
		}
	}
	q := &alert.Query{Mean: mean, Variance: variance, Threshold: 90, Direction: alert.Above, Window: 12}
	p, eta, err := e.Probability(q, joint)
	if err != nil {
		panic(err)
	}
	fmt.Printf("gauge: p = %.2f by %v, eta = step %d\n", p, e.LastMethod(), eta)

	q.Monotone = true
	p, _, _ = e.Probability(q, nil)
	fmt.Printf("counter: p = %.4f by %v\n", p, e.LastMethod())

	q.Monotone, q.Threshold = false, 200
	p, _, _ = e.Probability(q, nil) // no covariance needed this far away
	fmt.Printf("far: p below %.0e: %v, by %v\n", alert.Negligible, p < alert.Negligible, e.LastMethod())
	// Output:
	// gauge: p = 0.14 by simulation, eta = step 21
	// counter: p = 0.1241 by marginal
	// far: p below 1e-06: true, by skip
}

// Hysteresis of a rule raised at 0.9 and cleared below 0.45.
func ExampleNext() {
	r := alert.Rule{Raise: 0.9}.WithDefaults()
	raised := false
	for _, p := range []float64{0.5, 0.92, 0.97, 0.6, 0.93, 0.3} {
		var changed bool
		raised, changed = alert.Next(raised, p, r)
		if changed {
			fmt.Printf("p=%.2f raised=%v\n", p, raised)
		}
	}
	// Output:
	// p=0.92 raised=true
	// p=0.30 raised=false
}
