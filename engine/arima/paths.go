package arima

import "fmt"

// PathSystem is the state-space form of a filter's forecast distribution,
// the input of a path simulation that costs O(k·(r + nnz(δ))) per path of
// k steps instead of the O(k²) of a factor of the joint covariance.
// Writing c for C, σ² for Sigma2, r = len(Phi), nd = len(Delta), the state
// x_j = (α_j, ℓ_j) holds the ARMA block α_j (r values, Harvey form) and the
// last nd levels ℓ_j (most recent first), and for j = 1, 2, …
//
//	y_{t+j}   = c + α_j[0] + Σ_{i=1}^{nd} δ_i ℓ_j[i−1]             (observation)
//	α_{j+1}[i] = φ'_{i+1} α_j[0] + α_j[i+1] + θ'_i η_j             (i < r−1, θ'_0 = 1)
//	α_{j+1}[r−1] = φ'_r α_j[0] + θ'_{r−1} η_j
//	ℓ_{j+1} = (y_{t+j}, ℓ_j[0], …, ℓ_j[nd−2])                      (the differencing, integrated)
//	η_j ~ N(0, σ²) independent,   x_1 ~ N(X, σ² P)
//
// where φ' and θ' are the expanded AR and MA polynomials (seasonal factors
// multiplied out), δ the coefficients of the expanded differencing
// polynomial (1−B)^d (1−B^s)^D = 1 − Σ δ_i B^i, and c the mean of the
// differenced series (μ, or δ_drift·Σ_i i·δ_i with a drift). X is the
// filter's predicted state mean (a_{t+1|t} and the anchors, or the
// augmented state after a missing value) and P its covariance on the unit
// σ² scale; with known anchors the level rows and columns of P are zero.
// This is the forecasting recursion of Filter.Forecast with noise added:
// its means and variances are those of Forecast. For a model with
// regressors (NewFilterX) it describes u = y − xᵀβ; add
// Filter.RegressionMean to each path.
//
// The fields are laid out like alert.StateSpace, so a PathSystem converts
// to one with a plain type conversion (the slices are shared, not copied).
//
// References:
//   - Durbin, J. & Koopman, S. J. (2012). Time Series Analysis by State
//     Space Methods, 2nd ed., §3.4 (ARIMA in state-space form), §4.11
//     (forecasting), §4.9 (simulation from the state-space model).
//   - Harvey, A. C. (1989). Forecasting, Structural Time Series Models and
//     the Kalman Filter, §3.2 and §3.4 (the Harvey form of an ARMA model).
type PathSystem struct {
	Phi, Theta []float64 // φ'_1..φ'_r and θ'_0 = 1, θ'_1..θ'_{r−1}, zero padded
	Delta      []float64 // δ_1..δ_nd
	C, Sigma2  float64   // mean of the differenced series; innovation variance
	X          []float64 // predicted state mean, r + nd values
	P          []float64 // predicted state covariance / σ², (r+nd)², row-major
}

// StateDim returns r + nd, the length of PathSystem.X.
func (f *Filter) StateDim() int { return f.r + f.nd }

// PathSystem writes the filter's current forecast distribution in state
// space form into dst (see PathSystem), reusing dst's slices when their
// capacity suffices, so a caller that keeps dst allocates only the first
// time. It returns ErrNotReady before the anchors are known.
func (f *Filter) PathSystem(dst *PathSystem) error {
	if !f.ready {
		return fmt.Errorf("arima: path system: %w", ErrNotReady)
	}
	r, nd := f.r, f.nd
	mm := r + nd
	dst.Phi = resize(dst.Phi, r)
	dst.Theta = resize(dst.Theta, r)
	dst.Delta = resize(dst.Delta, nd)
	dst.X = resize(dst.X, mm)
	dst.P = resize(dst.P, mm*mm)
	copy(dst.Phi, f.s.phi[:r])
	copy(dst.Theta, f.s.theta[:r])
	copy(dst.Delta, f.s.delta[:nd])
	dst.C, dst.Sigma2 = f.c, f.sigma2
	if f.mode == modeAug {
		copy(dst.X, f.xa)
		copy(dst.P, f.Pa)
		return nil
	}
	copy(dst.X, f.a)
	copy(dst.X[r:], f.L)
	for i := range dst.P {
		dst.P[i] = 0
	}
	for i := 0; i < r; i++ {
		copy(dst.P[i*mm:i*mm+r], f.P[i*r:(i+1)*r])
	}
	return nil
}
