package arima

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"

	"forewarn/engine/internal/refdata"
)

// simulate draws n values of the model (after a burn-in) from a seeded
// generator, by its MA(∞) representation truncated at 2000 terms for the
// ARMA part and then integrated. Used only to make test data.
func simulate(m *Model, n int, seed uint64) []float64 {
	rng := rand.New(rand.NewPCG(seed, seed^0x9e3779b97f4a7c15))
	s := m.Spec
	phi := expandAR(nil, m.AR, m.SAR, s.Period)
	th := expandMA(nil, m.MA, m.SMA, s.Period)
	burn := 500
	tot := n + burn
	e := make([]float64, tot)
	x := make([]float64, tot)
	sd := math.Sqrt(m.Sigma2)
	for t := range e {
		e[t] = sd * rng.NormFloat64()
		v := e[t]
		for j, c := range th {
			if t-j-1 >= 0 {
				v += c * e[t-j-1]
			}
		}
		for j, c := range phi {
			if t-j-1 >= 0 {
				v += c * x[t-j-1]
			}
		}
		x[t] = v
	}
	w := x[burn:]
	delta := diffPoly(s.D, s.SD, s.Period)
	y := make([]float64, n)
	for t := 0; t < n; t++ {
		v := w[t] + m.Mean
		if s.Drift {
			for j, d := range delta {
				v += float64(j+1) * d * m.Drift
			}
		}
		for j, d := range delta {
			if t-j-1 >= 0 {
				v += d * y[t-j-1]
			}
		}
		y[t] = v
	}
	return y
}

// acvfTruncated returns γ(0..n−1) of the ARMA part with unit σ² as
// Σ_j ψ_j ψ_{j+h} over 20000 ψ-weights — an evaluation independent of the
// Durbin–Levinson route used by the filter (Brockwell & Davis 1991, eq.
// 3.2.3).
func acvfTruncated(m *Model, n int) []float64 {
	s := m.Spec
	phi := expandAR(nil, m.AR, m.SAR, s.Period)
	th := expandMA(nil, m.MA, m.SMA, s.Period)
	psi := psiFrom(make([]float64, 20000+n), phi, th)
	g := make([]float64, n)
	for h := range g {
		for j := 0; j+h < len(psi); j++ {
			g[h] += psi[j] * psi[j+h]
		}
	}
	return g
}

// directLogLik is the concentrated Gaussian log-likelihood of the
// non-missing entries of z under covariance σ²Γ, Γ_ij = γ(|t_i − t_j|),
// by Cholesky factorisation (common practice; Brockwell & Davis 1991,
// §8.7, eq. 8.7.4).
func directLogLik(t *testing.T, z, gam []float64) float64 {
	idx := []int{}
	for i, v := range z {
		if !math.IsNaN(v) {
			idx = append(idx, i)
		}
	}
	n := len(idx)
	G := mat.NewSymDense(n, nil)
	for a, i := range idx {
		for b := a; b < n; b++ {
			G.SetSym(a, b, gam[absInt(idx[b]-i)])
		}
	}
	var ch mat.Cholesky
	if !ch.Factorize(G) {
		t.Fatal("autocovariance matrix not positive definite")
	}
	zv := mat.NewVecDense(n, nil)
	for a, i := range idx {
		zv.SetVec(a, z[i])
	}
	var sol mat.VecDense
	if err := ch.SolveVecTo(&sol, zv); err != nil {
		t.Fatal(err)
	}
	q := mat.Dot(zv, &sol)
	nn := float64(n)
	s2 := q / nn
	return -0.5 * (nn*math.Log(s2) + ch.LogDet() + nn + nn*math.Log(2*math.Pi))
}

// The Kalman-filter log-likelihood equals the direct multivariate-normal
// log-likelihood built from the ARMA autocovariances, to 1e-8, for complete
// series (Chandrasekhar path), series with missing values (full-covariance
// path), seasonal models and differenced models (likelihood of the
// differenced series).
func TestLogLikEqualsDirectMVN(t *testing.T) {
	cases := []struct {
		name  string
		spec  Spec
		par   []float64
		holes []int
	}{
		{"arma11", Spec{P: 1, Q: 1, Mean: true}, []float64{0.6, 0.3, 10}, nil},
		{"ar2_holes", Spec{P: 2, Mean: true}, []float64{0.5, -0.3, -2}, []int{3, 4, 17}},
		{"ma2", Spec{Q: 2}, []float64{-0.5, 0.25}, nil},
		{"sarma", Spec{P: 1, Q: 1, SP: 1, SQ: 1, Period: 4, Mean: true}, []float64{0.4, -0.2, 0.5, 0.3, 1}, []int{7}},
		{"arima111", Spec{P: 1, D: 1, Q: 1}, []float64{0.3, 0.4}, nil},
		{"near_unit_ar", Spec{P: 1}, []float64{0.995}, nil},
		{"noninvertible_ma", Spec{Q: 1}, []float64{1.8}, nil},
	}
	for i, c := range cases {
		m, err := NewModel(c.spec, c.par, 1.7)
		if err != nil {
			t.Fatal(err)
		}
		y := simulate(m, 40, uint64(100+i))
		for _, h := range c.holes {
			y[h] = math.NaN()
		}
		ll, _, _, err := LogLik(y, m)
		if err != nil {
			t.Fatalf("%s: %v", c.name, err)
		}
		// z: the differenced series less its mean
		e, _ := newEvaluator(y, c.spec)
		z := make([]float64, len(e.data))
		for t, v := range e.data {
			z[t] = v - m.Mean
		}
		want := directLogLik(t, z, acvfTruncated(m, len(z)))
		if math.Abs(ll-want) > 1e-8 {
			t.Errorf("%s: Kalman %.12f, direct %.12f (diff %.2g)", c.name, ll, want, ll-want)
		}
	}
}

// The O(r²) stationary covariance solves Q0 = T Q0 Tᵀ + R Rᵀ and is
// symmetric positive semi-definite (Harvey 1989, §3.4; the defining
// Lyapunov equation).
func TestStationaryCovSolvesLyapunov(t *testing.T) {
	specs := []struct {
		spec Spec
		par  []float64
	}{
		{Spec{P: 2, Q: 2}, []float64{1.2, -0.5, 0.4, 0.2}},
		{Spec{P: 1, Q: 1, SP: 1, SQ: 1, Period: 12}, []float64{0.7, -0.4, 0.6, -0.5}},
		{Spec{P: 3, Q: 1}, []float64{0.99, -0.2, 0.1, 0.9}},
		{Spec{Q: 1, SQ: 1, Period: 24}, []float64{-0.4, -0.6}},
	}
	for _, c := range specs {
		m, _ := NewModel(c.spec, c.par, 1)
		s := newSSM(c.spec)
		s.setCoefs(expandAR(nil, m.AR, m.SAR, c.spec.Period), expandMA(nil, m.MA, m.SMA, c.spec.Period))
		if err := s.stationaryRow(); err != nil {
			t.Fatal(err)
		}
		r := s.r
		Q := make([]float64, r*r)
		s.stationaryCov(Q, r)
		P := append([]float64(nil), Q...)
		s.predictCov(P, make([]float64, r*r), r)
		scale := Q[0]
		for i := range Q {
			if math.Abs(P[i]-Q[i]) > 1e-10*scale {
				t.Fatalf("%v: T Q Tᵀ + R Rᵀ differs from Q at %d: %g vs %g", c.spec, i, P[i], Q[i])
			}
		}
		assertSymPSD(t, c.spec.String(), Q, r)
	}
}

func assertSymPSD(t *testing.T, name string, P []float64, m int) {
	t.Helper()
	scale := 0.0
	for i := 0; i < m; i++ {
		scale = math.Max(scale, math.Abs(P[i*m+i]))
	}
	S := mat.NewSymDense(m, nil)
	for i := 0; i < m; i++ {
		for k := i; k < m; k++ {
			if d := math.Abs(P[i*m+k] - P[k*m+i]); d > 1e-12*math.Max(1, scale) {
				t.Fatalf("%s: covariance not symmetric at (%d,%d): %g", name, i, k, d)
			}
			S.SetSym(i, k, P[i*m+k])
		}
	}
	var eig mat.EigenSym
	if !eig.Factorize(S, false) {
		t.Fatalf("%s: eigen decomposition failed", name)
	}
	for _, v := range eig.Values(nil) {
		if v < -1e-9*math.Max(1, scale) {
			t.Fatalf("%s: covariance has eigenvalue %g (scale %g)", name, v, scale)
		}
	}
}

// The filter's covariance stays symmetric positive semi-definite through
// every mode: Chandrasekhar updates, missing values (full updates, levels
// in the state) and the steady state.
func TestFilterCovariancePSD(t *testing.T) {
	spec := Spec{P: 1, D: 1, Q: 1, SQ: 1, SD: 1, Period: 4}
	m, _ := NewModel(spec, []float64{0.5, -0.3, -0.6}, 2)
	y := simulate(m, 200, 7)
	for _, h := range []int{7, 30, 31, 90, 150} {
		y[h] = math.NaN()
	}
	f, err := NewFilter(m, 10)
	if err != nil {
		t.Fatal(err)
	}
	seen := map[int]bool{}
	for i, v := range y {
		f.Step(v)
		seen[f.mode] = true
		if f.mode == modeAug {
			assertSymPSD(t, "augmented", f.Pa, f.r+f.nd)
		} else if f.mode != modeWarm {
			assertSymPSD(t, "arma block", f.P, f.r)
		}
		_ = i
	}
	for _, md := range []int{modeChandra, modeFull, modeAug} {
		if !seen[md] {
			t.Errorf("mode %d never exercised", md)
		}
	}
}

// For an integrated model the forecast error variance never decreases with
// the horizon (the error of y_{t+h} contains that of y_{t+h−1} plus new
// innovations; common practice), also right after a missing value.
func TestForecastVarianceNonDecreasing(t *testing.T) {
	for _, c := range []struct {
		spec Spec
		par  []float64
	}{
		{Spec{P: 2, D: 1, Q: 2}, []float64{0.5, -0.2, 0.3, 0.1}},
		{Spec{Q: 1, SD: 1, SQ: 1, D: 1, Period: 12}, []float64{-0.4, -0.6}},
		{Spec{P: 1, D: 2}, []float64{-0.5}},
	} {
		m, _ := NewModel(c.spec, c.par, 1)
		y := simulate(m, 120, 3)
		f, _ := NewFilter(m, 48)
		mean, v := make([]float64, 48), make([]float64, 48)
		for k, last := range []float64{y[len(y)-1], math.NaN()} {
			f.Steps(y[:len(y)-1])
			f.Step(last)
			f.Forecast(mean, v)
			for h := 1; h < len(v); h++ {
				if v[h] < v[h-1]*(1-1e-12) {
					t.Errorf("%s (%d): variance decreases at h=%d: %g < %g", c.spec, k, h+1, v[h], v[h-1])
				}
			}
			f, _ = NewFilter(m, 48)
		}
	}
}

// AppendState/SetState round trip: a filter restored from a saved state
// produces bit-for-bit the same forecasts as the original, in every mode.
func TestStateRoundTrip(t *testing.T) {
	spec := Spec{P: 1, D: 1, Q: 1, SD: 1, SQ: 1, Period: 4}
	m, _ := NewModel(spec, []float64{0.4, -0.3, -0.5}, 3)
	y := simulate(m, 80, 11)
	y[1] = math.NaN() // in the warm-up: diffuse levels
	y[40] = math.NaN()
	for cut := 0; cut < len(y); cut += 3 {
		a, _ := NewFilter(m, 12)
		a.Steps(y[:cut])
		st := a.AppendState(nil)
		b, _ := NewFilter(m, 12)
		if err := b.SetState(st); err != nil {
			t.Fatalf("cut %d: %v", cut, err)
		}
		a.Steps(y[cut:])
		b.Steps(y[cut:])
		ma, va := make([]float64, 12), make([]float64, 12)
		mb, vb := make([]float64, 12), make([]float64, 12)
		a.Forecast(ma, va)
		b.Forecast(mb, vb)
		for i := range ma {
			if math.Float64bits(ma[i]) != math.Float64bits(mb[i]) || math.Float64bits(va[i]) != math.Float64bits(vb[i]) {
				t.Fatalf("cut %d h=%d: restored %v/%v, original %v/%v", cut, i+1, mb[i], vb[i], ma[i], va[i])
			}
		}
	}
	f, _ := NewFilter(m, 12)
	other, _ := NewFilter(&Model{Spec: Spec{P: 1}, AR: []float64{0.5}, Sigma2: 1}, 12)
	if err := f.SetState(other.AppendState(nil)); err == nil {
		t.Error("state of a different model shape accepted")
	}
	if err := f.SetState([]float64{1, 2}); err == nil {
		t.Error("truncated state accepted")
	}
}

// ForecastJoint's diagonal equals Forecast's variances, and the joint
// covariance is symmetric positive semi-definite.
func TestForecastJointConsistent(t *testing.T) {
	spec := Spec{P: 2, D: 1, Q: 2}
	m, _ := NewModel(spec, []float64{0.6, -0.2, 0.3, -0.1}, 2)
	y := simulate(m, 100, 5)
	y[97] = math.NaN()
	f, _ := NewFilter(m, 20)
	f.Steps(y)
	mean, v := make([]float64, 20), make([]float64, 20)
	f.Forecast(mean, v)
	mj, cov := make([]float64, 20), make([]float64, 400)
	f.ForecastJoint(mj, cov)
	for h := range v {
		if math.Abs(cov[h*20+h]-v[h]) > 1e-9*v[h] || mj[h] != mean[h] {
			t.Fatalf("h=%d: joint variance %g, Forecast %g", h+1, cov[h*20+h], v[h])
		}
	}
	assertSymPSD(t, "joint", cov, 20)
}

// Durbin & Koopman (2012, §2.2.5) fit the local level model to the Nile
// series by maximum likelihood: σ²_ε = 15099, σ²_η = 1469.1. The local
// level model is ARIMA(0,1,1) with θ < 0, σ²_ε = −θσ² and
// σ²_η = σ²(1+θ)² (equating the autocovariances of Δy_t). Tolerance 0.2 %
// (the book prints five significant digits).
func TestNileLocalLevelVariances(t *testing.T) {
	y := refdata.Dataset(t, "Nile")
	res, err := Fit(y, Spec{D: 1, Q: 1}, nil)
	if err != nil {
		t.Fatal(err)
	}
	th, s2 := res.Model.MA[0], res.Model.Sigma2
	eps := -th * s2
	eta := s2 * (1 + th) * (1 + th)
	if math.Abs(eps/15099-1) > 0.002 || math.Abs(eta/1469.1-1) > 0.002 {
		t.Errorf("σ²_ε = %.1f (D&K 15099), σ²_η = %.2f (D&K 1469.1)", eps, eta)
	}
}

// At and near the unit circle the initial covariance falls back to the
// doubling sum, which is PSD by construction; for a stationary model it
// equals the exact Q0 (both solve Q0 = T Q0 Tᵀ + R Rᵀ; Anderson & Moore
// 1979, §6.7). An explosive AR part is still an error.
func TestUnitRootFallback(t *testing.T) {
	// doubling sum equals the exact stationary covariance when stationary
	sp := Spec{P: 2, Q: 1}
	s := newSSM(sp)
	s.setCoefs([]float64{0.6, -0.3}, []float64{0.4})
	if err := s.stationaryRow(); err != nil {
		t.Fatal(err)
	}
	exact := make([]float64, s.r*s.r)
	s.stationaryCov(exact, s.r)
	if err := s.doublingCov(); err != nil {
		t.Fatal(err)
	}
	for i := range exact {
		if math.Abs(exact[i]-s.qfull[i]) > 1e-12*exact[0] {
			t.Fatalf("doubling %v, exact %v", s.qfull, exact)
		}
	}
	y := simulate(&Model{Spec: Spec{P: 1}, AR: []float64{0.5}, Sigma2: 1}, 200, 9)
	for _, c := range []struct {
		ar  []float64
		ok  bool
		why string
	}{
		{[]float64{1}, true, "unit root"},
		{[]float64{1e-5, 0.99999 + 1e-12}, true, "partial autocorrelation 1 − 1e-12 (rounds past 1)"},
		{[]float64{-1}, true, "root at −1"},
		{[]float64{1.5}, false, "explosive"},
	} {
		m := &Model{Spec: Spec{P: len(c.ar), Q: 1}, AR: c.ar, MA: []float64{0.3}, Sigma2: 1}
		ll, _, _, err := LogLik(y, m)
		if c.ok && (err != nil || math.IsNaN(ll) || math.IsInf(ll, 0)) {
			t.Errorf("%s: loglik %v, %v", c.why, ll, err)
		}
		if !c.ok && !errors.Is(err, ErrNonStationary) {
			t.Errorf("%s: error %v, want ErrNonStationary", c.why, err)
		}
		f, err := NewFilter(m, 5)
		if c.ok {
			if err != nil {
				t.Fatalf("%s: %v", c.why, err)
			}
			f.Steps(y)
			assertSymPSD(t, c.why, f.P, f.r)
			mean, v := make([]float64, 5), make([]float64, 5)
			f.Forecast(mean, v)
			if math.IsNaN(mean[4]) || !(v[4] > 0) {
				t.Errorf("%s: forecast %v %v", c.why, mean, v)
			}
		}
	}
}
