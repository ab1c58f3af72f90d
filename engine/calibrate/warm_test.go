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

// TestLearnConformalRank: with enough errors each level's threshold is the
// finite-sample conformal quantile, the ⌈(n + 1)(1 − α)⌉-th smallest |z|
// (Angelopoulos & Bates 2021, "A gentle introduction to conformal
// prediction", §1.1); with too few for the rank it is the normal-shape
// scale √(mean z²)·Φ⁻¹(1 − α/2). Without shrinkage (prior 0) both are
// exact. n = 38 tells the rank apart from ⌈n(1 − α)⌉ at both levels.
func TestLearnConformalRank(t *testing.T) {
	c, _ := New(Options{Horizon: 2, Levels: []float64{80, 95}})
	e := NewErrors(2)
	for i := 38; i >= 1; i-- { // |z| = 0.1, …, 3.8 at h = 1, unsorted
		e.Z[0] = append(e.Z[0], float64(i)/10)
	}
	e.Z[1] = []float64{3, 4} // n = 2 at h = 2: no finite rank at 80 % or 95 %
	if err := c.Learn(e, 0); err != nil {
		t.Fatal(err)
	}
	// ⌈39·0.8⌉ = 32 (⌈38·0.8⌉ = 31), ⌈39·0.95⌉ = 38 (⌈38·0.95⌉ = 37)
	for l, want := range []float64{3.2, 3.8} {
		if got := c.Threshold(1, l); math.Abs(got-want) > 1e-12 {
			t.Errorf("h = 1, level %v: threshold %v, want %v (rank ⌈(n+1)(1−α)⌉)", c.levels[l], got, want)
		}
	}
	rms := math.Sqrt((9 + 16) / 2.0)
	for l := range c.levels {
		if got, want := c.Threshold(2, l), math.Min(rms*c.zq[l], c.bound); math.Abs(got-want) > 1e-12 {
			t.Errorf("h = 2, level %v: threshold %v, want √(mean z²)·z = %v", c.levels[l], got, want)
		}
	}
}
