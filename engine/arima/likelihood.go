package arima

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/blas/blas64"
	"gonum.org/v1/gonum/mat"

	"forewarn/engine/internal/linalg"
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

	// Regression with external regressors (Spec.NX > 0). All regression
	// columns — the mean or drift column first when there is one, then the
	// NX external ones — in the space of data (differenced, or in levels on
	// path aug), NaN wherever data is missing. nil when NX = 0, where the
	// single mean/drift column above keeps its own fast path.
	cols   [][]float64
	betas0 []float64 // preliminary OLS coefficients of the differenced columns
	cssW   []float64 // differenced series less the preliminary regression (CSS start)
	ex     [][]float64
	sm, sv []float64 // k×k and k: the GLS cross products
	betaO  []float64 // the last GLS coefficients
	chol   []float64 // k×k Cholesky factor of sm
	// xbFixed, when set, is Σ_j β_j cols_j (0 where a column is NaN) for
	// the betas an unprofiled evalX is called with.
	xbFixed []float64
	b1      [1]float64
}

// evalOut is the result of one evaluation. With external regressors
// betas holds all regression coefficients (a view of the evaluator's
// workspace, valid until the next eval) and beta is unused.
type evalOut struct {
	loglik, sigma2, beta float64
	sumlog, ssq          float64
	nobs                 int
	betas                []float64
}

// concentrate sets the results of the likelihood with σ² concentrated out:
// σ̂² = ssq/n and log L = −½(n log σ̂² + Σ log F_t + n + n log 2π), from the
// sum of squared standardised innovations ssq, Σ log F_t and n.
func (o *evalOut) concentrate(ssq, sumlog float64, n int) {
	nn := float64(n)
	o.ssq, o.sumlog, o.nobs = ssq, sumlog, n
	o.sigma2 = ssq / nn
	o.loglik = -0.5 * (nn*math.Log(o.sigma2) + sumlog + nn + nn*math.Log(2*math.Pi))
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

// checkRegressors validates the external regressors of a series of length
// n: NX columns of n values, finite (NaN marks a missing row) and of
// magnitude at most MaxAbsValue.
func checkRegressors(X [][]float64, n, nx int) error {
	if len(X) != nx {
		return fmt.Errorf("%w: %d columns, the model has %d regressors", ErrRegressors, len(X), nx)
	}
	for j, c := range X {
		if len(c) != n {
			return fmt.Errorf("%w: column %d has %d values, the series %d", ErrRegressors, j+1, len(c), n)
		}
		for i, v := range c {
			if math.IsInf(v, 0) || math.Abs(v) > MaxAbsValue {
				return fmt.Errorf("%w: column %d, value %d is %v", ErrRegressors, j+1, i+1, v)
			}
		}
	}
	return nil
}

// maskRows returns y with NaN in every row where a regressor is missing
// (a row counts only when y and all of x_t are known), or y itself when
// no regressor is missing.
func maskRows(y []float64, X [][]float64) []float64 {
	var out []float64
	for _, c := range X {
		for i, v := range c {
			if math.IsNaN(v) && !math.IsNaN(y[i]) {
				if out == nil {
					out = append([]float64(nil), y...)
				}
				out[i] = math.NaN()
			}
		}
	}
	if out == nil {
		return y
	}
	return out
}

func newEvaluator(y []float64, spec Spec) (*evaluator, error) {
	return newEvaluatorX(y, nil, spec)
}

// newEvaluatorX is newEvaluator with the NX external regressor columns X
// (each len(y) long).
func newEvaluatorX(y []float64, X [][]float64, spec Spec) (*evaluator, error) {
	if err := spec.Validate(); err != nil {
		return nil, err
	}
	if err := checkRegressors(X, len(y), spec.NX); err != nil {
		return nil, err
	}
	present, err := checkData(y)
	if err != nil {
		return nil, err
	}
	if spec.NX > 0 {
		y = maskRows(y, X)
		present, _ = checkData(y)
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
	if spec.NX > 0 {
		if err := e.setRegressors(y, X); err != nil {
			return nil, err
		}
	}
	return e, nil
}

// setRegressors builds the regression columns in the space of e.data and
// the preliminary OLS fit of the differenced series on the differenced
// columns (the start R's stats::arima takes from lm as well).
func (e *evaluator) setRegressors(y []float64, X [][]float64) error {
	nd := e.nd
	var dcols [][]float64 // differenced columns, for OLS
	diff := func(c []float64) []float64 {
		w := make([]float64, len(c)-nd)
		for t := nd; t < len(c); t++ {
			v := c[t]
			for _, j := range e.s.deltaNZ {
				v -= e.s.delta[j] * c[t-j-1]
			}
			w[t-nd] = v
		}
		return w
	}
	if e.xcol != nil {
		e.cols = append(e.cols, e.xcol)
		dc := e.xcol
		if e.path == pathAug {
			dc = constSlice(len(e.diffs), e.ndiff)
		}
		dcols = append(dcols, dc)
	}
	for _, c := range X {
		dc := diff(c)
		dcols = append(dcols, dc)
		if e.path == pathAug {
			e.cols = append(e.cols, append([]float64(nil), c...))
		} else {
			e.cols = append(e.cols, dc)
		}
	}
	k := len(e.cols)
	// NaN in every column where the data are missing, so that each column
	// is filtered with exactly the gains of the data.
	for _, c := range e.cols {
		for i, v := range e.data {
			if math.IsNaN(v) {
				c[i] = math.NaN()
			}
		}
	}
	// OLS on the rows where w and every column are known.
	A := mat.NewSymDense(k, nil)
	b := make([]float64, k)
	for t, wt := range e.diffs {
		ok := !math.IsNaN(wt)
		for _, c := range dcols {
			ok = ok && !math.IsNaN(c[t])
		}
		if !ok {
			continue
		}
		for i, ci := range dcols {
			b[i] += ci[t] * wt
			for j := i; j < k; j++ {
				A.SetSym(i, j, A.At(i, j)+ci[t]*dcols[j][t])
			}
		}
	}
	var ch mat.Cholesky
	if !ch.Factorize(A) || ch.Cond() > 1e14 {
		return fmt.Errorf("%w: the %d regression columns are collinear after differencing (or constant, which differencing removes)", ErrRegressors, k)
	}
	var bv mat.VecDense
	if err := ch.SolveVecTo(&bv, mat.NewVecDense(k, b)); err != nil {
		return fmt.Errorf("%w: %v", ErrRegressors, err)
	}
	e.betas0 = make([]float64, k)
	for i := range e.betas0 {
		e.betas0[i] = bv.AtVec(i)
	}
	e.cssW = make([]float64, len(e.diffs))
	for t, wt := range e.diffs {
		v := wt
		for i, c := range dcols {
			v -= e.betas0[i] * c[t]
		}
		e.cssW[t] = v
	}
	e.ex = make([][]float64, k)
	for i := range e.ex {
		e.ex[i] = make([]float64, len(e.data))
	}
	e.sm = make([]float64, k*k)
	e.chol = make([]float64, k*k)
	e.sv = make([]float64, k)
	e.betaO = make([]float64, k)
	return nil
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
//
// With external regressors (e.cols set) beta holds all regression
// coefficients and the data and each column are filtered in turn (evalX).
func (e *evaluator) eval(ar, ma, sar, sma []float64, beta float64, profile bool, resid []float64) (evalOut, error) {
	e.b1[0] = beta
	return e.evalB(ar, ma, sar, sma, e.b1[:], profile, resid)
}

// evalB is eval with the regression coefficients as a slice (one per
// regression column; nil when profiled).
func (e *evaluator) evalB(ar, ma, sar, sma []float64, betas []float64, profile bool, resid []float64) (evalOut, error) {
	var out evalOut
	e.phiE = expandAR(e.phiE, ar, sar, e.spec.Period)
	e.thE = expandMA(e.thE, ma, sma, e.spec.Period)
	e.s.setCoefs(e.phiE, e.thE)
	if err := e.s.prepare(); err != nil {
		return out, err
	}
	if e.cols != nil {
		return e.evalX(betas, profile, resid)
	}
	beta := 0.0
	if len(betas) > 0 {
		beta = betas[0]
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
	u, err := e.run(d, x, rr)
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
	out.concentrate(ssq, u.sumlog, u.n)
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

// run filters d (and the column x, may be nil) with the evaluator's path.
func (e *evaluator) run(d, x, rr []float64) (sums, error) {
	path := e.path
	if path == pathChandra && e.s.fallback {
		path = pathDense // no stationary fixed point for the Chandrasekhar start
	}
	switch path {
	case pathChandra:
		u, err := e.s.chandrasekhar(d, x, &e.ws, rr)
		if err != nil {
			return e.s.denseFilter(d, x, false, &e.ws, rr)
		}
		return u, nil
	case pathDense:
		return e.s.denseFilter(d, x, false, &e.ws, rr)
	}
	return e.s.denseFilter(d, x, true, &e.ws, rr)
}

// evalX is eval with k regression columns. The Kalman filter is linear in
// its data and its gains do not depend on them, so filtering the data and
// each column separately with the same model (and the same missing rows)
// gives the standardised one-step errors e_y and e_j of the data and of
// each column, and for any β the errors of y − Xβ are e_y − Σ_j β_j e_j.
// The likelihood is then maximised over β by generalised least squares,
//
//	S = Σ_t e_t e_tᵀ (k×k),  s = Σ_t e_t e_y,t,  β̂ = S⁻¹ s,
//	σ̂² = (Σ e_y² − sᵀβ̂)/n,
//
// with Σ log F_t unchanged: regression in state space by the filter
// applied to the regressors (Harvey 1989, §3.4.2; Durbin & Koopman 2012,
// §6.2.2, where the same quantities come from the augmented filter of de
// Jong 1991; Kohn & Ansley 1985 for the missing-data case).
func (e *evaluator) evalX(betas []float64, profile bool, resid []float64) (evalOut, error) {
	var out evalOut
	k := len(e.cols)
	e.ws.w = resize(e.ws.w, len(e.data))
	d := e.ws.w
	copy(d, e.data)
	if !profile && e.xbFixed != nil {
		// Xβ precomputed for these betas (fitter.gradient)
		for i, v := range e.xbFixed {
			d[i] -= v
		}
	} else if !profile {
		for j, c := range e.cols {
			b := betas[j]
			for i, v := range c {
				if !math.IsNaN(v) {
					d[i] -= b * v
				}
			}
		}
	}
	e.ws.resid = resize(e.ws.resid, len(d))
	ey := e.ws.resid
	// One pass over the data records the gains; each column is then
	// filtered with them (gainRec). With β given (not profiled) the
	// columns' errors are not needed: the data less Xβ alone is filtered.
	e.ws.rec.on = profile
	u, err := e.run(d, nil, ey)
	e.ws.rec.on = false
	if err != nil {
		return out, err
	}
	if u.n == 0 {
		return out, ErrTooShort
	}
	if !profile {
		// nothing to filter
	} else if rec := &e.ws.rec; rec.valid {
		e.ws.xa = resize(e.ws.xa, 4*rec.m)
		e.ws.t1 = resize(e.ws.t1, rec.m)
		e.s.replayCols(rec, e.cols, e.ex, e.ws.xa, e.ws.t1)
	} else {
		for j, c := range e.cols {
			if _, err := e.run(c, nil, e.ex[j]); err != nil {
				return out, err
			}
		}
	}
	ssq := u.syy
	copy(e.betaO, betas)
	if profile {
		for i := range e.sm {
			e.sm[i] = 0
		}
		for i := range e.sv {
			e.sv[i] = 0
		}
		if crossDots(e.sm, e.sv, e.ex, ey, k) {
			goto solve
		}
		for t, vy := range ey {
			if math.IsNaN(vy) {
				continue
			}
			for i := 0; i < k; i++ {
				xi := e.ex[i][t]
				e.sv[i] += xi * vy
				row := e.sm[i*k:]
				for j := i; j < k; j++ {
					row[j] += xi * e.ex[j][t]
				}
			}
		}
	solve:
		if !cholesky(e.chol, e.sm, k) {
			return out, fmt.Errorf("%w: the regression columns are collinear after filtering", ErrRegressors)
		}
		linalg.CholSolve(e.betaO, e.chol, e.sv, k)
		ssq -= dot(e.sv, e.betaO)
	}
	out.betas = e.betaO
	out.concentrate(ssq, u.sumlog, u.n)
	if resid != nil {
		sd := math.Sqrt(out.sigma2)
		for i := range resid {
			resid[i] = math.NaN()
		}
		off := 0
		if e.path != pathAug {
			off = e.nd
		}
		for i, v := range ey {
			if !math.IsNaN(e.data[i]) {
				resid[i+off] = v / sd
			}
		}
	}
	if math.IsNaN(out.loglik) || math.IsInf(out.loglik, 0) || !(out.sigma2 > 0) {
		return out, ErrNumerical
	}
	return out, nil
}

// regCov returns σ̂² S⁻¹ (row-major k×k) from the last profiled evalX:
// the covariance of the GLS coefficients given the ARMA coefficients.
func (e *evaluator) regCov(sigma2 float64) []float64 {
	k := len(e.cols)
	out := make([]float64, k*k)
	col := make([]float64, k)
	unit := make([]float64, k)
	for j := 0; j < k; j++ {
		for i := range unit {
			unit[i] = 0
		}
		unit[j] = 1
		linalg.CholSolve(col, e.chol, unit, k)
		for i := 0; i < k; i++ {
			out[i*k+j] = sigma2 * col[i]
		}
	}
	return out
}

// cholesky writes the lower factor L (row-major, A = L Lᵀ) of the
// symmetric k×k matrix whose upper triangle is in a; false when A is not
// numerically positive definite.
func cholesky(l, a []float64, k int) bool {
	for i := 0; i < k; i++ {
		for j := 0; j <= i; j++ {
			s := a[j*k+i] // upper triangle: A[j][i], j ≤ i
			for m := 0; m < j; m++ {
				s -= l[i*k+m] * l[j*k+m]
			}
			if i == j {
				if !(s > 1e-13*math.Abs(a[i*k+i])) {
					return false
				}
				l[i*k+i] = math.Sqrt(s)
			} else {
				l[i*k+j] = s / l[j*k+j]
			}
		}
		for j := i + 1; j < k; j++ {
			l[i*k+j] = 0
		}
	}
	return true
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
	out, err := e.evalB(m.AR, m.MA, m.SAR, m.SMA, regCoefs(m), false, nil)
	if err != nil {
		return 0, 0, 0, fmt.Errorf("arima: loglik %s: %w", m.Spec, err)
	}
	return out.loglik, out.sigma2, out.nobs, nil
}

// LogLikX is LogLik for a model with Spec.NX external regressors: X holds
// their NX columns, each len(y) long (NaN in a column marks the row as
// missing). The likelihood is that of y − μ − δ·t − Xβ under the ARIMA
// part, at the model's β.
func LogLikX(y []float64, X [][]float64, m *Model) (loglik, sigma2 float64, nobs int, err error) {
	if m == nil {
		return 0, 0, 0, fmt.Errorf("arima: loglik: %w: nil model", ErrParams)
	}
	if err := checkShape(m); err != nil {
		return 0, 0, 0, err
	}
	e, err := newEvaluatorX(y, X, m.Spec)
	if err != nil {
		return 0, 0, 0, fmt.Errorf("arima: loglik %s: %w", m.Spec, err)
	}
	out, err := e.evalB(m.AR, m.MA, m.SAR, m.SMA, regCoefs(m), false, nil)
	if err != nil {
		return 0, 0, 0, fmt.Errorf("arima: loglik %s: %w", m.Spec, err)
	}
	return out.loglik, out.sigma2, out.nobs, nil
}

// regCoefs returns the regression coefficients in the order of the
// evaluator's columns: the mean or drift, then Beta.
func regCoefs(m *Model) []float64 {
	out := make([]float64, 0, 1+len(m.Beta))
	if m.Spec.Mean {
		out = append(out, m.Mean)
	} else if m.Spec.Drift {
		out = append(out, m.Drift)
	}
	return append(out, m.Beta...)
}

// checkShape verifies that the coefficient slices match the specification.
func checkShape(m *Model) error {
	s := m.Spec
	if len(m.AR) != s.P || len(m.MA) != s.Q || len(m.SAR) != s.SP || len(m.SMA) != s.SQ || len(m.Beta) != s.NX {
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

// crossDots fills the upper triangle of sm (k×k) with Σ_t e_i,t e_j,t and
// sv with Σ_t e_i,t e_y,t by dot products over whole columns, when every
// filtered value is finite (no missing rows). It reports false, leaving sm
// and sv to the row loop, when a value is NaN. Same sums as the row loop,
// in a cache- and pipeline-friendly order.
func crossDots(sm, sv []float64, ex [][]float64, ey []float64, k int) bool {
	if anyNaN(ey) {
		return false
	}
	for i := 0; i < k; i++ {
		if anyNaN(ex[i]) {
			return false
		}
	}
	for i := 0; i < k; i++ {
		xi := ex[i]
		sv[i] = dot4(xi, ey)
		for j := i; j < k; j++ {
			sm[i*k+j] = dot4(xi, ex[j])
		}
	}
	return true
}

func anyNaN(x []float64) bool {
	for _, v := range x {
		if v != v {
			return true
		}
	}
	return false
}

// dot4 is Σ a_i b_i (len(b) ≥ len(a)), by gonum's BLAS Ddot (assembly
// kernel on amd64; about twice the speed of a four-sum Go loop here).
func dot4(a, b []float64) float64 {
	return blas64.Dot(blas64.Vector{N: len(a), Inc: 1, Data: a}, blas64.Vector{N: len(a), Inc: 1, Data: b[:len(a)]})
}
