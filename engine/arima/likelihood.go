package arima

import (
	"fmt"
	"math"
)

// Which filter an evaluator runs.
const (
	pathChandra = iota // complete differenced series: Chandrasekhar recursions
	pathDense          // missing values, no differencing: full covariance filter
	pathAug            // missing values and differencing: levels in the state
)

// evaluator computes the concentrated exact log-likelihood of one series
// under varying coefficients of one specification, reusing its buffers.
//
// Differencing. Without missing values the exact likelihood of the
// differenced series w_t = y_t − Σ_j δ_j y_{t−j}, t > d+sD, is computed by
// the ARMA filter alone; the first d+sD observations are the anchors. This
// is what R's stats::arima reports (its diffuse prior κ = 1e6 on the levels
// only perturbs it by O(1/κ)). With missing values in a differenced series
// simple differencing would lose information (y_{t+1} − y_{t−1} is still
// known when y_t is missing), so there the levels are put in the state with
// R's diffuse prior and its F < 1e4 counting rule, which reproduces R's
// numbers exactly.
type evaluator struct {
	spec  Spec
	n     int // len(y)
	nd    int
	path  int
	data  []float64 // w (paths chandra, dense) or y (path aug)
	diffs []float64 // w_t = y_t − Σ_j δ_j y_{t−j}, t ≥ nd (NaN where it touches a missing y)
	xcol  []float64 // regression column in the space of data; nil without mean/drift
	beta0 float64   // preliminary regression coefficient (centering)
	ndiff float64   // Σ_j j δ_j: the differenced drift regressor
	s     *ssm
	ws    workspace
	phiE  []float64
	thE   []float64
	nobs  int // observations that count
}

// evalOut is the result of one evaluation.
type evalOut struct {
	loglik, sigma2, beta float64
	sumlog, ssq          float64
	nobs                 int
}

// checkData validates a series: NaN is a missing value; ±Inf and
// magnitudes above MaxAbsValue are errors.
func checkData(y []float64) (present int, err error) {
	for i, v := range y {
		switch {
		case math.IsNaN(v):
		case math.IsInf(v, 0) || math.Abs(v) > MaxAbsValue:
			return 0, fmt.Errorf("%w: value %d is %v (finite values of magnitude at most %g, or NaN for missing)", ErrData, i+1, v, MaxAbsValue)
		default:
			present++
		}
	}
	return present, nil
}

func newEvaluator(y []float64, spec Spec) (*evaluator, error) {
	if err := spec.Validate(); err != nil {
		return nil, err
	}
	present, err := checkData(y)
	if err != nil {
		return nil, err
	}
	e := &evaluator{spec: spec, n: len(y), nd: spec.nd(), s: newSSM(spec)}
	e.nobs = present - e.nd
	if e.nobs < 1 {
		return nil, fmt.Errorf("%w: %d observations present, %s uses %d for differencing", ErrTooShort, present, spec, e.nd)
	}
	for j, d := range e.s.delta {
		e.ndiff += float64(j+1) * d
	}
	hasNaN := present < len(y)
	nd := e.nd
	// The differenced series (NaN wherever it touches a missing y).
	w := make([]float64, len(y)-nd)
	for t := nd; t < len(y); t++ {
		v := y[t]
		for _, j := range e.s.deltaNZ {
			v -= e.s.delta[j] * y[t-j-1]
		}
		w[t-nd] = v
	}
	e.diffs = w
	// Preliminary regression coefficient: the mean of w (per unit of the
	// regressor), ignoring missing values.
	sum, cnt := 0.0, 0
	for _, v := range w {
		if !math.IsNaN(v) {
			sum += v
			cnt++
		}
	}
	wbar := 0.0
	if cnt > 0 {
		wbar = sum / float64(cnt)
	}
	switch {
	case nd > 0 && hasNaN:
		e.path = pathAug
		e.data = y
		if spec.Drift {
			e.xcol = make([]float64, len(y))
			for t := range e.xcol {
				e.xcol[t] = float64(t + 1)
			}
			e.beta0 = wbar / e.ndiff
		}
	default:
		e.path = pathChandra
		if hasNaN {
			e.path = pathDense
		}
		e.data = w
		switch {
		case spec.Mean:
			e.xcol = constSlice(len(w), 1)
			e.beta0 = wbar
		case spec.Drift:
			e.xcol = constSlice(len(w), e.ndiff)
			e.beta0 = wbar / e.ndiff
		}
	}
	return e, nil
}

func constSlice(n int, v float64) []float64 {
	s := make([]float64, n)
	for i := range s {
		s[i] = v
	}
	return s
}

// eval computes the concentrated log-likelihood at the given coefficients.
// With profile set the regression coefficient is profiled out by GLS
// (filtering the regression column with the same gains: the filter is
// linear in the data, so β̂ = Σ v_x v_y/F / Σ v_x²/F and the residual sum of
// squares is Σ v_y²/F − (Σ v_x v_y/F)²/Σ v_x²/F); otherwise beta is used.
// resid, when not nil (length len(y)), receives the standardised one-step
// prediction errors v_t/√(σ̂² F_t), NaN where missing or burned.
func (e *evaluator) eval(ar, ma, sar, sma []float64, beta float64, profile bool, resid []float64) (evalOut, error) {
	var out evalOut
	e.phiE = expandAR(e.phiE, ar, sar, e.spec.Period)
	e.thE = expandMA(e.thE, ma, sma, e.spec.Period)
	e.s.setCoefs(e.phiE, e.thE)
	if err := e.s.prepare(); err != nil {
		return out, err
	}
	profile = profile && e.xcol != nil
	b := beta
	if profile {
		b = e.beta0
	}
	e.ws.w = resize(e.ws.w, len(e.data))
	d := e.ws.w
	if e.xcol != nil {
		for i, v := range e.data {
			d[i] = v - b*e.xcol[i]
		}
	} else {
		copy(d, e.data)
	}
	var x []float64
	if profile {
		x = e.xcol
	}
	var rr []float64
	if resid != nil {
		e.ws.resid = resize(e.ws.resid, len(d))
		rr = e.ws.resid
	}
	var u sums
	var err error
	path := e.path
	if path == pathChandra && e.s.fallback {
		path = pathDense // no stationary fixed point for the Chandrasekhar start
	}
	switch path {
	case pathChandra:
		u, err = e.s.chandrasekhar(d, x, &e.ws, rr)
		if err != nil {
			u, err = e.s.denseFilter(d, x, false, &e.ws, rr)
		}
	case pathDense:
		u, err = e.s.denseFilter(d, x, false, &e.ws, rr)
	default:
		u, err = e.s.denseFilter(d, x, true, &e.ws, rr)
	}
	if err != nil {
		return out, err
	}
	if u.n == 0 {
		return out, ErrTooShort
	}
	ssq := u.syy
	out.beta = b
	if profile && u.sxx > 0 {
		out.beta = b + u.sxy/u.sxx
		ssq = u.syy - u.sxy*u.sxy/u.sxx
	}
	nn := float64(u.n)
	out.ssq, out.sumlog, out.nobs = ssq, u.sumlog, u.n
	out.sigma2 = ssq / nn
	out.loglik = -0.5 * (nn*math.Log(out.sigma2) + u.sumlog + nn + nn*math.Log(2*math.Pi))
	if resid != nil {
		sd := math.Sqrt(out.sigma2)
		for i := range resid {
			resid[i] = math.NaN()
		}
		off := 0
		if e.path != pathAug {
			off = e.nd
		}
		for i, v := range rr {
			resid[i+off] = v / sd
		}
		if e.path != pathAug {
			for i, v := range e.data {
				if math.IsNaN(v) {
					resid[i+off] = math.NaN()
				}
			}
		}
	}
	if math.IsNaN(out.loglik) || math.IsInf(out.loglik, 0) || !(out.sigma2 > 0) {
		return out, ErrNumerical
	}
	return out, nil
}

// LogLik returns the exact Gaussian log-likelihood of y (NaN = missing)
// under m with σ² concentrated out, together with σ̂² and the number of
// observations that count (non-missing less d+sD):
//
//	σ̂² = (1/n) Σ_t v_t²/F_t,   log L = −½ [n log σ̂² + Σ_t log F_t + n + n log 2π].
//
// m.Sigma2 is ignored; m.Mean and m.Drift are used as given. The ARMA
// block starts at its exact stationary covariance; an AR part on the unit
// circle to within rounding starts instead from the truncated doubling sum
// Σ_{k<2^20} T^k R Rᵀ (Tᵀ)^k, positive semi-definite by construction; an
// explosive AR part returns ErrNonStationary.
//
// References:
//   - Durbin, J. & Koopman, S. J. (2012). Time Series Analysis by State Space
//     Methods, 2nd ed., §7.2.1 (prediction error decomposition), §2.10.2
//     (concentrating the variance).
//   - Gardner, G., Harvey, A. C. & Phillips, G. D. A. (1980), Applied
//     Statistics 29(3), 311–322.
func LogLik(y []float64, m *Model) (loglik, sigma2 float64, nobs int, err error) {
	if m == nil {
		return 0, 0, 0, fmt.Errorf("arima: loglik: %w: nil model", ErrParams)
	}
	e, err := newEvaluator(y, m.Spec)
	if err != nil {
		return 0, 0, 0, fmt.Errorf("arima: loglik %s: %w", m.Spec, err)
	}
	if err := checkShape(m); err != nil {
		return 0, 0, 0, err
	}
	beta := m.Mean
	if m.Spec.Drift {
		beta = m.Drift
	}
	out, err := e.eval(m.AR, m.MA, m.SAR, m.SMA, beta, false, nil)
	if err != nil {
		return 0, 0, 0, fmt.Errorf("arima: loglik %s: %w", m.Spec, err)
	}
	return out.loglik, out.sigma2, out.nobs, nil
}

// checkShape verifies that the coefficient slices match the specification.
func checkShape(m *Model) error {
	s := m.Spec
	if len(m.AR) != s.P || len(m.MA) != s.Q || len(m.SAR) != s.SP || len(m.SMA) != s.SQ {
		return fmt.Errorf("arima: model %s: %w: coefficient counts %d,%d,%d,%d do not match the orders",
			s, ErrParams, len(m.AR), len(m.MA), len(m.SAR), len(m.SMA))
	}
	for _, v := range m.Params() {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return fmt.Errorf("arima: model %s: %w: non-finite coefficient", s, ErrParams)
		}
	}
	return nil
}
