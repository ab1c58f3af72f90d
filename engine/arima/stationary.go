package arima

import (
	"math"

	"gonum.org/v1/gonum/mat"
)

// ssm is the Harvey (1989, §3.4) state-space form of the multiplied-out ARMA
// part x_t of a model, extended by the differencing block when d+sD > 0:
//
//	a_{t+1} = T a_t + R η_t,   x_t = Z a_t,   η_t ~ N(0, 1)
//
//	T = [φ'_1 1 0 … 0; φ'_2 0 1 … 0; …; φ'_r 0 … 0],  R = (1, θ'_1, …, θ'_{r−1})ᵀ,  Z = e_1ᵀ,
//
// r = max(p', q'+1), p' = p + sP and q' = q + sQ the degrees of the
// multiplied-out polynomials. The filter runs with unit innovation
// variance; σ² is concentrated out afterwards. When levels sit in the state
// (the "augmented" form, used for missing values in a differenced series),
// the state is (a_t, L_t) with L_t = (y_{t−1}, …, y_{t−nd}) and
//
//	y_t = c + x_t + Σ_j δ_j y_{t−j},   (1−B)^d (1−B^s)^D = 1 − Σ_j δ_j B^j,
//
// c the mean of the differenced series.
//
// References:
//   - Harvey, A. C. (1989). Forecasting, Structural Time Series Models and the
//     Kalman Filter. Cambridge University Press, §3.4.
//   - Gardner, G., Harvey, A. C. & Phillips, G. D. A. (1980). Algorithm AS 154:
//     An algorithm for exact maximum likelihood estimation of autoregressive-
//     moving average models by means of Kalman filtering. Applied Statistics
//     29(3), 311–322.
type ssm struct {
	r, nd   int
	phi     []float64 // len r: phi[i] = φ'_{i+1}, zero padded
	theta   []float64 // len r: theta[0] = 1, theta[i] = θ'_i, zero padded
	phiNZ   []int     // indices i with phi[i] != 0
	thetaNZ []int     // indices i with theta[i] != 0
	delta   []float64 // len nd: δ_1..δ_nd
	deltaNZ []int     // indices j with delta[j] != 0
	p, q    int       // degrees p', q'

	// Workspaces for the stationary covariance.
	pacf, work, work2, gu, cma, gam, psi []float64
	q0                                   []float64 // first row of Q0, len r+1 with q0[r] = 0

	// fallback is set by prepare when the AR part sits numerically on the
	// unit circle; qfull then holds the doubling-sum initial covariance.
	fallback bool
	qfull    []float64
}

// doublingSteps is log2 of the number of terms of the fallback sum.
const doublingSteps = 20

// prepare computes the initial covariance for the loaded coefficients:
// the exact stationary one (stationaryRow) when the AR part is
// stationary in floating point, else — when it lies on the unit circle to
// within 1e-6 in its partial autocorrelations, as tanh-parametrised
// optimiser points and models near a unit root can — the truncated sum
//
//	P_1 = Σ_{k=0}^{N−1} T^k R Rᵀ (Tᵀ)^k,  N = 2^20,
//
// built by doubling (P ← P + A P Aᵀ, A ← A², Anderson & Moore 1979, §6.7).
// It is positive semi-definite by construction, equals Q0 to rounding for a
// stationary AR part, and behaves like a diffuse prior of variance ~N at a
// unit root. With the fallback set, only the full-covariance filter applies.
// Any other non-stationary AR part returns ErrNonStationary.
func (s *ssm) prepare() error {
	s.fallback = false
	err := s.stationaryRow()
	if err == nil || !s.nearUnitCircle() {
		return err
	}
	if err := s.doublingCov(); err != nil {
		return err
	}
	s.fallback = true
	return nil
}

// nearUnitCircle runs the step-down without stopping and reports whether
// every partial autocorrelation satisfies |π_k| < 1 + 1e-6.
func (s *ssm) nearUnitCircle() bool {
	p := s.p
	s.work = resize(s.work, p)
	s.work2 = resize(s.work2, p)
	cur, nxt := s.work, s.work2
	copy(cur, s.phi[:p])
	for k := p; k >= 1; k-- {
		pk := cur[k-1]
		if math.IsNaN(pk) || math.Abs(pk) >= 1+1e-6 {
			return false
		}
		den := 1 - pk*pk
		if math.Abs(den) < 1e-300 {
			return true // exactly on the circle: the lower orders are undefined
		}
		for j := 1; j < k; j++ {
			nxt[j-1] = (cur[j-1] + pk*cur[k-j-1]) / den
		}
		cur, nxt = nxt, cur
	}
	return true
}

// doublingCov fills s.qfull (r×r) with the doubling sum of prepare.
func (s *ssm) doublingCov() error {
	r := s.r
	P := mat.NewDense(r, r, nil)
	A := mat.NewDense(r, r, nil)
	for i := 0; i < r; i++ {
		A.Set(i, 0, s.phi[i])
		if i+1 < r {
			A.Set(i, i+1, 1)
		}
		for k := 0; k < r; k++ {
			P.Set(i, k, s.theta[i]*s.theta[k])
		}
	}
	var AP, APA, AA mat.Dense
	for j := 0; j < doublingSteps; j++ {
		AP.Mul(A, P)
		APA.Mul(&AP, A.T())
		P.Add(P, &APA)
		AA.Mul(A, A)
		A.Copy(&AA)
	}
	s.qfull = resize(s.qfull, r*r)
	for i := 0; i < r; i++ {
		for k := 0; k < r; k++ {
			v := 0.5 * (P.At(i, k) + P.At(k, i))
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return ErrNonStationary
			}
			s.qfull[i*r+k] = v
		}
	}
	return nil
}

// initCov writes the initial covariance of the ARMA block into the top-left
// r×r block of dst (leading dimension ld).
func (s *ssm) initCov(dst []float64, ld int) {
	if !s.fallback {
		s.stationaryCov(dst, ld)
		return
	}
	r := s.r
	for i := 0; i < r; i++ {
		copy(dst[i*ld:i*ld+r], s.qfull[i*r:(i+1)*r])
	}
}

func newSSM(spec Spec) *ssm {
	r := spec.stateDim()
	s := &ssm{r: r, nd: spec.nd(), p: spec.arDegree(), q: spec.maDegree()}
	s.phi = make([]float64, r)
	s.theta = make([]float64, r)
	s.delta = diffPoly(spec.D, spec.SD, spec.Period)
	for j, d := range s.delta {
		if d != 0 {
			s.deltaNZ = append(s.deltaNZ, j)
		}
	}
	s.q0 = make([]float64, r+1)
	return s
}

// setCoefs loads the multiplied-out coefficients φ'_1..φ'_p', θ'_1..θ'_q'.
func (s *ssm) setCoefs(phiExp, thetaExp []float64) {
	for i := range s.phi {
		s.phi[i], s.theta[i] = 0, 0
	}
	copy(s.phi, phiExp)
	s.theta[0] = 1
	copy(s.theta[1:], thetaExp)
	s.phiNZ, s.thetaNZ = s.phiNZ[:0], s.thetaNZ[:0]
	for i := 0; i < s.r; i++ {
		if s.phi[i] != 0 {
			s.phiNZ = append(s.phiNZ, i)
		}
		if s.theta[i] != 0 {
			s.thetaNZ = append(s.thetaNZ, i)
		}
	}
}

// stationaryRow computes the first row q_j = Cov(x_t, a_t[j]), j = 0..r−1, of
// the stationary state covariance Q0 (the solution of Q0 = T Q0 Tᵀ + R Rᵀ)
// in O(r·(p'+q') + p'²) time without forming Q0.
//
// Writing a_t[j] = Σ_{m=0}^{r−1−j} (φ'_{j+m+1} x_{t−1−m} + θ'_{j+m} ε_{t−m})
// (unrolling the state equation, θ'_0 = 1),
//
//	q_j = Σ_{i≥j} φ'_{i+1} γ(1+i−j) + Σ_{i≥j} θ'_i ψ_{i−j},
//
// with γ the autocovariances of x (unit σ²) and ψ its moving-average
// weights. γ comes from the AR autocovariances γ_u of 1/φ'(B) (Durbin–
// Levinson: the AR coefficients are stepped down to partial
// autocorrelations π_k and stepped up again to autocorrelations, with
// γ_u(0) = 1/Π(1−π_k²)) convolved with the MA autocovariances
// c_j = Σ_i θ'_i θ'_{i+j}: γ(h) = Σ_{|j|≤q'} c_{|j|} γ_u(h−j).
// The step-down also proves stationarity: it fails with ErrNonStationary as
// soon as some |π_k| ≥ 1.
//
// References:
//   - Brockwell, P. J. & Davis, R. A. (1991). Time Series: Theory and
//     Methods, 2nd ed. Springer, §3.3 (autocovariances of ARMA), §5.2
//     (Durbin–Levinson algorithm).
//   - Monahan, J. F. (1984). A note on enforcing stationarity in
//     autoregressive-moving average models. Biometrika 71(2), 403–404.
func (s *ssm) stationaryRow() error {
	r, p, q := s.r, s.p, s.q
	s.pacf = resize(s.pacf, p)
	if err := stepDown(s.pacf, s.phi[:p], &s.work, &s.work2); err != nil {
		return err
	}
	// Autocovariances of the pure AR part up to lag r+q.
	L := r + q
	s.gu = resize(s.gu, L+1)
	gu := s.gu
	v := 1.0
	s.work = resize(s.work, p)
	s.work2 = resize(s.work2, p)
	phiK := s.work
	tmp := s.work2
	gu[0] = 1
	for k := 1; k <= p; k++ {
		pk := s.pacf[k-1]
		acc := pk * v
		for j := 1; j < k; j++ {
			acc += phiK[j-1] * gu[k-j]
		}
		gu[k] = acc
		for j := 1; j < k; j++ {
			tmp[j-1] = phiK[j-1] - pk*phiK[k-j-1]
		}
		copy(phiK[:k-1], tmp[:k-1])
		phiK[k-1] = pk
		v *= 1 - pk*pk
	}
	if !(v > 0) {
		return ErrNonStationary
	}
	g0 := 1 / v
	for k := 0; k <= p && k <= L; k++ {
		gu[k] *= g0
	}
	for k := p + 1; k <= L; k++ {
		acc := 0.0
		for _, i := range s.phiNZ {
			acc += s.phi[i] * gu[k-i-1]
		}
		gu[k] = acc
	}
	// MA autocovariances c_j, j = 0..q.
	s.cma = resize(s.cma, q+1)
	for j := range s.cma {
		s.cma[j] = 0
	}
	for a, i := range s.thetaNZ {
		for _, k := range s.thetaNZ[a:] {
			s.cma[k-i] += s.theta[i] * s.theta[k]
		}
	}
	// γ(h), h = 0..r.
	s.gam = resize(s.gam, r+1)
	for h := 0; h <= r; h++ {
		acc := 0.0
		for j := 0; j <= q; j++ {
			c := s.cma[j]
			if c == 0 {
				continue
			}
			if j == 0 {
				acc += c * gu[h]
				continue
			}
			acc += c * (gu[absInt(h-j)] + gu[h+j])
		}
		s.gam[h] = acc
	}
	// ψ_0..ψ_{r−1} of θ'(z)/φ'(z).
	s.psi = resize(s.psi, r)
	for j := 0; j < r; j++ {
		acc := s.theta[j]
		for _, i := range s.phiNZ {
			if i+1 > j {
				break
			}
			acc += s.phi[i] * s.psi[j-i-1]
		}
		s.psi[j] = acc
	}
	// First row of Q0.
	for j := 0; j < r; j++ {
		acc := 0.0
		for _, i := range s.phiNZ {
			if i >= j {
				acc += s.phi[i] * s.gam[1+i-j]
			}
		}
		for _, i := range s.thetaNZ {
			if i >= j {
				acc += s.theta[i] * s.psi[i-j]
			}
		}
		s.q0[j] = acc
	}
	s.q0[r] = 0
	if !(s.q0[0] > 0) || math.IsInf(s.q0[0], 0) {
		return ErrNonStationary
	}
	return nil
}

// stationaryCov fills dst (r×r, row-major, resized) with Q0 from its first
// row, in O(r²), by the recursion that follows from
// a_t[i] = φ'_{i+1} x_{t−1} + a_{t−1}[i+1] + θ'_i ε_t:
//
//	Q0[i][k] = φ'_{i+1}φ'_{k+1} γ(0) + θ'_iθ'_k + φ'_{i+1} q_{k+1} + φ'_{k+1} q_{i+1} + Q0[i+1][k+1],
//
// with q_r = 0 and Q0[r][·] = 0. stationaryRow must have succeeded.
func (s *ssm) stationaryCov(dst []float64, ld int) {
	r := s.r
	g0 := s.gam[0]
	for i := r - 1; i >= 0; i-- {
		for k := r - 1; k >= i; k-- {
			v := s.phi[i]*s.phi[k]*g0 + s.theta[i]*s.theta[k] + s.phi[i]*s.q0[k+1] + s.phi[k]*s.q0[i+1]
			if i+1 < r && k+1 < r {
				v += dst[(i+1)*ld+k+1]
			}
			dst[i*ld+k] = v
			dst[k*ld+i] = v
		}
	}
}

// stepDown maps AR coefficients a_1..a_p to partial autocorrelations
// (the inverse Durbin–Levinson recursion,
// a^{(k−1)}_j = (a^{(k)}_j + π_k a^{(k)}_{k−j}) / (1 − π_k²), π_k = a^{(k)}_k).
// It returns ErrNonStationary when some |π_k| ≥ 1 (Brockwell & Davis 1991,
// §8.1; Monahan 1984).
func stepDown(pacf, ar []float64, w1, w2 *[]float64) error {
	p := len(ar)
	*w1 = resize(*w1, p)
	*w2 = resize(*w2, p)
	cur, nxt := *w1, *w2
	copy(cur, ar)
	for k := p; k >= 1; k-- {
		pk := cur[k-1]
		if !(math.Abs(pk) < 1) {
			return ErrNonStationary
		}
		pacf[k-1] = pk
		den := 1 - pk*pk
		for j := 1; j < k; j++ {
			nxt[j-1] = (cur[j-1] + pk*cur[k-j-1]) / den
		}
		cur, nxt = nxt, cur
	}
	return nil
}

// stepUp maps partial autocorrelations to AR coefficients (the Durbin–
// Levinson recursion a^{(k)}_j = a^{(k−1)}_j − π_k a^{(k−1)}_{k−j},
// a^{(k)}_k = π_k). work has length ≥ len(pacf).
func stepUp(ar, pacf, work []float64) {
	p := len(pacf)
	for k := 1; k <= p; k++ {
		pk := pacf[k-1]
		for j := 1; j < k; j++ {
			work[j-1] = ar[j-1] - pk*ar[k-j-1]
		}
		copy(ar[:k-1], work[:k-1])
		ar[k-1] = pk
	}
}

func absInt(i int) int {
	if i < 0 {
		return -i
	}
	return i
}
