package arima

import (
	"fmt"
	"math"
)

// Filter modes.
const (
	modeWarm    = iota // collecting the first d+sD levels
	modeChandra        // levels known, stationary start: rank-one covariance updates
	modeFull           // levels known, full Riccati updates (after a missing value)
	modeSteady         // levels known, gain converged and frozen
	modeAug            // levels in the state (a missing value in a differenced series)
)

// augAlloc is the largest augmented state dimension whose workspace
// NewFilter allocates up front; larger models allocate it at the first
// missing value.
const augAlloc = 256

// anchorTol is the variance (relative to σ²) below which a level in the
// state counts as known again, returning the filter to known anchors.
const anchorTol = 1e-8

// Filter is the online Kalman filter of a fitted model. It holds the
// predicted state of the ARMA block, a_{t+1|t} with covariance P_{t+1|t},
// and the last d + s·D levels (the anchors) y_t, y_{t−1}, …, most recent
// first. Each Step absorbs one observation on the model's scale and each
// Forecast integrates the ARMA forecast back through the anchors.
//
// After a missing value in a differenced model the levels are uncertain:
// the filter then carries them in the state, (a_t, y_{t−1}, …, y_{t−nd}),
// with their covariance, and returns to known anchors once every level in
// the window has been observed again (its variance below 1e-8·σ²). If the
// very first d + s·D observations include a missing one, the levels start
// with R's approximate diffuse prior (κ = 1e6·σ²), like LogLik.
//
// Step and the Forecast methods do not allocate. A Filter is not safe for
// concurrent use.
type Filter struct {
	spec   Spec
	s      *ssm
	r, nd  int
	c      float64 // mean of the differenced series (μ or δ·Σ j δ_j)
	sigma2 float64
	maxH   int
	mode   int
	ready  bool

	warm    []float64 // first nd observations, in time order
	nWarm   int
	warmNaN bool

	a, W, K []float64 // ARMA state, Chandrasekhar increment, frozen gain
	M       float64
	P, Pold []float64 // r×r
	L       []float64 // anchors, most recent first

	xa, Pa []float64 // augmented state (m) and covariance (m×m)

	// workspace
	tmp, mv, t1, u, g []float64
	psi2              []float64 // cumulative Σ_{i<h} ψ*_i², h = 0..maxH
	psiStar           []float64 // ψ*_0..ψ*_{maxH−1}
	G, PG             []float64 // maxH×m rows for ForecastJoint

	// external regressors (Spec.NX > 0)
	gen   Regressors
	path  RegressorPath // gen, when it implements it
	regm  []float64     // maxH: the regression part of a forecast
	beta  []float64
	xbuf  []float64
	next  float64 // data time of the next observation
	xstep float64 // time between observations

	gd guardState // spike and level-shift check (SetGuard), off by default
}

// NewFilter returns a filter for m, ready to Step through a series from its
// first observation, that can forecast up to maxHorizon steps. The AR parts
// of m must be stationary, or on the unit circle to within rounding (then
// the state starts from the PSD doubling sum described at LogLik);
// otherwise NewFilter returns ErrNonStationary. It allocates all workspace (16·(r+d+sD)² bytes
// and a few vectors) unless r + d + sD > 256, in which case the
// levels-in-state workspace is allocated at the first missing value.
func NewFilter(m *Model, maxHorizon int) (*Filter, error) {
	if m != nil && m.Spec.NX > 0 {
		return nil, fmt.Errorf("arima: new filter %s: %w: the model has %d regressors; use NewFilterX", m.Spec, ErrRegressors, m.Spec.NX)
	}
	return newFilter(m, maxHorizon)
}

// NewFilterX returns a filter for a model with external regressors
// (regression with ARIMA errors, see FitX). The filter keeps β and
// advances the regressors itself: gen gives x_t at the data time t of
// each step, the first Step being at time start and each later one step
// after the previous (StepAt sets the time explicitly, e.g. after a gap).
// Each step filters u_t = y_t − x_tᵀβ; forecasts add x_{t+h}ᵀβ at the
// future times. With Fourier terms computed from absolute time (Fourier)
// the phase survives restarts, gaps and moves to another machine. The
// forecast variances are those of the ARIMA part with β known, as in R's
// predict.Arima; ForecastX adds β's estimation uncertainty.
func NewFilterX(m *Model, maxHorizon int, gen Regressors, start, step float64) (*Filter, error) {
	if m == nil {
		return nil, fmt.Errorf("arima: new filter: %w: nil model", ErrParams)
	}
	if gen == nil || gen.NumRegressors() != m.Spec.NX {
		n := 0
		if gen != nil {
			n = gen.NumRegressors()
		}
		return nil, fmt.Errorf("arima: new filter %s: %w: %d regressors given, the model has %d", m.Spec, ErrRegressors, n, m.Spec.NX)
	}
	if !(step > 0) || math.IsInf(step, 0) || math.IsNaN(start) || math.IsInf(start, 0) {
		return nil, fmt.Errorf("arima: new filter %s: %w: start %v and step %v: want finite times and a positive step", m.Spec, ErrRegressors, start, step)
	}
	f, err := newFilter(m, maxHorizon)
	if err != nil {
		return nil, err
	}
	f.gen, f.next, f.xstep = gen, start, step
	f.path, _ = gen.(RegressorPath)
	f.regm = make([]float64, maxHorizon)
	f.beta = append([]float64(nil), m.Beta...)
	f.xbuf = make([]float64, m.Spec.NX)
	return f, nil
}

func newFilter(m *Model, maxHorizon int) (*Filter, error) {
	if m == nil {
		return nil, fmt.Errorf("arima: new filter: %w: nil model", ErrParams)
	}
	if err := m.Spec.Validate(); err != nil {
		return nil, fmt.Errorf("arima: new filter: %w", err)
	}
	if err := checkShape(m); err != nil {
		return nil, err
	}
	if !(m.Sigma2 > 0) || math.IsInf(m.Sigma2, 0) {
		return nil, fmt.Errorf("arima: new filter %s: %w: sigma2 = %v", m.Spec, ErrParams, m.Sigma2)
	}
	if maxHorizon < 0 {
		return nil, fmt.Errorf("arima: new filter %s: %w: negative horizon %d", m.Spec, ErrParams, maxHorizon)
	}
	spec := m.Spec
	s := newSSM(spec)
	s.setCoefs(expandAR(nil, m.AR, m.SAR, spec.Period), expandMA(nil, m.MA, m.SMA, spec.Period))
	if err := s.prepare(); err != nil {
		return nil, fmt.Errorf("arima: new filter %s: %w", spec, err)
	}
	r, nd := s.r, s.nd
	f := &Filter{spec: spec, s: s, r: r, nd: nd, sigma2: m.Sigma2, maxH: maxHorizon}
	if spec.Mean {
		f.c = m.Mean
	}
	if spec.Drift {
		for j, d := range s.delta {
			f.c += float64(j+1) * d * m.Drift
		}
	}
	mm := r + nd
	f.warm = make([]float64, nd)
	f.a = make([]float64, r)
	f.W = make([]float64, r)
	f.K = make([]float64, r)
	f.P = make([]float64, r*r)
	f.Pold = make([]float64, r*r)
	f.L = make([]float64, nd)
	f.mv = make([]float64, mm)
	f.t1 = make([]float64, mm)
	f.u = make([]float64, mm)
	f.g = make([]float64, mm)
	f.tmp = make([]float64, r*r)
	if nd > 0 && mm <= augAlloc {
		f.allocAug()
	}
	f.psiStar = PsiWeights(m, maxHorizon)
	f.psi2 = make([]float64, maxHorizon+1)
	for h := 1; h <= maxHorizon; h++ {
		f.psi2[h] = f.psi2[h-1] + f.psiStar[h-1]*f.psiStar[h-1]
	}
	f.G = make([]float64, maxHorizon*mm)
	f.PG = make([]float64, maxHorizon*mm)
	if nd == 0 {
		f.startKnown()
	} else {
		f.mode = modeWarm
	}
	return f, nil
}

func (f *Filter) allocAug() {
	mm := f.r + f.nd
	if len(f.Pa) == mm*mm {
		return
	}
	f.xa = make([]float64, mm)
	f.Pa = make([]float64, mm*mm)
	f.tmp = make([]float64, mm*mm)
}

// startKnown starts the ARMA block at its stationary distribution,
// a_1 = 0, P_1 = Q0, with the Chandrasekhar increment W_1 = T Q0 Zᵀ,
// M_1 = −1/F_1.
func (f *Filter) startKnown() {
	r := f.r
	for i := range f.P {
		f.P[i] = 0
	}
	f.s.initCov(f.P, r)
	f.ready = true
	if f.s.fallback {
		// no stationary fixed point: full Riccati updates
		for i := range f.a {
			f.a[i] = 0
		}
		f.mode = modeFull
		return
	}
	for i := 0; i < r; i++ {
		f.a[i] = 0
		next := 0.0
		if i+1 < r {
			next = f.s.q0[i+1]
		}
		f.W[i] = f.s.phi[i]*f.s.q0[0] + next
	}
	f.M = -1 / f.s.q0[0]
	f.mode = modeChandra
}

// Ready reports whether the d + s·D anchors are known (or, after a
// missing value, estimated), so that Forecast is defined.
func (f *Filter) Ready() bool { return f.ready }

// Steps absorbs the observations in y in order.
func (f *Filter) Steps(y []float64) {
	for _, v := range y {
		f.Step(v)
	}
}

// Step absorbs one observation on the model's scale; NaN is a missing
// value (a prediction-only step). ±Inf is treated as missing.
//
// With known anchors the differenced value w_t = y_t − c − Σ_j δ_j y_{t−j}
// goes through the ARMA filter in prediction form (Durbin & Koopman 2012,
// eq. 4.24):
//
//	v_t = w_t − Z a_t,  F_t = Z P_t Zᵀ,  K_t = T P_t Zᵀ / F_t,
//	a_{t+1} = T a_t + K_t v_t,  P_{t+1} = T P_t (T − K_t Z)ᵀ + R Rᵀ,
//
// the covariance update done by the Chandrasekhar rank-one increment while
// the start is stationary, by the full Riccati step after a missing value,
// and skipped once it has converged (steady state, §4.3.4).
//
// With regressors (NewFilterX) the step is at the filter's clock, which
// then advances by one step.
func (f *Filter) Step(y float64) {
	if math.IsInf(y, 0) {
		y = math.NaN()
	}
	if f.gen != nil {
		f.gen.Regressors(f.xbuf, f.next)
		y -= dot(f.beta, f.xbuf)
		f.next += f.xstep
	}
	if f.gd.on {
		y = f.guardCheck(y)
	}
	f.absorb(y)
}

// absorb is the filter step proper on y (regressors removed, after the
// check): Step below its regressor and guard parts, also the step the
// check uses to replay a run (guard.go, retract).
func (f *Filter) absorb(y float64) {
	switch f.mode {
	case modeWarm:
		f.warm[f.nWarm] = y
		f.nWarm++
		if math.IsNaN(y) {
			f.warmNaN = true
		}
		if f.nWarm < f.nd {
			return
		}
		if !f.warmNaN {
			for j := 0; j < f.nd; j++ {
				f.L[j] = f.warm[f.nd-1-j]
			}
			f.startKnown()
			return
		}
		f.startDiffuse()
		for _, v := range f.warm {
			f.augStep(v)
		}
		f.checkAnchors()
		return
	case modeAug:
		f.augStep(y)
		f.checkAnchors()
		return
	}
	if math.IsNaN(y) {
		if f.nd > 0 {
			f.enterAug()
			f.augStep(y)
			return
		}
		f.predictOnly()
		return
	}
	w := y - f.c
	for _, j := range f.s.deltaNZ {
		w -= f.s.delta[j] * f.L[j]
	}
	switch f.mode {
	case modeChandra:
		f.chandraStep(w)
	case modeFull:
		f.fullStep(w)
	default:
		f.steadyStep(w)
	}
	f.shiftAnchors(y)
}

// StepAt is Step at data time t: it sets the regressor clock to t first
// (a filter without regressors ignores t). Buckets skipped by a gap must
// still be stepped, as missing values, for the ARIMA part.
func (f *Filter) StepAt(t, y float64) {
	if f.gen != nil {
		f.next = t
	}
	f.Step(y)
}

// NextTime returns the data time of the next Step of a filter with
// regressors (NaN without).
func (f *Filter) NextTime() float64 {
	if f.gen == nil {
		return math.NaN()
	}
	return f.next
}

// RegressionMean writes x_{t+k}ᵀβ for the next len(dst) steps (zeros
// without regressors): the part of the forecast mean that PathSystem,
// which describes y − xᵀβ, leaves out. It does not allocate.
func (f *Filter) RegressionMean(dst []float64) {
	if f.path != nil {
		f.path.LinearPath(dst, f.beta, f.next, f.xstep)
		return
	}
	for k := range dst {
		dst[k] = 0
		if f.gen != nil {
			f.gen.Regressors(f.xbuf, f.next+float64(k)*f.xstep)
			dst[k] = dot(f.beta, f.xbuf)
		}
	}
}

func (f *Filter) shiftAnchors(y float64) {
	for j := f.nd - 1; j >= 1; j-- {
		f.L[j] = f.L[j-1]
	}
	if f.nd > 0 {
		f.L[0] = y
	}
}

// gainVec sets f.K = T P Zᵀ (unnormalised gain) from the current P.
func (f *Filter) gainVec() {
	r := f.r
	for i := 0; i < r; i++ {
		next := 0.0
		if i+1 < r {
			next = f.P[(i+1)*r]
		}
		f.K[i] = f.s.phi[i]*f.P[0] + next
	}
}

// stateStep sets a ← T a + K v/F.
func (f *Filter) stateStep(v, F float64) {
	r := f.r
	a := f.a
	k := v / F
	a0 := a[0]
	for i := 0; i < r-1; i++ {
		a[i] = a[i+1] + f.s.phi[i]*a0 + f.K[i]*k
	}
	a[r-1] = f.s.phi[r-1]*a0 + f.K[r-1]*k
}

func (f *Filter) chandraStep(w float64) {
	r := f.r
	F := f.P[0]
	f.gainVec()
	f.stateStep(w-f.a[0], F)
	// P_{t+1} = P_t + M W Wᵀ
	W, M := f.W, f.M
	for i := 0; i < r; i++ {
		c := M * W[i]
		row := f.P[i*r : (i+1)*r]
		for k := 0; k < r; k++ {
			row[k] += c * W[k]
		}
	}
	// W ← (T − K Z/F) W, M ← M F/F_{t+1}
	zw := W[0]
	kz := zw / F
	maxW := 0.0
	for i := 0; i < r; i++ {
		next := 0.0
		if i+1 < r {
			next = W[i+1]
		}
		nw := f.s.phi[i]*zw + next - f.K[i]*kz
		W[i] = nw
		maxW = math.Max(maxW, nw*nw)
	}
	Fn := f.P[0]
	f.M = M * F / Fn
	if math.Abs(f.M)*maxW < steadyTol*Fn {
		f.freeze()
	}
}

func (f *Filter) fullStep(w float64) {
	r := f.r
	F := f.P[0]
	f.gainVec()
	f.stateStep(w-f.a[0], F)
	copy(f.Pold, f.P)
	// P ← P − P Zᵀ Z P / F, then P ← T P Tᵀ + R Rᵀ
	copy(f.mv[:r], f.P[:r])
	rank1Down(f.P, f.mv[:r], r, F)
	f.s.predictCov(f.P, f.tmp[:r*r], r)
	f.checkSteady()
}

func (f *Filter) checkSteady() {
	F := f.P[0]
	d := 0.0
	for i, v := range f.P {
		d = math.Max(d, math.Abs(v-f.Pold[i]))
	}
	if d < steadyTol*F {
		f.freeze()
	} else {
		f.mode = modeFull
	}
}

func (f *Filter) freeze() {
	f.gainVec()
	f.mode = modeSteady
}

func (f *Filter) steadyStep(w float64) {
	f.stateStep(w-f.a[0], f.P[0])
}

// predictOnly is the missing-value step with known anchors (nd = 0):
// a ← T a, P ← T P Tᵀ + R Rᵀ (Durbin & Koopman 2012, §4.10).
func (f *Filter) predictOnly() {
	r := f.r
	f.s.tVec(f.t1[:r], f.a, 0)
	copy(f.a, f.t1[:r])
	f.s.predictCov(f.P, f.tmp[:r*r], r)
	f.mode = modeFull
}

// startDiffuse puts the levels in the state with R's approximate diffuse
// prior: x = 0, P = diag(Q0, κ I).
func (f *Filter) startDiffuse() {
	f.allocAug()
	r, mm := f.r, f.r+f.nd
	for i := range f.Pa {
		f.Pa[i] = 0
	}
	f.s.initCov(f.Pa, mm)
	for i := range f.xa {
		f.xa[i] = 0
	}
	for j := 0; j < f.nd; j++ {
		f.Pa[(r+j)*mm+r+j] = kappa
	}
	f.mode = modeAug
}

// enterAug moves from known anchors to levels in the state:
// x = (a, L), P = [P 0; 0 0].
func (f *Filter) enterAug() {
	f.allocAug()
	r, mm := f.r, f.r+f.nd
	for i := range f.Pa {
		f.Pa[i] = 0
	}
	for i := 0; i < r; i++ {
		copy(f.Pa[i*mm:i*mm+r], f.P[i*r:(i+1)*r])
	}
	copy(f.xa, f.a)
	copy(f.xa[r:], f.L)
	f.mode = modeAug
}

// augStep is one filter step with the levels in the state: the update
// x ← x + M v/F, P ← P − M Mᵀ/F with M = P Zᵀ, F = Z P Zᵀ,
// Z = (1, 0, …, 0, δ_1, …, δ_nd), v = y − c − Z x (skipped for a missing y),
// then the prediction x ← T x (+c into the new level), P ← T P Tᵀ + R Rᵀ
// (Durbin & Koopman 2012, eqs. 4.24–4.25, §4.10).
func (f *Filter) augStep(y float64) {
	mm := f.r + f.nd
	if !math.IsNaN(y) {
		F := f.s.gain(f.Pa, f.mv, mm, true)
		if F > 0 && !math.IsInf(F, 0) {
			v := y - f.c - f.s.zVec(f.xa)
			k := v / F
			for i := 0; i < mm; i++ {
				f.xa[i] += f.mv[i] * k
			}
			rank1Down(f.Pa, f.mv, mm, F)
		}
	}
	f.s.tVec(f.t1, f.xa, f.c)
	copy(f.xa, f.t1)
	f.s.predictCov(f.Pa, f.tmp, mm)
}

// checkAnchors returns to known anchors once the levels' variances and
// covariances are negligible, and sets ready once no level is diffuse.
func (f *Filter) checkAnchors() {
	r, mm := f.r, f.r+f.nd
	maxL, maxDiag := 0.0, 0.0
	for i := 0; i < mm; i++ {
		for k := r; k < mm; k++ {
			maxL = math.Max(maxL, math.Abs(f.Pa[i*mm+k]))
		}
		if i >= r {
			maxDiag = math.Max(maxDiag, f.Pa[i*mm+i])
		}
	}
	if maxDiag < fThreshold {
		f.ready = true
	}
	if maxL > anchorTol*math.Max(1, f.Pa[0]) {
		return
	}
	for i := 0; i < r; i++ {
		copy(f.P[i*r:(i+1)*r], f.Pa[i*mm:i*mm+r])
	}
	copy(f.a, f.xa[:r])
	copy(f.L, f.xa[r:])
	f.mode = modeFull
	f.ready = true
}

// Anchors returns the last d + s·D levels, most recent first: observed
// values with known anchors, their filtered estimates while a missing value
// keeps them uncertain. The slice is a read-only view valid until the next
// Step or SetState.
func (f *Filter) Anchors() []float64 {
	if f.mode == modeAug {
		return f.xa[f.r:]
	}
	return f.L
}

// forecastStart fills mean with the point forecasts and returns the
// covariance the variances are built from (the r×r block with known
// anchors, the (r+nd)² one with levels in the state) and its dimension.
// Before Ready it fills mean and other with NaN and returns ok = false.
func (f *Filter) forecastStart(mean, other []float64) (P []float64, m int, ok bool) {
	if !f.ready {
		fillNaN(mean)
		fillNaN(other)
		return nil, 0, false
	}
	f.forecastMean(mean)
	if f.mode == modeAug {
		return f.Pa, f.r + f.nd, true
	}
	return f.P, f.r, true
}

// Forecast writes the h-step forecasts y_{t+1..t+h} (h = len(mean) ≤ the
// filter's maxHorizon) and their error variances, σ² included, on the
// model's scale:
//
//	ŷ_{t+k} = c + Z x̂_{t+k},  x̂_{t+k+1} = T x̂_{t+k}  (levels propagated through the anchors),
//	Var(y_{t+k} − ŷ_{t+k}) = σ² [G_k P_{t+1} G_kᵀ + Σ_{i=0}^{k−2} ψ*_i²],  G_k = Z T^{k−1},
//
// with ψ* the weights of the integrated process (PsiWeights) and P_{t+1}
// the predicted covariance (Durbin & Koopman 2012, §4.11, forecasting as
// missing observations). Before Ready both are NaN. It panics if len(mean)
// != len(variance) or exceeds maxHorizon (a programmer error).
func (f *Filter) Forecast(mean, variance []float64) {
	h := len(mean)
	if len(variance) != h || h > f.maxH {
		panic(fmt.Sprintf("arima: Forecast: len(mean) = %d, len(variance) = %d, maxHorizon = %d", h, len(variance), f.maxH))
	}
	P, mm, ok := f.forecastStart(mean, variance)
	if !ok {
		return
	}
	g := f.g
	f.zRow(g)
	for k := 0; k < h; k++ {
		variance[k] = f.sigma2 * (quad(P, g, mm) + f.psi2[k])
		f.rowT(g)
	}
	f.shiftVariance(variance)
}

// ForecastJoint writes the forecasts (as Forecast) and the joint covariance
// of the h forecast errors, row-major h×h, σ² included:
//
//	Cov(e_i, e_j) = σ² [G_i P_{t+1} G_jᵀ + N_{ij}],  N_{ij} = N_{i−1,j−1} + ψ*_{i−2} ψ*_{j−2},  N_{1j} = 0.
//
// It panics if len(cov) != h² or h exceeds maxHorizon.
func (f *Filter) ForecastJoint(mean, cov []float64) {
	h := len(mean)
	if len(cov) != h*h || h > f.maxH {
		panic(fmt.Sprintf("arima: ForecastJoint: len(mean) = %d, len(cov) = %d, maxHorizon = %d", h, len(cov), f.maxH))
	}
	P, mm, ok := f.forecastStart(mean, cov)
	if !ok {
		return
	}
	full := f.r + f.nd
	g := f.g
	f.zRow(g)
	for k := 0; k < h; k++ {
		row := f.G[k*full : k*full+mm]
		copy(row, g[:mm])
		pg := f.PG[k*full : k*full+mm]
		for i := 0; i < mm; i++ {
			pg[i] = dot(P[i*mm:(i+1)*mm], row)
		}
		f.rowT(g)
	}
	// noise part first: N_{0j} = 0, N_{ij} = N_{i−1,j−1} + ψ*_{i−1}ψ*_{j−1} (0-based)
	for i := 0; i < h; i++ {
		for j := i; j < h; j++ {
			v := 0.0
			if i > 0 {
				v = cov[(i-1)*h+j-1] + f.psiStar[i-1]*f.psiStar[j-1]
			}
			cov[i*h+j] = v
		}
	}
	for i := h - 1; i >= 0; i-- {
		gi := f.G[i*full : i*full+mm]
		for j := h - 1; j >= i; j-- {
			v := cov[i*h+j] + dot(gi, f.PG[j*full:j*full+mm])
			cov[i*h+j] = v * f.sigma2
			cov[j*h+i] = v * f.sigma2
		}
	}
	f.shiftCov(cov, h)
}

// forecastMean propagates x̂ = (a, L) (or the augmented state) h steps.
func (f *Filter) forecastMean(mean []float64) {
	r := f.r
	u, t1 := f.u, f.t1
	if f.mode == modeAug {
		copy(u, f.xa)
	} else {
		copy(u, f.a)
		copy(u[r:], f.L)
	}
	for k := range mean {
		mean[k] = f.c + f.s.zVec(u)
		f.s.tVec(t1, u, f.c)
		copy(u, t1)
	}
	if f.gen != nil {
		rm := f.regm[:len(mean)]
		f.RegressionMean(rm)
		for k, v := range rm {
			mean[k] += v
		}
	}
}

// zRow sets g = Z = (1, 0, …, 0, δ_1, …, δ_nd).
func (f *Filter) zRow(g []float64) {
	for i := range g {
		g[i] = 0
	}
	g[0] = 1
	for _, j := range f.s.deltaNZ {
		g[f.r+j] = f.s.delta[j]
	}
}

// rowT sets g ← g T in O(r + nd): (gT)_0 = Σ_i g_i φ'_{i+1} + g_r,
// (gT)_j = g_{j−1} (1 ≤ j < r), (gT)_{r+j} = g_r δ_{j+1} + g_{r+j+1}.
func (f *Filter) rowT(g []float64) {
	r, nd := f.r, f.nd
	g0 := 0.0
	for _, i := range f.s.phiNZ {
		g0 += g[i] * f.s.phi[i]
	}
	var gr float64
	if nd > 0 {
		gr = g[r]
		g0 += gr
	}
	for j := r - 1; j >= 1; j-- {
		g[j] = g[j-1]
	}
	g[0] = g0
	for j := 0; j < nd; j++ {
		v := gr * f.s.delta[j]
		if j+1 < nd {
			v += g[r+j+1]
		}
		g[r+j] = v
	}
}

func quad(P, g []float64, m int) float64 {
	s := 0.0
	for i := 0; i < m; i++ {
		if g[i] == 0 {
			continue
		}
		s += g[i] * dot(P[i*m:(i+1)*m], g[:m])
	}
	return s
}

func dot(a, b []float64) float64 {
	s := 0.0
	for i, v := range a {
		s += v * b[i]
	}
	return s
}

func fillNaN(s []float64) {
	for i := range s {
		s[i] = math.NaN()
	}
}
