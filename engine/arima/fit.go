package arima

import (
	"errors"
	"fmt"
	"math"
	"strings"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/optimize"
)

// Result is a fitted model with its diagnostics.
type Result struct {
	Model                  *Model
	LogLik, AIC, AICc, BIC float64
	NObs                   int
	StdErr                 []float64 // layout of Params(); NaN where unavailable
	Converged              bool
	Iterations             int
	Note                   string    // why not converged, or which fallback start was used
	Residuals              []float64 // standardized one-step innovations, NaN where missing/burned
	// RegCov is, for a model with external regressors (Spec.NX > 0), the
	// covariance σ̂² S⁻¹ of all regression coefficients (the mean or drift
	// when estimated, then Beta), row-major, given the ARMA coefficients
	// (see FitX). nil without external regressors.
	RegCov []float64
}

// FitOptions are optional knobs of Fit. The zero value (or nil) means
// defaults.
type FitOptions struct {
	// Start is a warm start in the layout of Model.Params (the mean or
	// drift entry is ignored: it is profiled out). nil: start from a
	// conditional-sum-of-squares fit.
	Start []float64
	// MaxIter caps the BFGS iterations; 0 means 200.
	MaxIter int
}

const defaultMaxIter = 200

// rawBound caps |u| for the tanh-transformed partial autocorrelations so
// that |π| ≤ tanh(15) < 1 − 1e-12 stays strictly stationary in float64.
const rawBound = 15

// Fit estimates spec on y (NaN = missing value) by exact maximum
// likelihood.
//
// Method:
//  1. Start values: the warm start, else a conditional-sum-of-squares fit
//     (Box & Jenkins 1976, §7.1) of the differenced series started at zero.
//     A non-stationary CSS AR part falls back to a zero AR start, a
//     non-invertible MA part is reflected; the fit never aborts for that.
//  2. Each AR block (non-seasonal, seasonal) is reparametrised by its
//     partial autocorrelations π_k = tanh(u_k), mapped to AR coefficients
//     by the Durbin–Levinson recursion (Jones 1980; Monahan 1984), so every
//     trial point is stationary. MA coefficients are free.
//  3. σ² is concentrated out and the mean or drift profiled out by GLS; the
//     objective ½ log σ̂² + ½ Σ log F_t / n is minimised by BFGS
//     (gonum/optimize) with central finite-difference gradients.
//  4. Non-invertible MA blocks are reflected into the unit circle
//     afterwards (the likelihood is unchanged).
//  5. Standard errors come from the inverse of a central-difference Hessian
//     of −log L in the natural parameters (the profile Hessian, σ²
//     concentrated).
//
// AIC = −2 log L + 2(k+1), AICc = AIC + 2(k+1)(k+2)/(n−k−2),
// BIC = −2 log L + (k+1) log n, with k = Spec.NumParams() and n = NObs.
//
// References:
//   - Jones, R. H. (1980). Maximum likelihood fitting of ARMA models to time
//     series with missing observations. Technometrics 22(3), 389–395.
//   - Monahan, J. F. (1984). Biometrika 71(2), 403–404.
//   - Box, G. E. P. & Jenkins, G. M. (1976). Time Series Analysis:
//     Forecasting and Control, revised ed. Holden-Day.
//   - Hurvich, C. M. & Tsai, C.-L. (1989). Regression and time series model
//     selection in small samples. Biometrika 76(2), 297–307 (AICc).
func Fit(y []float64, spec Spec, opt *FitOptions) (*Result, error) {
	return FitX(y, nil, spec, opt)
}

// FitX is Fit for a regression with ARIMA errors,
//
//	y_t = μ + δ·t + x_tᵀβ + u_t,   u_t the ARIMA process of spec,
//
// with the spec.NX columns of X (each len(y) long; NaN in a column makes
// that row missing, as in R's stats::arima). β is profiled out of the
// exact likelihood by generalised least squares at every trial point
// (the data and each column are filtered with the same gains; see
// LogLikX), so the optimiser sees only the ARMA coefficients; the mean or
// drift becomes the first regression column. Differencing applies to the
// columns as to y. Standard errors: the ARMA coefficients from the
// numerical Hessian of the profile likelihood (whose inverse is the ARMA
// block of the full inverse Hessian), the regression coefficients from
// σ̂² S⁻¹ (Result.RegCov), their covariance given the ARMA coefficients.
//
// References:
//   - Harvey, A. C. (1989). Forecasting, Structural Time Series Models and
//     the Kalman Filter, §3.4 (regression with ARMA disturbances in state
//     space).
//   - Durbin, J. & Koopman, S. J. (2012), §6.2 (regression effects in the
//     state-space model; GLS estimate and its variance).
//   - Kohn, R. & Ansley, C. F. (1985). Efficient estimation and prediction
//     in time series regression models. Biometrika 72(3), 694–697.
func FitX(y []float64, X [][]float64, spec Spec, opt *FitOptions) (*Result, error) {
	if err := spec.Validate(); err != nil {
		return nil, fmt.Errorf("arima: fit: %w", err)
	}
	e, err := newEvaluatorX(y, X, spec)
	if err != nil {
		return nil, fmt.Errorf("arima: fit %s: %w", spec, err)
	}
	k := spec.NumParams()
	if e.nobs < k+3 {
		return nil, fmt.Errorf("arima: fit %s: %w: %d usable observations, need at least %d", spec, ErrTooShort, e.nobs, k+3)
	}
	if err := checkVariation(e); err != nil {
		return nil, fmt.Errorf("arima: fit %s: %w", spec, err)
	}
	if opt == nil {
		opt = &FitOptions{}
	}
	maxIter := opt.MaxIter
	if maxIter <= 0 {
		maxIter = defaultMaxIter
	}
	f := newFitter(e)
	var notes []string
	u0, note := f.startValues(opt.Start)
	if note != "" {
		notes = append(notes, note)
	}
	best, err := f.minimize(u0, maxIter)
	if err != nil || !best.converged {
		// Second chance from the safe zero start.
		z := make([]float64, len(u0))
		alt, err2 := f.minimize(z, maxIter)
		if err2 == nil && (err != nil || alt.f < best.f-1e-9 || (alt.converged && alt.f <= best.f+1e-9)) {
			best, err = alt, nil
			notes = append(notes, "restarted from zero coefficients")
		}
	}
	if err != nil {
		return nil, fmt.Errorf("arima: fit %s: %w", spec, err)
	}
	if !best.converged {
		notes = append(notes, "not converged: "+best.why)
	}
	return f.finish(best, notes)
}

// checkVariation rejects a differenced series without variation.
func checkVariation(e *evaluator) error {
	lo, hi := math.Inf(1), math.Inf(-1)
	n := 0
	for _, v := range e.diffs {
		if math.IsNaN(v) {
			continue
		}
		n++
		lo = math.Min(lo, v)
		hi = math.Max(hi, v)
	}
	if n == 0 {
		// every difference touches a missing value; let the filter decide
		return nil
	}
	if hi-lo <= 1e-12*math.Max(math.Abs(hi), math.Abs(lo)) {
		return ErrConstant
	}
	return nil
}

// fitter holds the parametrisation and buffers of one fit.
type fitter struct {
	e                *evaluator
	spec             Spec
	nu               int // number of free ARMA parameters
	ar, ma, sar, sma []float64
	pa, wk           []float64
	xp, xm           []float64
	gb               []float64 // β̂ at the point of the last gradient
	xb               []float64 // Σ_j gb_j · column j
	evals            int
}

func newFitter(e *evaluator) *fitter {
	s := e.spec
	nu := s.P + s.Q + s.SP + s.SQ
	return &fitter{e: e, spec: s, nu: nu,
		ar: make([]float64, s.P), ma: make([]float64, s.Q), sar: make([]float64, s.SP), sma: make([]float64, s.SQ),
		pa: make([]float64, max(s.P, s.SP)), wk: make([]float64, max(s.P, s.SP)),
		xp: make([]float64, nu), xm: make([]float64, nu)}
}

// decode maps optimiser coordinates u to coefficients (in f.ar etc.):
// AR blocks through π = tanh(u) and the Durbin–Levinson recursion, MA as is.
func (f *fitter) decode(u []float64) {
	s := f.spec
	i := 0
	arBlock := func(dst []float64) {
		for j := range dst {
			v := u[i+j]
			if v > rawBound {
				v = rawBound
			} else if v < -rawBound {
				v = -rawBound
			}
			f.pa[j] = math.Tanh(v)
		}
		stepUp(dst, f.pa[:len(dst)], f.wk)
		i += len(dst)
	}
	arBlock(f.ar)
	copy(f.ma, u[i:i+s.Q])
	i += s.Q
	arBlock(f.sar)
	copy(f.sma, u[i:i+s.SQ])
}

// encode is the inverse of decode; it fails for a non-stationary AR block.
func (f *fitter) encode(u, ar, ma, sar, sma []float64) error {
	i := 0
	var w1, w2 []float64
	arBlock := func(src []float64) error {
		pacf := make([]float64, len(src))
		if err := stepDown(pacf, src, &w1, &w2); err != nil {
			return err
		}
		for j, p := range pacf {
			u[i+j] = math.Atanh(p)
			if math.Abs(u[i+j]) > rawBound {
				return ErrNonStationary
			}
		}
		i += len(src)
		return nil
	}
	if err := arBlock(ar); err != nil {
		return err
	}
	copy(u[i:], ma)
	i += len(ma)
	if err := arBlock(sar); err != nil {
		return err
	}
	copy(u[i:], sma)
	return nil
}

// objective is ½ log σ̂² + ½ Σ log F_t / n at optimiser coordinates u, with
// the regression coefficient profiled out (R's stats::arima minimises the
// same function). Points where the filter fails get a large finite value.
func (f *fitter) objective(u []float64) float64 {
	f.evals++
	f.decode(u)
	out, err := f.e.evalB(f.ar, f.ma, f.sar, f.sma, nil, true, nil)
	if err != nil {
		return 1e10
	}
	return 0.5*math.Log(out.sigma2) + 0.5*out.sumlog/float64(out.nobs)
}

// gradStep is the central-difference step in optimiser coordinates.
const gradStep = 1e-5

// gradient is the central-difference gradient of the objective at u.
//
// With external regressors it uses the envelope theorem: the profiled
// objective is min over β of the objective at (u, β), so its gradient in u
// equals the partial gradient at β fixed at β̂(u) (∂/∂β vanishes there).
// β̂(u) comes from one profiled evaluation at u; the 2·nu differences then
// filter only y − Xβ̂, without the k columns and their k×k cross
// products. Both differences are above the profiled values by the same
// O(h²) to leading order, so the quotient keeps central differences'
// O(h²) error.
func (f *fitter) gradient(g, u []float64) {
	copy(f.xp, u)
	obj := f.objective
	if f.e.cols != nil {
		f.decode(u)
		out, err := f.e.evalB(f.ar, f.ma, f.sar, f.sma, nil, true, nil)
		if err == nil {
			f.gb = append(f.gb[:0], out.betas...)
			f.xb = resize(f.xb, len(f.e.data))
			for i := range f.xb {
				f.xb[i] = 0
			}
			for j, c := range f.e.cols {
				b := f.gb[j]
				for i, v := range c {
					if !math.IsNaN(v) {
						f.xb[i] += b * v
					}
				}
			}
			f.e.xbFixed = f.xb
			defer func() { f.e.xbFixed = nil }()
			obj = f.objectiveAt
		}
	}
	for i := range u {
		h := gradStep * math.Max(1, math.Abs(u[i]))
		f.xp[i] = u[i] + h
		fp := obj(f.xp)
		f.xp[i] = u[i] - h
		fm := obj(f.xp)
		f.xp[i] = u[i]
		g[i] = (fp - fm) / (2 * h)
	}
}

// objectiveAt is the objective at u with the regression coefficients
// fixed at f.gb (not profiled).
func (f *fitter) objectiveAt(u []float64) float64 {
	f.evals++
	f.decode(u)
	out, err := f.e.evalB(f.ar, f.ma, f.sar, f.sma, f.gb, false, nil)
	if err != nil {
		return 1e10
	}
	return 0.5*math.Log(out.sigma2) + 0.5*out.sumlog/float64(out.nobs)
}

type optResult struct {
	u          []float64
	f          float64
	converged  bool
	why        string
	iterations int
}

func (f *fitter) minimize(u0 []float64, maxIter int) (optResult, error) {
	if f.nu == 0 {
		return optResult{u: nil, f: f.objective(nil), converged: true}, nil
	}
	p := optimize.Problem{
		Func: f.objective,
		Grad: func(g, x []float64) { f.gradient(g, x) },
	}
	// The objective is per observation: at gradient g the log-likelihood is
	// within about n·g²/2 of the optimum, below 1e-4 for g = 1e-5 and any
	// n up to a million.
	settings := &optimize.Settings{
		GradientThreshold: 1e-5,
		MajorIterations:   maxIter,
		Converger:         &optimize.FunctionConverge{Absolute: 1e-11, Relative: 1e-11, Iterations: 4},
	}
	res, err := optimize.Minimize(p, u0, settings, &optimize.BFGS{})
	if res == nil {
		return optResult{}, fmt.Errorf("%w: optimiser: %v", ErrNumerical, err)
	}
	out := optResult{u: res.X, f: res.F, iterations: res.Stats.MajorIterations}
	switch res.Status {
	case optimize.GradientThreshold, optimize.FunctionConvergence, optimize.Success, optimize.MethodConverge, optimize.StepConvergence:
		out.converged = true
	default:
		out.why = res.Status.String()
		if err != nil {
			out.why += ": " + err.Error()
		}
		// A line search that cannot make progress at a point where the
		// gradient is already tiny is a converged fit.
		g := make([]float64, len(res.X))
		f.gradient(g, res.X)
		gmax := 0.0
		for _, v := range g {
			gmax = math.Max(gmax, math.Abs(v))
		}
		if res.Status != optimize.IterationLimit && gmax < 1e-4 {
			out.converged = true
			out.why = ""
		} else if res.Status == optimize.IterationLimit {
			out.why = fmt.Sprintf("iteration limit %d reached (gradient %.2g)", maxIter, gmax)
		}
	}
	if math.IsNaN(out.f) || out.f >= 1e10 {
		return out, fmt.Errorf("%w: no finite likelihood found", ErrNumerical)
	}
	return out, nil
}

// startValues returns the optimiser start and a note when a fallback was
// used.
func (f *fitter) startValues(warm []float64) ([]float64, string) {
	s := f.spec
	u := make([]float64, f.nu)
	var ar, ma, sar, sma []float64
	note := ""
	if warm != nil && len(warm) == s.NumParams() {
		ar, ma = warm[:s.P], warm[s.P:s.P+s.Q]
		sar, sma = warm[s.P+s.Q:s.P+s.Q+s.SP], warm[s.P+s.Q+s.SP:f.nu]
	} else {
		if warm != nil {
			note = fmt.Sprintf("warm start ignored: %d values, want %d", len(warm), s.NumParams())
		}
		c, ok := f.css()
		if !ok {
			return u, joinNote(note, "conditional-sum-of-squares start failed; started from zero coefficients")
		}
		ar, ma, sar, sma = c[:s.P], c[s.P:s.P+s.Q], c[s.P+s.Q:s.P+s.Q+s.SP], c[s.P+s.Q+s.SP:]
	}
	ma = maInvert(ma)
	sma = maInvert(sma)
	if err := f.encode(u, ar, ma, sar, sma); err != nil {
		zero := make([]float64, f.nu)
		copy(zero[s.P:s.P+s.Q], ma)
		copy(zero[s.P+s.Q+s.SP:], sma)
		return zero, joinNote(note, "start values had a non-stationary AR part; started the AR coefficients at zero")
	}
	return u, note
}

func joinNote(a, b string) string {
	if a == "" {
		return b
	}
	return a + "; " + b
}

// cssMaxObs caps the differenced values the CSS start uses.
const cssMaxObs = 3000

// css fits the conditional-sum-of-squares objective ½ log(Σ e_t²/n) of the
// differenced, demeaned series, with residuals
//
//	e_t = w_t − Σ_j φ'_j w_{t−j} − Σ_j θ'_j e_{t−j},  t > p',  e_t = 0 before,
//
// by BFGS from zero. It returns the raw coefficients.
func (f *fitter) css() ([]float64, bool) {
	e := f.e
	s := f.spec
	w := append([]float64(nil), e.diffs...)
	// The CSS fit is only a start: on long series its last cssMaxObs
	// differenced values suffice.
	if len(w) > cssMaxObs {
		w = w[len(w)-cssMaxObs:]
	}
	if e.cssW != nil {
		w = append(w[:0], e.cssW...)
		if len(w) > cssMaxObs {
			w = w[len(w)-cssMaxObs:]
		}
	} else {
		c := 0.0
		if e.spec.Mean {
			c = e.beta0
		} else if e.spec.Drift {
			c = e.beta0 * e.ndiff
		}
		for i := range w {
			w[i] -= c
		}
	}
	res := make([]float64, len(w))
	var phiE, thE []float64
	obj := func(x []float64) float64 {
		ar, ma := x[:s.P], x[s.P:s.P+s.Q]
		sar, sma := x[s.P+s.Q:s.P+s.Q+s.SP], x[s.P+s.Q+s.SP:]
		phiE = expandAR(phiE, ar, sar, s.Period)
		thE = expandMA(thE, ma, sma, s.Period)
		ncond := len(phiE)
		ssq, n := 0.0, 0
		for t := range w {
			if t < ncond {
				res[t] = 0
				continue
			}
			v := w[t]
			for j, p := range phiE {
				if p != 0 {
					v -= p * w[t-j-1]
				}
			}
			for j, q := range thE {
				if j >= t-ncond {
					break
				}
				if q != 0 {
					v -= q * res[t-j-1]
				}
			}
			if math.IsNaN(v) {
				res[t] = 0
				continue
			}
			res[t] = v
			ssq += v * v
			n++
		}
		if n == 0 || !(ssq > 0) || math.IsInf(ssq, 0) {
			return 1e10
		}
		return 0.5 * math.Log(ssq/float64(n))
	}
	xp := make([]float64, f.nu)
	p := optimize.Problem{
		Func: obj,
		// forward differences: the CSS fit is only a start
		Grad: func(g, x []float64) {
			f0 := obj(x)
			copy(xp, x)
			for i := range x {
				h := 1e-6 * math.Max(1, math.Abs(x[i]))
				xp[i] = x[i] + h
				g[i] = (obj(xp) - f0) / h
				xp[i] = x[i]
			}
		},
	}
	if f.nu == 0 {
		return nil, true
	}
	// Only a start for the exact fit: a loose tolerance suffices.
	r, err := optimize.Minimize(p, make([]float64, f.nu), &optimize.Settings{
		GradientThreshold: 1e-3, MajorIterations: 25,
		Converger: &optimize.FunctionConverge{Absolute: 1e-6, Relative: 1e-6, Iterations: 2},
	}, &optimize.BFGS{})
	if r == nil || (err != nil && r.Status == optimize.Failure && r.F >= 1e10) {
		return nil, false
	}
	for _, v := range r.X {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return nil, false
		}
	}
	return r.X, r.F < 1e10
}

// finish builds the Result from the optimum.
func (f *fitter) finish(best optResult, notes []string) (*Result, error) {
	e := f.e
	s := f.spec
	f.decode(best.u)
	ar := append([]float64(nil), f.ar...)
	ma := maInvert(append([]float64(nil), f.ma...))
	sar := append([]float64(nil), f.sar...)
	sma := maInvert(append([]float64(nil), f.sma...))
	prof, err := e.evalB(ar, ma, sar, sma, nil, true, nil)
	if err != nil {
		return nil, fmt.Errorf("arima: fit %s: %w", s, err)
	}
	var betas, regCov []float64
	if e.cols != nil {
		betas = append(betas, prof.betas...)
		regCov = e.regCov(prof.sigma2)
	} else {
		betas = []float64{prof.beta}
	}
	resid := make([]float64, e.n)
	out, err := e.evalB(ar, ma, sar, sma, betas, false, resid)
	if err != nil {
		return nil, fmt.Errorf("arima: fit %s: %w", s, err)
	}
	params := make([]float64, 0, s.NumParams())
	params = append(append(append(append(params, ar...), ma...), sar...), sma...)
	if e.cols != nil {
		params = append(params, betas...)
	} else if s.Mean || s.Drift {
		params = append(params, out.beta)
	}
	m, err := NewModel(s, params, out.sigma2)
	if err != nil {
		return nil, fmt.Errorf("arima: fit %s: %w", s, err)
	}
	k := float64(s.NumParams())
	n := float64(out.nobs)
	res := &Result{
		Model:      m,
		LogLik:     out.loglik,
		NObs:       out.nobs,
		Converged:  best.converged,
		Iterations: best.iterations,
		Note:       strings.Join(notes, "; "),
		Residuals:  resid,
		RegCov:     regCov,
	}
	res.AIC = -2*out.loglik + 2*(k+1)
	if n-k-2 > 0 {
		res.AICc = res.AIC + 2*(k+1)*(k+2)/(n-k-2)
	} else {
		res.AICc = math.Inf(1)
	}
	res.BIC = -2*out.loglik + (k+1)*math.Log(n)
	if e.cols != nil {
		res.StdErr = f.stdErrX(params, regCov)
	} else {
		res.StdErr = f.stdErr(params)
	}
	return res, nil
}

// stdErr returns √diag(H⁻¹), H the central-difference Hessian of −log L
// (σ² concentrated) in the natural parameters, or NaNs when H is not
// positive definite.
func (f *fitter) stdErr(params []float64) []float64 {
	e := f.e
	s := f.spec
	k := len(params)
	se := make([]float64, k)
	for i := range se {
		se[i] = math.NaN()
	}
	if k == 0 {
		return se
	}
	x := append([]float64(nil), params...)
	nll := func() float64 {
		ar, ma, sar, sma, rest := s.split(x)
		out, err := e.evalB(ar, ma, sar, sma, rest, false, nil)
		if err != nil {
			return math.NaN()
		}
		return -out.loglik
	}
	h := make([]float64, k)
	for i := range h {
		h[i] = 1e-4 * math.Max(1, math.Abs(params[i]))
	}
	if s.Mean || s.Drift {
		// scale the regression step to the precision of the coefficient
		sd := math.Sqrt(f.regVar())
		if sd > 0 && !math.IsInf(sd, 0) {
			h[k-1] = 1e-3 * sd
		}
	}
	hessianStdErr(se, x, params, h, nll)
	return se
}

// stdErrX is stdErr with external regressors: the ARMA block from the
// forward-difference Hessian of the profile −log L (β profiled out), the
// regression block from regCov.
func (f *fitter) stdErrX(params, regCov []float64) []float64 {
	e := f.e
	s := f.spec
	k := len(params)
	se := make([]float64, k)
	for i := range se {
		se[i] = math.NaN()
	}
	nr := len(e.cols)
	for i := 0; i < nr; i++ {
		if d := regCov[i*nr+i]; d > 0 {
			se[f.nu+i] = math.Sqrt(d)
		}
	}
	nu := f.nu
	if nu == 0 {
		return se
	}
	x := append([]float64(nil), params[:nu]...)
	nll := func() float64 {
		ar, ma, sar, sma, _ := s.split(x)
		out, err := e.evalB(ar, ma, sar, sma, nil, true, nil)
		if err != nil {
			return math.NaN()
		}
		return -out.loglik
	}
	h := make([]float64, nu)
	for i := range h {
		h[i] = 1e-4 * math.Max(1, math.Abs(params[i]))
	}
	hessianStdErr(se, x, params[:nu], h, nll)
	return se
}

// split cuts a parameter vector in Params order into φ, θ, Φ, Θ and the
// rest (the regression coefficients), as views of x.
func (s Spec) split(x []float64) (ar, ma, sar, sma, rest []float64) {
	i := 0
	ar, i = x[i:i+s.P], i+s.P
	ma, i = x[i:i+s.Q], i+s.Q
	sar, i = x[i:i+s.SP], i+s.SP
	sma, i = x[i:i+s.SQ], i+s.SQ
	return ar, ma, sar, sma, x[i:]
}

// hessianStdErr writes into se[:len(h)] the standard errors from the inverse
// of the Hessian of nll (the negative log-likelihood as a function of x) at
// params, by forward differences with steps h:
//
//	H_ij ≈ [f(x+h_i+h_j) − f(x+h_i) − f(x+h_j) + f(x)] / (h_i h_j),
//
// k(k+3)/2 + 1 evaluations for k = len(h); the O(h) error is far below the
// sampling error the standard errors describe. x is nll's argument, which
// this moves and restores. A Hessian that is not finite or not positive
// definite leaves se as it was.
func hessianStdErr(se, x, params, h []float64, nll func() float64) {
	k := len(h)
	f0 := nll()
	fi := make([]float64, k)
	for i := 0; i < k; i++ {
		x[i] = params[i] + h[i]
		fi[i] = nll()
		x[i] = params[i]
	}
	H := mat.NewSymDense(k, nil)
	for i := 0; i < k; i++ {
		for j := i; j < k; j++ {
			x[i] += h[i]
			x[j] += h[j]
			fij := nll()
			x[i], x[j] = params[i], params[j]
			v := (fij - fi[i] - fi[j] + f0) / (h[i] * h[j])
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return
			}
			H.SetSym(i, j, v)
		}
	}
	var ch mat.Cholesky
	if !ch.Factorize(H) {
		return
	}
	var inv mat.SymDense
	if err := ch.InverseTo(&inv); err != nil {
		return
	}
	for i := 0; i < k; i++ {
		if d := inv.At(i, i); d > 0 {
			se[i] = math.Sqrt(d)
		}
	}
}

// regVar is a rough variance of the regression coefficient, σ²_w / n, used
// only to scale the Hessian step.
func (f *fitter) regVar() float64 {
	e := f.e
	sum, sq, n := 0.0, 0.0, 0
	for _, v := range e.diffs {
		if math.IsNaN(v) {
			continue
		}
		sum += v
		sq += v * v
		n++
	}
	if n < 2 {
		return 0
	}
	mean := sum / float64(n)
	v := (sq/float64(n) - mean*mean) / float64(n)
	if e.spec.Drift {
		v /= e.ndiff * e.ndiff
	}
	return v
}

// maInvert reflects the roots of 1 + Σ θ_j z^j that lie inside the unit
// circle to 1/z̄, which leaves the autocovariances (and so the exact
// likelihood) unchanged up to σ² and makes the polynomial invertible
// (Brockwell & Davis 1991, §4.4). It returns a new slice.
func maInvert(ma []float64) []float64 {
	out := append([]float64(nil), ma...)
	q := len(out)
	for q > 0 && out[q-1] == 0 {
		q--
	}
	if q == 0 {
		return out
	}
	roots, err := polyRoots(append([]float64{1}, out[:q]...))
	if err != nil {
		return out
	}
	inside := false
	for _, r := range roots {
		if cmplxAbs(r) < 1 {
			inside = true
		}
	}
	if !inside {
		return out
	}
	if q == 1 {
		out[0] = 1 / out[0]
		return out
	}
	// Rebuild Π (1 − z/r_i) with reflected roots; its constant term is 1.
	poly := []complex128{1}
	for _, r := range roots {
		if cmplxAbs(r) < 1 {
			r = 1 / r
		}
		next := make([]complex128, len(poly)+1)
		for i, c := range poly {
			next[i] += c
			next[i+1] -= c / r
		}
		poly = next
	}
	for i := 1; i <= q; i++ {
		out[i-1] = real(poly[i])
	}
	return out
}

// polyRoots returns the roots of c_0 + c_1 z + … + c_n z^n (c_n ≠ 0) as the
// eigenvalues of its companion matrix.
func polyRoots(c []float64) ([]complex128, error) {
	n := len(c) - 1
	if n < 1 || c[n] == 0 {
		return nil, errors.New("arima: degenerate polynomial")
	}
	comp := mat.NewDense(n, n, nil)
	for j := 0; j < n; j++ {
		comp.Set(0, j, -c[n-1-j]/c[n])
	}
	for i := 1; i < n; i++ {
		comp.Set(i, i-1, 1)
	}
	var eig mat.Eigen
	if !eig.Factorize(comp, mat.EigenNone) {
		return nil, errors.New("arima: eigen decomposition failed")
	}
	return eig.Values(nil), nil
}

func cmplxAbs(z complex128) float64 { return math.Hypot(real(z), imag(z)) }
