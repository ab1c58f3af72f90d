package arima

import "math"

// sums accumulates the pieces of the concentrated Gaussian log-likelihood
// over the observations that count (Durbin & Koopman 2012, §7.2.1, the
// prediction error decomposition):
//
//	log L = −½ Σ_t [log 2π + log(σ² F_t) + v_t²/(σ² F_t)],
//
// maximised over σ² at σ̂² = (1/n) Σ v_t²/F_t, giving
//
//	log L = −½ [n log σ̂² + Σ log F_t + n + n log 2π],
//
// v_t the one-step prediction error, F_t its variance on the unit-σ² scale.
// When a regression column x is filtered alongside the data (a mean or a
// drift profiled out by generalised least squares), sxy and sxx hold the
// cross products of its prediction errors with those of the data.
type sums struct {
	syy, sxy, sxx, sumlog float64
	n                     int
}

func (u *sums) add(v, vx, f float64) {
	u.syy += v * v / f
	u.sxy += vx * v / f
	u.sxx += vx * vx / f
	u.sumlog += math.Log(f)
	u.n++
}

// steadyTol is the relative size of the covariance change below which the
// filter treats the gain as converged and freezes it (the steady-state
// switch, Durbin & Koopman 2012, §4.3.4). A change of this size moves the
// log-likelihood by far less than 1e-6.
const steadyTol = 1e-13

// chandrasekhar runs the Kalman filter on a complete (no missing values)
// series w of the ARMA block, started at the stationary covariance, using
// the Chandrasekhar recursions, which update the low-rank increment
// ΔP_{t+1} = P_{t+1} − P_t = M_t W_t W_tᵀ instead of P (rank one for a
// univariate model with a stationary start):
//
//	F_t = Z P_t Zᵀ = P_t[0][0],    K̄_t = T P_t Zᵀ            (gain, unnormalised)
//	v_t = w_t − Z a_t,             a_{t+1} = T a_t + K̄_t v_t / F_t
//	F_{t+1} = F_t + M_t (Z W_t)²,  K̄_{t+1} = K̄_t + T W_t M_t (Z W_t)
//	W_{t+1} = (T − K̄_t Z / F_t) W_t,  M_{t+1} = M_t F_t / F_{t+1}
//	W_1 = K̄_1 = T Q0 Zᵀ,  M_1 = −1/F_1.
//
// Each step costs O(r); once |M_t| max_i W_t[i]² < steadyTol·F_t the gain
// is frozen. x (may be nil) is a regression column filtered with the same
// gains. resid, when not nil, receives v_t/√F_t.
//
// References:
//   - Morf, M., Sidhu, G. S. & Kailath, T. (1974). Some new algorithms for
//     recursive estimation in constant, linear, discrete-time systems. IEEE
//     Trans. Automatic Control 19(4), 315–323.
//   - Herbst, E. (2015). Using the "Chandrasekhar Recursions" for likelihood
//     evaluation of DSGE models. Computational Economics 45(4), 693–705.
//   - Durbin, J. & Koopman, S. J. (2012). Time Series Analysis by State Space
//     Methods, 2nd ed. Oxford University Press, §4.3 (eq. 4.24, the filter
//     in prediction form), §4.3.4 (steady state).
func (s *ssm) chandrasekhar(w, x []float64, ws *workspace, resid []float64) (sums, error) {
	r := s.r
	var out sums
	ws.vecs(r)
	a, ax, W, K := ws.a, ws.ax, ws.W, ws.K
	for i := 0; i < r; i++ {
		a[i], ax[i] = 0, 0
		K[i] = s.phi[i]*s.q0[0] + s.q0[i+1]
		W[i] = K[i]
	}
	F := s.q0[0]
	M := -1 / F
	steady := false
	logF := 0.0
	phi := s.phi[:r]
	rec := ws.rec.start(r, len(w), true)
	for t := 0; t < len(w); t++ {
		if rec != nil {
			rec.put(t, K, F)
		}
		if steady {
			if rec != nil {
				rec.steady = t
			}
			// constant F and K: a tight loop, sums scaled by 1/F at the end
			rest := steadyRun(w[t:], x, t, a, ax, K, phi, resid, F)
			rest.scale(F)
			out.syy += rest.syy
			out.sxy += rest.sxy
			out.sxx += rest.sxx
			out.sumlog += float64(rest.n) * logF
			out.n += rest.n
			break
		}
		wt := w[t]
		if !(F > 0) {
			return out, ErrNumerical
		}
		v := wt - a[0]
		vx := 0.0
		if x != nil {
			vx = x[t] - ax[0]
		}
		out.syy += v * v / F
		out.sxy += vx * v / F
		out.sxx += vx * vx / F
		out.sumlog += math.Log(F)
		out.n++
		if resid != nil {
			resid[t] = v / math.Sqrt(F)
		}
		// a_{t+1} = T a_t + K̄ v/F
		k := v / F
		a0 := a[0]
		for i := 0; i < r-1; i++ {
			a[i] = a[i+1] + phi[i]*a0 + K[i]*k
		}
		a[r-1] = phi[r-1]*a0 + K[r-1]*k
		if x != nil {
			k := vx / F
			a0 := ax[0]
			for i := 0; i < r-1; i++ {
				ax[i] = ax[i+1] + phi[i]*a0 + K[i]*k
			}
			ax[r-1] = phi[r-1]*a0 + K[r-1]*k
		}
		zw := W[0]
		Fn := F + M*zw*zw
		kz := zw / F
		mz := M * zw
		w0 := W[0]
		maxW := 0.0
		for i := 0; i < r; i++ {
			next := 0.0
			if i+1 < r {
				next = W[i+1]
			}
			tw := phi[i]*w0 + next
			nw := tw - K[i]*kz
			K[i] += tw * mz
			W[i] = nw
			if nw*nw > maxW {
				maxW = nw * nw
			}
		}
		M = M * F / Fn
		F = Fn
		if math.Abs(M)*maxW < steadyTol*F {
			steady = true
			logF = math.Log(F)
		}
	}
	if rec != nil {
		rec.valid = true
	}
	return out, nil
}

// scale divides the unscaled sums of steadyRun by F.
func (u *sums) scale(F float64) {
	u.syy /= F
	u.sxy /= F
	u.sxx /= F
}

// steadyRun continues the filter over w (the tail of the series starting at
// index t0 of x and resid) with the frozen gain K̄ and variance F:
// v_t = w_t − a_t[0], a_{t+1} = T a_t + K̄ v_t/F. The sums are returned
// unscaled (Σ v², not Σ v²/F).
func steadyRun(w, x []float64, t0 int, a, ax, K, phi, resid []float64, F float64) sums {
	var out sums
	r := len(a)
	inv := 1 / F
	sd := 1 / math.Sqrt(F)
	K = K[:r]
	phi = phi[:r]
	var syy, sxy, sxx float64
	if r == 1 {
		// AR(1) or white noise: scalar state
		p0, k0 := phi[0], K[0]*inv
		a0, b0 := a[0], ax[0]
		for i, wt := range w {
			v := wt - a0
			a0 = p0*a0 + k0*v
			syy += v * v
			if x != nil {
				vx := x[t0+i] - b0
				b0 = p0*b0 + k0*vx
				sxy += v * vx
				sxx += vx * vx
			}
			if resid != nil {
				resid[t0+i] = v * sd
			}
		}
		a[0], ax[0] = a0, b0
		out.syy, out.sxy, out.sxx, out.n = syy, sxy, sxx, len(w)
		return out
	}
	if (r == 2 || r == 3) && resid == nil {
		return steadySmall(w, x, t0, a, ax, K, phi, inv)
	}
	// The regression column is filtered with data-independent gains, so its
	// prediction errors converge; once one repeats exactly, all later ones
	// equal it (to rounding) and Σ v_x v = v_x Σ v.
	xdone := x == nil
	var vxInf, sumv float64
	nx := 0
	for i, wt := range w {
		v := wt - a[0]
		syy += v * v
		k := v * inv
		a0 := a[0]
		for j := 0; j < r-1; j++ {
			a[j] = a[j+1] + phi[j]*a0 + K[j]*k
		}
		a[r-1] = phi[r-1]*a0 + K[r-1]*k
		if resid != nil {
			resid[t0+i] = v * sd
		}
		if xdone {
			if x != nil {
				sumv += v
				nx++
			}
			continue
		}
		vx := x[t0+i] - ax[0]
		sxy += v * vx
		sxx += vx * vx
		kx := vx * inv
		b0 := ax[0]
		changed := false
		for j := 0; j < r-1; j++ {
			nv := ax[j+1] + phi[j]*b0 + K[j]*kx
			changed = changed || !near(nv, ax[j])
			ax[j] = nv
		}
		nv := phi[r-1]*b0 + K[r-1]*kx
		changed = changed || !near(nv, ax[r-1])
		ax[r-1] = nv
		if !changed && constCol(x, t0+i) {
			xdone, vxInf = true, vx
		}
	}
	sxy += vxInf * sumv
	sxx += vxInf * vxInf * float64(nx)
	out.syy, out.sxy, out.sxx, out.n = syy, sxy, sxx, len(w)
	return out
}

// steadySmall is steadyRun for r = 2 or 3 with the state in registers
// (a[2] = 0 and phi[2] = K[2] = 0 stand in for r = 2), used during
// optimisation (no residuals).
func steadySmall(w, x []float64, t0 int, a, ax, K, phi []float64, inv float64) sums {
	var p0, p1, p2, k0, k1, k2, s0, s1, s2 float64
	p0, p1, k0, k1 = phi[0], phi[1], K[0]*inv, K[1]*inv
	s0, s1 = a[0], a[1]
	r3 := len(a) == 3
	if r3 {
		p2, k2, s2 = phi[2], K[2]*inv, a[2]
	}
	var syy float64
	if x == nil {
		for _, wt := range w {
			v := wt - s0
			syy += v * v
			n0 := s1 + p0*s0 + k0*v
			n1 := s2 + p1*s0 + k1*v
			s2 = p2*s0 + k2*v
			s0, s1 = n0, n1
		}
		a[0], a[1] = s0, s1
		if r3 {
			a[2] = s2
		}
		return sums{syy: syy, n: len(w)}
	}
	b0, b1, b2 := ax[0], ax[1], 0.0
	if r3 {
		b2 = ax[2]
	}
	var sxy, sxx, sumv, vxInf float64
	i := 0
	for ; i < len(w); i++ {
		v := w[i] - s0
		vx := x[t0+i] - b0
		syy += v * v
		sxy += v * vx
		sxx += vx * vx
		n0 := s1 + p0*s0 + k0*v
		n1 := s2 + p1*s0 + k1*v
		s2 = p2*s0 + k2*v
		s0, s1 = n0, n1
		m0 := b1 + p0*b0 + k0*vx
		m1 := b2 + p1*b0 + k1*vx
		m2 := p2*b0 + k2*vx
		same := near(m0, b0) && near(m1, b1) && near(m2, b2)
		b0, b1, b2 = m0, m1, m2
		if same && constCol(x, t0+i) {
			vxInf = vx
			i++
			break
		}
	}
	nx := 0
	for ; i < len(w); i++ {
		v := w[i] - s0
		syy += v * v
		sumv += v
		nx++
		n0 := s1 + p0*s0 + k0*v
		n1 := s2 + p1*s0 + k1*v
		s2 = p2*s0 + k2*v
		s0, s1 = n0, n1
	}
	sxy += vxInf * sumv
	sxx += vxInf * vxInf * float64(nx)
	a[0], a[1], ax[0], ax[1] = s0, s1, b0, b1
	if r3 {
		a[2], ax[2] = s2, b2
	}
	return sums{syy: syy, sxy: sxy, sxx: sxx, n: len(w)}
}

// near reports |a − b| ≤ 1e-15 (1 + |b|): the regression column's state has
// stopped moving (it may alternate in its last bit).
func near(a, b float64) bool { return math.Abs(a-b) <= 1e-15*(1+math.Abs(b)) }

// constCol reports whether x is constant from index t on (checked once).
func constCol(x []float64, t int) bool {
	for _, v := range x[t:] {
		if v != x[t] {
			return false
		}
	}
	return true
}

// kappa is the prior variance, relative to σ², of the levels when they
// sit in the state (the approximate diffuse prior), and fThreshold the
// prediction variance at or above which an observation does not count in
// the likelihood. Both are the conventions of R's stats::arima, so that
// series with missing values and differencing give the same numbers.
const (
	kappa      = 1e6
	fThreshold = 1e4
)

// tVec computes dst = T src for the (possibly augmented) transition, with
// the constant input c added to the new level (dst may not alias src):
//
//	dst[i] = φ'_{i+1} src[0] + src[i+1]             (i < r−1)
//	dst[r−1] = φ'_r src[0]
//	dst[r] = c + src[0] + Σ_j δ_j src[r+j]          (the new level y_t)
//	dst[r+j] = src[r+j−1]                           (j ≥ 1)
func (s *ssm) tVec(dst, src []float64, c float64) {
	r := s.r
	nd := len(dst) - r // 0: the ARMA block alone
	s0 := src[0]
	for i := 0; i < r-1; i++ {
		dst[i] = s.phi[i]*s0 + src[i+1]
	}
	dst[r-1] = s.phi[r-1] * s0
	if nd == 0 {
		return
	}
	lv := c + s0
	for _, j := range s.deltaNZ {
		lv += s.delta[j] * src[r+j]
	}
	dst[r] = lv
	for j := nd - 1; j >= 1; j-- {
		dst[r+j] = src[r+j-1]
	}
}

// zVec returns Z src = src[0] + Σ_j δ_j src[r+j] (the observation row of
// the augmented form); src must hold the levels.
func (s *ssm) zVec(src []float64) float64 {
	v := src[0]
	for _, j := range s.deltaNZ {
		v += s.delta[j] * src[s.r+j]
	}
	return v
}

// predictCov sets P ← T P Tᵀ + R Rᵀ (Durbin & Koopman 2012, eq. 4.24,
// P_{t+1} = T P_{t|t} Tᵀ + R Q Rᵀ) for the m×m state covariance, m = r
// (the ARMA block alone) or r+nd (levels in the state), using the sparsity of T:
// two passes of tVec, O(m² + m·nnz(δ)), never a dense product. tmp has m²
// elements.
func (s *ssm) predictCov(P, tmp []float64, m int) {
	// tmp = P Tᵀ: row i of tmp is (T P[i,:]ᵀ)ᵀ.
	for i := 0; i < m; i++ {
		s.tVec(tmp[i*m:(i+1)*m], P[i*m:(i+1)*m], 0)
	}
	// P = T tmp: column k of P is T tmp[:,k]; by symmetry of the result
	// it is row k of (T tmp)ᵀ = tmpᵀ Tᵀ, i.e. tVec of column k of tmp.
	// Rows of T tmp are combinations of rows of tmp.
	r, nd := s.r, m-s.r
	row := func(i int) []float64 { return tmp[i*m : (i+1)*m] }
	for i := 0; i < r; i++ {
		dst := P[i*m : (i+1)*m]
		t0 := row(0)
		ph := s.phi[i]
		if i+1 < r {
			t1 := row(i + 1)
			for k := 0; k < m; k++ {
				dst[k] = ph*t0[k] + t1[k]
			}
		} else {
			for k := 0; k < m; k++ {
				dst[k] = ph * t0[k]
			}
		}
	}
	if nd > 0 {
		dst := P[r*m : (r+1)*m]
		copy(dst, row(0))
		for _, j := range s.deltaNZ {
			dj := s.delta[j]
			src := row(r + j)
			for k := 0; k < m; k++ {
				dst[k] += dj * src[k]
			}
		}
		for j := 1; j < nd; j++ {
			copy(P[(r+j)*m:(r+j+1)*m], row(r+j-1))
		}
	}
	for _, i := range s.thetaNZ {
		for _, k := range s.thetaNZ {
			P[i*m+k] += s.theta[i] * s.theta[k]
		}
	}
}

// gain computes, for the measurement update with observation row Z
// (Durbin & Koopman 2012, eq. 4.24 in filtered form, §4.3.2)
//
//	M = P Zᵀ,  F = Z P Zᵀ,  then  a ← a + M v/F,  P ← P − M Mᵀ/F (rank1Down),
//
// M into mvec and returns F. aug selects the augmented Z (levels in the state).
func (s *ssm) gain(P, mvec []float64, m int, aug bool) float64 {
	r := s.r
	for i := 0; i < m; i++ {
		row := P[i*m : (i+1)*m]
		v := row[0]
		if aug {
			for _, j := range s.deltaNZ {
				v += s.delta[j] * row[r+j]
			}
		}
		mvec[i] = v
	}
	F := mvec[0]
	if aug {
		for _, j := range s.deltaNZ {
			F += s.delta[j] * mvec[r+j]
		}
	}
	return F
}

func rank1Down(P, mvec []float64, m int, F float64) {
	for i := 0; i < m; i++ {
		c := mvec[i] / F
		if c == 0 {
			continue
		}
		row := P[i*m : (i+1)*m]
		for k := 0; k < m; k++ {
			row[k] -= c * mvec[k]
		}
	}
}

// denseFilter runs the Kalman filter with the full state covariance, which
// handles missing values (a prediction-only step, Durbin & Koopman 2012,
// §4.10). aug = false filters the ARMA block alone on the (differenced)
// series y with P_1 = Q0; aug = true puts the nd levels in the state with
// the approximate diffuse prior P_1 = diag(Q0, κ I), a_1 = 0, and counts
// only observations with F_t < fThreshold (exactly the convention of R's
// stats::arima, Gardner et al. 1980 for Q0). x (may be nil) is a regression
// column filtered alongside; resid receives v_t/√F_t or NaN.
func (s *ssm) denseFilter(y, x []float64, aug bool, ws *workspace, resid []float64) (sums, error) {
	r := s.r
	m := r
	if aug {
		m += s.nd
	}
	var out sums
	ws.dense(m)
	P, tmp, a, ax, mv, t1 := ws.P, ws.tmp, ws.xa, ws.xx, ws.mv, ws.t1
	for i := range P {
		P[i] = 0
	}
	s.initCov(P, m)
	for i := 0; i < m; i++ {
		a[i], ax[i] = 0, 0
		if i >= r {
			P[i*m+i] = kappa
		}
	}
	rec := ws.rec.start(m, len(y), false)
	for t, yt := range y {
		if t > 0 {
			s.tVec(t1, a, 0)
			copy(a, t1)
			if x != nil {
				s.tVec(t1, ax, 0)
				copy(ax, t1)
			}
			s.predictCov(P, tmp, m)
		}
		if resid != nil {
			resid[t] = math.NaN()
		}
		if math.IsNaN(yt) {
			if rec != nil {
				rec.sd[t] = math.NaN()
			}
			continue
		}
		F := s.gain(P, mv, m, aug)
		if !(F > 0) || math.IsInf(F, 0) {
			return out, ErrNumerical
		}
		if rec != nil {
			rec.put(t, mv, F)
			if aug && F >= fThreshold {
				rec.sd[t] = 0
			}
		}
		za, zx := a[0], ax[0]
		if aug {
			za, zx = s.zVec(a), s.zVec(ax)
		}
		v := yt - za
		vx := 0.0
		if x != nil {
			vx = x[t] - zx
		}
		if !aug || F < fThreshold {
			out.add(v, vx, F)
			if resid != nil {
				resid[t] = v / math.Sqrt(F)
			}
		}
		kv, kx := v/F, vx/F
		for i := 0; i < m; i++ {
			a[i] += mv[i] * kv
			ax[i] += mv[i] * kx
		}
		rank1Down(P, mv, m, F)
	}
	if rec != nil {
		rec.valid = true
	}
	return out, nil
}

// workspace holds the buffers of one likelihood evaluation so repeated
// evaluations during a fit do not allocate.
type workspace struct {
	rec               gainRec
	a, ax, W, K       []float64
	P, tmp            []float64
	xa, xx, mv, t1    []float64
	w, xw, resid, css []float64
}

func (ws *workspace) vecs(r int) {
	ws.a = resize(ws.a, r)
	ws.ax = resize(ws.ax, r)
	ws.W = resize(ws.W, r)
	ws.K = resize(ws.K, r)
}

func (ws *workspace) dense(m int) {
	ws.P = resize(ws.P, m*m)
	ws.tmp = resize(ws.tmp, m*m)
	ws.xa = resize(ws.xa, m)
	ws.xx = resize(ws.xx, m)
	ws.mv = resize(ws.mv, m)
	ws.t1 = resize(ws.t1, m)
}

// gainRec records the gains of one filter pass over the data so that the
// regression columns can be filtered with them (evalX): the gains and the
// prediction variances of a Kalman filter do not depend on the data, only
// on the model and on which rows are missing, so a column needs only the
// O(m) state update per row instead of its own covariance recursion.
type gainRec struct {
	on    bool      // record during the next filter pass
	valid bool      // the last pass recorded completely
	pred  bool      // prediction form (Chandrasekhar): a ← T a + g v; else filtered form (dense): a ← T a, then a ← a + g v
	m     int       // state length
	g     []float64 // per row m values: K̄_t/F_t (pred) or M_t/F_t (filtered)
	sd    []float64 // per row 1/√F_t; 0: the error does not count; NaN: missing row
	// steady is the row from which the gain is frozen (prediction form):
	// rows ≥ steady use the gain and variance stored at row steady.
	steady int
}

// maxRecord caps the recorded gains (floats); a larger state filters each
// column by its own pass.
const maxRecord = 1 << 22

// start prepares the record for a pass of n rows with an m-state; nil when
// recording is off or too large.
func (g *gainRec) start(m, n int, pred bool) *gainRec {
	g.valid = false
	if !g.on || m*n > maxRecord {
		return nil
	}
	g.pred, g.m, g.steady = pred, m, n
	g.g = resize(g.g, m*n)
	g.sd = resize(g.sd, n)
	return g
}

// put stores row t's gain vector k/F and 1/√F.
func (g *gainRec) put(t int, k []float64, F float64) {
	inv := 1 / F
	dst := g.g[t*g.m : (t+1)*g.m]
	for i := range dst {
		dst[i] = k[i] * inv
	}
	g.sd[t] = 1 / math.Sqrt(F)
}

// replay filters the column x with the recorded gains from a zero state
// (the column's own pass would start there too), writing the standardised
// one-step errors v_t/√F_t into resid (NaN where missing or not counted).
// a and t1 are scratch vectors of length m.
func (s *ssm) replay(g *gainRec, x, resid, a, t1 []float64) {
	m := g.m
	for i := range a[:m] {
		a[i] = 0
	}
	if g.pred {
		r := m
		phi := s.phi[:r]
		a = a[:r]
		for t, xt := range x {
			gi := min(t, g.steady)
			k := g.g[gi*r : gi*r+r]
			v := xt - a[0]
			resid[t] = v * g.sd[gi]
			a0 := a[0]
			for i := 0; i < r-1; i++ {
				a[i] = a[i+1] + phi[i]*a0 + k[i]*v
			}
			a[r-1] = phi[r-1]*a0 + k[r-1]*v
		}
		return
	}
	a, t1 = a[:m], t1[:m]
	aug := m > s.r
	for t, xt := range x {
		if t > 0 {
			s.tVec(t1, a, 0)
			copy(a, t1)
		}
		sd := g.sd[t]
		if sd != sd {
			resid[t] = math.NaN()
			continue
		}
		z := a[0]
		if aug {
			z = s.zVec(a)
		}
		v := xt - z
		if sd > 0 {
			resid[t] = v * sd
		} else {
			resid[t] = math.NaN()
		}
		k := g.g[t*m : (t+1)*m]
		for i, ki := range k {
			a[i] += ki * v
		}
	}
}

// replayCols is replay for every column of cols into out (same lengths).
// In prediction form the columns go four at a time: each column's
// recursion is a chain of dependent operations, and four independent
// chains per row keep the processor busy (same arithmetic, same results).
// a and t1 are scratch vectors of length at least 4m.
func (s *ssm) replayCols(g *gainRec, cols, out [][]float64, a, t1 []float64) {
	j := 0
	if g.pred {
		r := g.m
		phi := s.phi[:r]
		for ; j+4 <= len(cols); j += 4 {
			x0, x1, x2, x3 := cols[j], cols[j+1], cols[j+2], cols[j+3]
			o0, o1, o2, o3 := out[j], out[j+1], out[j+2], out[j+3]
			st := a[:4*r]
			for i := range st {
				st[i] = 0
			}
			s0, s1, s2, s3 := st[:r], st[r:2*r], st[2*r:3*r], st[3*r:4*r]
			n := len(x0)
			x1, x2, x3 = x1[:n], x2[:n], x3[:n]
			o0, o1, o2, o3 = o0[:n], o1[:n], o2[:n], o3[:n]
			for t := 0; t < n; t++ {
				gi := min(t, g.steady)
				k := g.g[gi*r : gi*r+r]
				sd := g.sd[gi]
				v0, v1, v2, v3 := x0[t]-s0[0], x1[t]-s1[0], x2[t]-s2[0], x3[t]-s3[0]
				o0[t], o1[t], o2[t], o3[t] = v0*sd, v1*sd, v2*sd, v3*sd
				a0, a1, a2, a3 := s0[0], s1[0], s2[0], s3[0]
				for i := 0; i < r-1; i++ {
					p, ki := phi[i], k[i]
					s0[i] = s0[i+1] + p*a0 + ki*v0
					s1[i] = s1[i+1] + p*a1 + ki*v1
					s2[i] = s2[i+1] + p*a2 + ki*v2
					s3[i] = s3[i+1] + p*a3 + ki*v3
				}
				p, ki := phi[r-1], k[r-1]
				s0[r-1] = p*a0 + ki*v0
				s1[r-1] = p*a1 + ki*v1
				s2[r-1] = p*a2 + ki*v2
				s3[r-1] = p*a3 + ki*v3
			}
		}
	}
	for ; j < len(cols); j++ {
		s.replay(g, cols[j], out[j], a, t1)
	}
}
