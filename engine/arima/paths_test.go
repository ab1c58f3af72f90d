package arima

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"
)

// pathCovariance runs the PathSystem recursion on the mean and on a dense
// covariance, written out from the field definitions alone (no ssm code):
// S_{j+1} = T S_j Tᵀ + θ θᵀ with the level rows integrated, Var(y_j) =
// σ² Z S_j Zᵀ. It returns the means and the joint covariance of y_{t+1..t+h}.
func pathCovariance(ps *PathSystem, h int) (mean, cov []float64) {
	r, nd := len(ps.Phi), len(ps.Delta)
	m := r + nd
	// T and Z as dense matrices, from the PathSystem documentation.
	T := make([]float64, m*m)
	for i := 0; i < r; i++ {
		T[i*m] = ps.Phi[i]
		if i+1 < r {
			T[i*m+i+1] = 1
		}
	}
	Z := make([]float64, m)
	Z[0] = 1
	for i := 0; i < nd; i++ {
		Z[r+i] = ps.Delta[i]
	}
	if nd > 0 {
		copy(T[r*m:(r+1)*m], Z) // new level = Z x (+ c)
		for i := 1; i < nd; i++ {
			T[(r+i)*m+r+i-1] = 1
		}
	}
	Rv := make([]float64, m)
	copy(Rv, ps.Theta)
	// G_j = Z T^{j−1} (rows), noise part by accumulation.
	G := make([][]float64, h)
	g := append([]float64(nil), Z...)
	x := append([]float64(nil), ps.X...)
	mean = make([]float64, h)
	for j := 0; j < h; j++ {
		G[j] = append([]float64(nil), g...)
		y := ps.C
		for i := range x {
			y += Z[i] * x[i]
		}
		mean[j] = y
		nx := make([]float64, m)
		for i := 0; i < m; i++ {
			for l := 0; l < m; l++ {
				nx[i] += T[i*m+l] * x[l]
			}
		}
		if nd > 0 {
			nx[r] += ps.C
		}
		x = nx
		ng := make([]float64, m)
		for l := 0; l < m; l++ {
			for i := 0; i < m; i++ {
				ng[l] += g[i] * T[i*m+l]
			}
		}
		g = ng
	}
	// Cov(y_i, y_j) = σ² [G_i P G_jᵀ + Σ_{l<min(i,j)} (G_{i−l−1} R)(G_{j−l−1} R)], 1-based i, j.
	gr := make([]float64, h)
	for j := 0; j < h; j++ {
		for i := 0; i < m; i++ {
			gr[j] += G[j][i] * Rv[i]
		}
	}
	cov = make([]float64, h*h)
	for i := 0; i < h; i++ {
		for j := 0; j < h; j++ {
			v := 0.0
			for a := 0; a < m; a++ {
				for b := 0; b < m; b++ {
					v += G[i][a] * ps.P[a*m+b] * G[j][b]
				}
			}
			for l := 0; l < min(i, j); l++ {
				v += gr[i-l-1] * gr[j-l-1]
			}
			cov[i*h+j] = ps.Sigma2 * v
		}
	}
	return mean, cov
}

// The PathSystem recursion reproduces the filter's forecasts: its means to
// 1e-9 relative and its joint covariance to 1e-8 relative of the largest
// variance. ForecastJoint computes the covariance another way (ψ-weights of
// the integrated process, checked against R 4.2.2 predict.Arima in
// TestForecastMatchesR), so agreement checks the system matrices, the state
// mean and the state covariance, with known anchors and after a missing
// value (levels in the state).
func TestPathSystemMatchesForecast(t *testing.T) {
	type tc struct {
		name   string
		spec   Spec
		params []float64
		miss   bool
	}
	cases := []tc{
		{"arma21_mean", Spec{P: 2, Q: 1, Mean: true}, []float64{0.5, 0.2, 0.3, 10}, false},
		{"arima111_drift", Spec{P: 1, D: 1, Q: 1, Drift: true}, []float64{0.4, -0.3, 0.2}, false},
		{"airline12", Spec{D: 1, Q: 1, SD: 1, SQ: 1, Period: 12}, []float64{-0.4, -0.6}, false},
		{"arima111_missing", Spec{P: 1, D: 1, Q: 1, Drift: true}, []float64{0.4, -0.3, 0.2}, true},
		{"seasonal_ar_missing", Spec{P: 1, D: 1, SP: 1, Period: 4}, []float64{0.3, 0.5}, true},
	}
	rng := rand.New(rand.NewPCG(3, 4))
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			m, err := NewModel(c.spec, c.params, 2.0)
			if err != nil {
				t.Fatal(err)
			}
			const h = 30
			f, err := NewFilter(m, h)
			if err != nil {
				t.Fatal(err)
			}
			y := 100.0
			for i := 0; i < 200; i++ {
				y += 0.2 + rng.NormFloat64()
				v := y
				if c.spec.D+c.spec.SD == 0 {
					v = 10 + rng.NormFloat64()
				}
				if c.miss && i == 199 {
					v = math.NaN()
				}
				f.Step(v)
			}
			var ps PathSystem
			if err := f.PathSystem(&ps); err != nil {
				t.Fatal(err)
			}
			if len(ps.X) != f.StateDim() || len(ps.P) != f.StateDim()*f.StateDim() {
				t.Fatalf("dims %d, %d; state dim %d", len(ps.X), len(ps.P), f.StateDim())
			}
			mean := make([]float64, h)
			cov := make([]float64, h*h)
			f.ForecastJoint(mean, cov)
			pm, pc := pathCovariance(&ps, h)
			scale := 0.0
			for i := 0; i < h; i++ {
				scale = math.Max(scale, cov[i*h+i])
			}
			for i := 0; i < h; i++ {
				if d := math.Abs(pm[i] - mean[i]); d > 1e-9*math.Max(1, math.Abs(mean[i])) {
					t.Errorf("mean %d: path system %.12g, Forecast %.12g", i+1, pm[i], mean[i])
				}
				for j := 0; j < h; j++ {
					if d := math.Abs(pc[i*h+j] - cov[i*h+j]); d > 1e-8*scale {
						t.Fatalf("cov (%d,%d): path system %.12g, ForecastJoint %.12g", i+1, j+1, pc[i*h+j], cov[i*h+j])
					}
				}
			}
		})
	}
}

// PathSystem before the anchors are known is an error, not garbage.
func TestPathSystemNotReady(t *testing.T) {
	m, err := NewModel(Spec{D: 1, Q: 1}, []float64{0.3}, 1)
	if err != nil {
		t.Fatal(err)
	}
	f, err := NewFilter(m, 5)
	if err != nil {
		t.Fatal(err)
	}
	var ps PathSystem
	if err := f.PathSystem(&ps); !errors.Is(err, ErrNotReady) {
		t.Fatalf("err = %v, want ErrNotReady", err)
	}
}

// With a kept destination PathSystem does not allocate.
func TestPathSystemDoesNotAllocate(t *testing.T) {
	m, err := NewModel(Spec{D: 1, Q: 1, SD: 1, SQ: 1, Period: 12}, []float64{-0.4, -0.6}, 1)
	if err != nil {
		t.Fatal(err)
	}
	f, err := NewFilter(m, 5)
	if err != nil {
		t.Fatal(err)
	}
	for i := 0; i < 40; i++ {
		f.Step(float64(i % 12))
	}
	var ps PathSystem
	if err := f.PathSystem(&ps); err != nil {
		t.Fatal(err)
	}
	if n := testing.AllocsPerRun(100, func() { _ = f.PathSystem(&ps) }); n != 0 {
		t.Fatalf("%v allocations per call", n)
	}
}
