package arima

import (
	"fmt"
	"math"
)

// Model is a specification with values for all its coefficients.
//
// Sign conventions (those of the contract and of R's stats::arima):
//
//	AR:  x_t = φ_1 x_{t−1} + … + φ_p x_{t−p} + …
//	MA:  x_t = … + ε_t + θ_1 ε_{t−1} + … + θ_q ε_{t−q}
//
// Mean is μ when Spec.Mean is set, Drift is the slope δ per time step when
// Spec.Drift is set (y_t − δ·t is the integrated ARMA process, t = 1, 2, …
// counted from the first observation); both are zero otherwise. Sigma2 is
// the innovation variance σ². Beta holds the Spec.NX coefficients of the
// external regressors (y_t = μ + δ·t + x_tᵀβ + u_t).
type Model struct {
	Spec             Spec
	AR, MA, SAR, SMA []float64 // MA with plus sign: x_t = ... + e_t + theta_1 e_{t-1}
	Mean, Drift      float64
	Beta             []float64
	Sigma2           float64
}

// Params returns the coefficients flattened in the order
// AR, MA, SAR, SMA, then the mean or the drift when estimated, then Beta.
func (m *Model) Params() []float64 {
	out := make([]float64, 0, m.Spec.NumParams())
	out = append(out, m.AR...)
	out = append(out, m.MA...)
	out = append(out, m.SAR...)
	out = append(out, m.SMA...)
	if m.Spec.Mean {
		out = append(out, m.Mean)
	}
	if m.Spec.Drift {
		out = append(out, m.Drift)
	}
	return append(out, m.Beta...)
}

// NewModel builds a model from a specification and parameters laid out as
// Model.Params returns them. sigma2 must be positive and finite. The AR
// parts are not required to be stationary here; functions that need a
// stationary model say so.
func NewModel(spec Spec, params []float64, sigma2 float64) (*Model, error) {
	if err := spec.Validate(); err != nil {
		return nil, err
	}
	if len(params) != spec.NumParams() {
		return nil, fmt.Errorf("arima: new model %s: %w: %d parameters, want %d", spec, ErrParams, len(params), spec.NumParams())
	}
	for i, v := range params {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return nil, fmt.Errorf("arima: new model %s: %w: parameter %d is %v", spec, ErrParams, i, v)
		}
	}
	if !(sigma2 > 0) || math.IsInf(sigma2, 0) {
		return nil, fmt.Errorf("arima: new model %s: %w: sigma2 = %v, want a positive finite value", spec, ErrParams, sigma2)
	}
	m := &Model{Spec: spec, Sigma2: sigma2}
	i := 0
	take := func(n int) []float64 {
		s := append([]float64(nil), params[i:i+n]...)
		i += n
		return s
	}
	m.AR = take(spec.P)
	m.MA = take(spec.Q)
	m.SAR = take(spec.SP)
	m.SMA = take(spec.SQ)
	if spec.Mean {
		m.Mean = params[i]
		i++
	}
	if spec.Drift {
		m.Drift = params[i]
		i++
	}
	m.Beta = take(spec.NX)
	return m, nil
}

// expandAR multiplies out φ(z)Φ(z^s) = 1 − Σ_k φ'_k z^k and returns
// φ'_1..φ'_{p+sP} in dst (resized).
func expandAR(dst, ar, sar []float64, s int) []float64 {
	// (1 − Σ a_i z^i)(1 − Σ A_j z^{sj}) = 1 − Σ a_i z^i − Σ A_j z^{sj} + Σ a_i A_j z^{i+sj}
	return expandPoly(dst, ar, sar, s, -1)
}

// expandMA multiplies out θ(z)Θ(z^s) = 1 + Σ_k θ'_k z^k and returns
// θ'_1..θ'_{q+sQ} in dst (resized).
func expandMA(dst, ma, sma []float64, s int) []float64 {
	return expandPoly(dst, ma, sma, s, 1)
}

// expandPoly returns the coefficients c_1.. of (1 + g Σ a_i z^i)(1 + g Σ A_j z^{sj})
// = 1 + g Σ c_k z^k, g = ±1.
func expandPoly(dst, a, sa []float64, s int, g float64) []float64 {
	dst = resize(dst, len(a)+s*len(sa))
	for i := range dst {
		dst[i] = 0
	}
	copy(dst, a)
	for j, A := range sa {
		dst[s*(j+1)-1] += A
		for i, v := range a {
			dst[s*(j+1)+i] += g * v * A
		}
	}
	return dst
}

// diffPoly returns δ_1..δ_{d+sD} with (1−B)^d (1−B^s)^D = 1 − Σ_j δ_j B^j.
func diffPoly(d, sd, s int) []float64 {
	poly := []float64{1} // coefficients of B^0.. of the operator
	mul := func(lag int) {
		out := make([]float64, len(poly)+lag)
		for i, c := range poly {
			out[i] += c
			out[i+lag] -= c
		}
		poly = out
	}
	for i := 0; i < d; i++ {
		mul(1)
	}
	for i := 0; i < sd; i++ {
		mul(s)
	}
	delta := make([]float64, len(poly)-1)
	for j := range delta {
		delta[j] = -poly[j+1]
	}
	return delta
}

// PsiWeights returns ψ_0 = 1, ψ_1, …, ψ_{n−1}: the coefficients of the
// moving-average representation of the INTEGRATED process,
//
//	y_t − E y_t = Σ_{j≥0} ψ_j ε_{t−j},  Σ_j ψ_j z^j = θ(z)Θ(z^s) / [φ(z)Φ(z^s)(1−z)^d(1−z^s)^D].
//
// The h-step forecast error variance of a model with known anchors is
// σ² Σ_{j<h} ψ_j² (Brockwell & Davis 1991, §5.3 and §9.5).
func PsiWeights(m *Model, n int) []float64 {
	if n <= 0 {
		return nil
	}
	s := m.Spec
	phi := expandAR(nil, m.AR, m.SAR, s.Period)
	theta := expandMA(nil, m.MA, m.SMA, s.Period)
	phiStar := integratedAR(phi, diffPoly(s.D, s.SD, s.Period))
	return psiFrom(make([]float64, n), phiStar, theta)
}

// integratedAR returns the coefficients of φ*(z) = φ(z)Δ(z) = 1 − Σ φ*_k z^k.
func integratedAR(phi, delta []float64) []float64 {
	// (1 − Σ φ_i z^i)(1 − Σ δ_j z^j)
	out := make([]float64, len(phi)+len(delta))
	for i, a := range phi {
		out[i] += a
	}
	for j, b := range delta {
		out[j] += b
		for i, a := range phi {
			out[i+j+1] -= a * b
		}
	}
	return out
}

// psiFrom fills dst with ψ_0..ψ_{len(dst)−1} of θ(z)/φ(z):
// ψ_0 = 1, ψ_j = θ_j + Σ_{i=1}^{min(j,p)} φ_i ψ_{j−i}.
func psiFrom(dst, phi, theta []float64) []float64 {
	for j := range dst {
		v := 0.0
		if j == 0 {
			v = 1
		} else if j <= len(theta) {
			v = theta[j-1]
		}
		for i := 1; i <= len(phi) && i <= j; i++ {
			if phi[i-1] != 0 {
				v += phi[i-1] * dst[j-i]
			}
		}
		dst[j] = v
	}
	return dst
}

func resize(s []float64, n int) []float64 {
	if cap(s) < n {
		return make([]float64, n)
	}
	return s[:n]
}
