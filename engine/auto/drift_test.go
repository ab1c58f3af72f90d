package auto

import (
	"math"
	"math/rand/v2"
	"testing"
)

// TestSeasonsDriftChoice is a property test (seeded simulation, known
// truth): a random walk with a drift of 0.5 per step (σ = 1, 1 200 steps,
// so the drift is some 17 standard errors from zero) plus two cycles of 24
// and 168 steps must get a drift in the regression with ARIMA errors; the
// same walk without drift must not. The constant is decided by AICc on the
// concentrated residuals (constantX; Hyndman & Khandakar 2008 decide it by
// AICc in the stepwise search).
func TestSeasonsDriftChoice(t *testing.T) {
	for _, tc := range []struct {
		drift float64
		want  bool
	}{{0.5, true}, {0, false}} {
		rng := rand.New(rand.NewPCG(7, 11))
		y := make([]float64, 1200)
		lvl := 100.0
		for i := range y {
			lvl += tc.drift + rng.NormFloat64()
			y[i] = lvl + 5*math.Sin(2*math.Pi*float64(i)/24) + 3*math.Cos(2*math.Pi*float64(i)/168)
		}
		c, err := Select(y, Options{Seasons: []float64{24, 168}, Transform: "none"})
		if err != nil {
			t.Fatal(err)
		}
		if c.Spec.D != 1 {
			t.Fatalf("drift %v: d = %d, want 1 (a random walk)", tc.drift, c.Spec.D)
		}
		if c.Spec.Drift != tc.want {
			t.Errorf("drift %v: chose %s, drift %v, want %v", tc.drift, c.Spec.Label(), c.Spec.Drift, tc.want)
		}
	}
}
