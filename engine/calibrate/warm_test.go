package calibrate

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"forewarn/engine/arima"
)

// TestWarmStartTrueModel: with the true model (AR(1), φ = 0.7, σ = 1,
// Gaussian: a seeded simulation with known truth) the standardised errors
// are N(0, 1), so the warm-start factors are near 1 at every horizon
// (property test; tolerance from the sampling error of √(mean z²) over
// about 64 correlated errors per horizon). Too short a window is an error.
func TestWarmStartTrueModel(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 9))
	y := simulate(3000, 0.7, 0, rng.NormFloat64)
	spec, _ := arima.NewSpec([3]int{1, 0, 0}, [3]int{}, 0, arima.ConstantNone)
	m, err := arima.NewModel(spec, []float64{0.7}, 1)
	if err != nil {
		t.Fatal(err)
	}
	c, _ := New(Options{Horizon: 12, Levels: []float64{50, 90}})
	info, err := c.WarmStart(m, y, &WarmOptions{Origins: 200})
	if err != nil {
		t.Fatal(err)
	}
	if info.Origins != 200 || info.Errors[0] != 200 || info.Errors[11] < 199 { // the last origin, at len − 2, has one step to score
		t.Errorf("origins %d, errors at h = 1 and 12: %d, %d; want 200, 200, ≥ 199", info.Origins, info.Errors[0], info.Errors[11])
	}
	for h := 1; h <= 12; h++ {
		if f := c.Factor(h, 1); math.Abs(f-1) > 0.15 {
			t.Errorf("h = %d: factor %.3f with the true model, want 1 ± 0.15", h, f)
		}
	}
	if _, err := c.WarmStart(m, y[:1], nil); !errors.Is(err, ErrWarm) {
		t.Errorf("one value: %v, want ErrWarm", err)
	}
	// A model whose σ² is a quarter of the truth gives factors near 2.
	m4, _ := arima.NewModel(spec, []float64{0.7}, 0.25)
	if _, err := c.WarmStart(m4, y, &WarmOptions{Origins: 200}); err != nil {
		t.Fatal(err)
	}
	if f := c.Factor(1, 0); math.Abs(f-2) > 0.3 {
		t.Errorf("σ² a quarter of the truth: factor %.3f at h = 1, want 2 ± 0.3", f)
	}
}

// BenchmarkWarmStart measures the warm start's cost bound on a seasonal
// model: R's AirPassengers-like airline model (0,1,1)(0,1,1)₁₂ over a
// window of 2000 values, H = 60, N = 64 origins.
func BenchmarkWarmStart(b *testing.B) {
	spec, _ := arima.NewSpec([3]int{0, 1, 1}, [3]int{0, 1, 1}, 12, arima.ConstantNone)
	m, _ := arima.NewModel(spec, []float64{-0.4, -0.55}, 0.0013)
	rng := rand.New(rand.NewPCG(1, 3))
	w := make([]float64, 2000)
	for i := range w {
		w[i] = 5 + 0.01*float64(i) + 0.1*math.Sin(float64(i)*math.Pi/6) + 0.03*rng.NormFloat64()
	}
	c, _ := New(Options{Horizon: 60, Levels: []float64{50, 90}})
	b.ReportAllocs()
	for i := 0; i < b.N; i++ {
		if _, err := c.WarmStart(m, w, nil); err != nil {
			b.Fatal(err)
		}
	}
}
