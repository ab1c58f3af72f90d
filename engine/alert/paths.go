package alert

import (
	"fmt"
	"math"
)

// StateSpace is the forecast distribution of an ARIMA model in state-space
// form: the system matrices in their sparse (Harvey, companion) shape, the
// predicted state mean and its covariance. Writing c for C, σ² for Sigma2,
// r = len(Phi) ≥ 1 and nd = len(Delta), the state x_j = (α_j, ℓ_j) holds
// the ARMA block α_j (r values) and the last nd levels ℓ_j (most recent
// first), and for j = 1, 2, …
//
//	y_j = c + α_j[0] + Σ_{i=1}^{nd} δ_i ℓ_j[i−1]                (observation)
//	α_{j+1}[i] = φ_{i+1} α_j[0] + α_j[i+1] + θ_i η_j            (α_j[r] ≡ 0)
//	ℓ_{j+1} = (y_j, ℓ_j[0], …, ℓ_j[nd−2])                      (differencing, integrated)
//	η_j ~ N(0, σ²) independent,   x_1 ~ N(X, σ² P)
//
// with φ = Phi, θ = Theta (θ_0 = 1 for an ARMA model), δ = Delta. y_j is
// the forecast of the series j steps ahead on the model scale, so its mean
// and variance must be Query.Mean[j−1] and Query.Variance[j−1].
// arima.Filter.PathSystem fills an arima.PathSystem, which has the same
// fields and converts to a StateSpace with a type conversion.
//
// References:
//   - Durbin, J. & Koopman, S. J. (2012). Time Series Analysis by State
//     Space Methods, 2nd ed., §3.4 (ARIMA models in state-space form).
//   - Harvey, A. C. (1989). Forecasting, Structural Time Series Models and
//     the Kalman Filter, §3.4.
type StateSpace struct {
	Phi, Theta []float64 // φ_1..φ_r; θ_0..θ_{r−1}
	Delta      []float64 // δ_1..δ_nd
	C, Sigma2  float64   // constant of the differenced series; innovation variance
	X          []float64 // state mean, r + nd values
	P          []float64 // state covariance / σ², (r+nd)², row-major
}

// Decision places a crossing probability against a rule's two levels.
type Decision int

const (
	// Undecided: the estimate's confidence interval still contains a level
	// after the most paths allowed (the estimate is returned anyway).
	Undecided Decision = iota
	// BelowClear: p < Clear.
	BelowClear
	// Between: Clear ≤ p < Raise (no transition in either state).
	Between
	// AboveRaise: p ≥ Raise.
	AboveRaise
	// BelowRaise: p < Raise (asked for a Cleared rule only).
	BelowRaise
	// AboveClear: p ≥ Clear (asked for a Raised rule only).
	AboveClear
)

// String names the decision.
func (d Decision) String() string {
	switch d {
	case BelowClear:
		return "below clear"
	case Between:
		return "between"
	case AboveRaise:
		return "above raise"
	case BelowRaise:
		return "below raise"
	case AboveClear:
		return "at or above clear"
	}
	return "undecided"
}

// Estimate is the answer of Evaluator.Decide.
type Estimate struct {
	// P is the crossing probability (estimate).
	P float64
	// StdErr is its Monte Carlo standard error (0 when exact or a bound).
	StdErr float64
	// Lo, Hi bound p: the confidence sequence intersected with the bracket
	// (for a shortcut, the bracket or the exact value).
	Lo, Hi float64
	// Eta is the first step whose mean is beyond the threshold (0: none).
	Eta int
	// Method says how P was obtained.
	Method Method
	// Decision places p against the rule's levels with error at most
	// DecisionError (Undecided when the path budget ran out first).
	Decision Decision
	// Paths is the number of paths simulated (antithetic mirrors counted).
	Paths int
}

const (
	// Batch is the number of paths (antithetic pairs counted twice) drawn
	// between two checks of the stopping rule.
	Batch = 32
	// DecisionError is α of the confidence sequence: the probability that
	// the stopping rule ever excludes the true p, over all its checks.
	DecisionError = 0.01
	// csTarget and csVar tune the confidence sequence's ρ for a tight
	// interval near csTarget pairs at a per-pair variance near csVar.
	csTarget = 256
	csVar    = 0.05
	// PrecisionSE is the Rule.Precision for a probability that is
	// published, not only compared with the levels: a standard error of
	// about 0.01 (the MinPaths premise) keeps the estimate's noise well
	// below the width of a reliability bin (engine/series
	// TestAlertReliabilityCalibrated).
	PrecisionSE = 0.01
	// PrecisionN is the Rule.PrecisionDraws for a published probability:
	// away from 0 and 1 its estimate is as precise as 100 independent
	// draws (a standard error of 0.05 at p = ½, 0.042 at p = 0.23), which
	// keeps the noise within a tenth of a reliability bin's spread at
	// that p while a published estimate costs a few dozen pairs, not
	// hundreds (stream/daemon BenchmarkFleetNearCapacity).
	PrecisionN = 100
)

// precisionAt is the standard error the published estimate is planned
// for, given the deciding estimate p: Precision, loosened to that of
// PrecisionDraws independent draws at p. Zero: no planning.
func (r Rule) precisionAt(p float64) float64 {
	if r.Precision <= 0 {
		return 0
	}
	if r.PrecisionDraws > 0 {
		return math.Max(r.Precision, math.Sqrt(p*(1-p)/float64(r.PrecisionDraws)))
	}
	return r.Precision
}

// pathWork is the workspace of the path simulation, grown to the largest
// state dimension seen, then reused.
type pathWork struct {
	L                       []float64 // m×m lower factor of σ²P
	u, z, d                 []float64 // state noise, normals, c − m_j
	phiNZ, thetaNZ, deltaNZ []int
}

func growF(s []float64, n int) []float64 {
	if cap(s) < n {
		return make([]float64, n)
	}
	return s[:n]
}

// Decide returns the crossing probability of q, like Probability, and
// places it against the levels of rule, stopping the simulation as soon as
// the place is known. The shortcuts of Probability (marginal, skip,
// bracket) come first; a gauge that needs simulation draws its paths from
// ss through the state recursion of StateSpace, O(k·(r + nnz(φ) + nnz(θ)
// + nnz(δ))) per path after one O(m³) factorisation of P (m = r + nd),
// instead of O(k²) per path from a factor of the k×k joint covariance.
//
// Paths: the initial noise x_1 − X = σ L z (P = L Lᵀ, Cholesky with zero
// pivots allowed) and the innovations η_j = σ z_j propagate through the
// recursion with c = 0 and zero means, giving the noise e_j of y_j; the
// path is W_j = m_j + e_j and its antithetic mirror m_j − e_j (m_j the
// sign-adjusted Query.Mean, e_j symmetric, so the mirror has the same
// law). For each pair, with A = 1{max_{j≤k} W_j > c} and the control
// variate B = 1{W_{j*} > c} of known mean P_{j*},
//
//	Y_i = (A_i + A'_i)/2,  X_i = (B_i + B'_i)/2,  E X_i = P_{j*},
//	p̂ = Ȳ − β̂ (X̄ − P_{j*}),  β̂ = S_XY / S_XX,
//	s² = max((S_YY − β̂ S_XY)/(n − 1), q̃(1 − q̃)/2),  SE = s/√n,
//	q̃ = (D + 1)/(2n + 2),  D = #paths with A ≠ B,
//
// n the number of pairs, S the centred sums of squares and products
// (the floor q̃ keeps SE away from zero when A and B never differ in the
// sample although P(A ≠ B) > 0: the add-one rule for a rare event)
// (antithetic variates and the regression control variate, Glasserman
// 2004, §4.1–4.2). A path stops once it has crossed and reached j*.
//
// Stopping rule: after every Batch paths the asymptotic confidence
// sequence of Waudby-Smith et al. (2024), the normal-mixture boundary of
// Robbins (1970) with an estimated variance,
//
//	p̂_n ± sqrt( 2(n σ̂² ρ² + 1)/(n² ρ²) · log( sqrt(n σ̂² ρ² + 1)/α ) ),
//	σ̂² = max(s², 1/(4n)),  α = DecisionError,
//	ρ² = (−2 log α + log(1 − 2 log α)) / (csTarget · csVar),
//
// which covers p at all n simultaneously with probability 1 − α (as n
// grows), is intersected with the bracket [max P_j, min(1, Σ P_j)]. The
// simulation stops when the interval [Lo, Hi] lies at or above Raise,
// below Clear, or within [Clear, Raise), or after Paths() paths. With
// rule.Current set, only the level that can change that state is tested:
// for a Cleared rule the simulation stops once [Lo, Hi] lies at or above
// Raise or below it (AboveRaise, BelowRaise), for a Raised rule once it
// lies below Clear or at or above it (BelowClear, AboveClear), so a p near
// the other level no longer draws the whole budget. With rule.Precision
// > 0, P and StdErr then always come from fresh pairs, as many as the
// per-pair variance of the paths so far says give the standard error
// rule.precisionAt plans (Precision, loosened by PrecisionDraws away from
// p = 0; at least one batch, within the budget), clamped to [Lo, Hi]: a decision taken after a
// few dozen paths is sound, but the estimate it leaves is too noisy to be
// published as the rule's probability, and going on with the same paths
// until their estimate looks precise would bias it (a low estimate of a
// small p also looks precise, so it would stop there more often). Since Lo ≤ P ≤ Hi,
// Next(raised, P, rule) then takes the transition the decision names. The floor
// 1/(4n) on σ̂² guards the first checks against a variance estimated as
// zero. A zero Rule (Raise = Clear = 0) disables the stopping rule: all
// Paths() paths are drawn and Decision is Undecided.
//
// The seed is Query.Seed or, when zero, a hash of the query's values, so
// equal inputs give equal estimates whatever the scheduling. ss must agree
// with q: its means (noise-free recursion) must equal Query.Mean to 1e-6
// standard deviations and its first variance Query.Variance[0] to 1e-6
// relative; otherwise ErrStateSpace is returned. Decide does not allocate
// once its workspace has grown to the largest state dimension seen.
//
// References:
//   - Durbin, J. & Koopman, S. J. (2012). Time Series Analysis by State
//     Space Methods, 2nd ed., §4.9 and §11.3 (simulating from the state
//     space model; forecasting by simulation).
//   - Glasserman, P. (2004). Monte Carlo Methods in Financial Engineering,
//     §4.1 (control variates), §4.2 (antithetic variates).
//   - Robbins, H. (1970). Statistical methods related to the law of the
//     iterated logarithm. Ann. Math. Statist. 41(5), 1397–1409.
//   - Waudby-Smith, I., Arbour, D., Sinha, R., Kennedy, E. H. & Ramdas, A.
//     (2024). Time-uniform central limit theory and asymptotic confidence
//     sequences. Ann. Statist. 52(6) (Theorem 2.2, the normal-mixture
//     asymptotic confidence sequence).
func (e *Evaluator) Decide(q *Query, ss *StateSpace, rule Rule) (Estimate, error) {
	noStop := rule.Raise == 0 && rule.Clear == 0
	if !noStop {
		if err := rule.Validate(); err != nil {
			return Estimate{}, fmt.Errorf("alert: decide: %w", err)
		}
	}
	var sc screened
	p, done, err := e.screen(q, &sc)
	est := Estimate{Eta: sc.eta}
	if err != nil {
		return est, err
	}
	if done {
		est.P, est.Method, est.Lo, est.Hi = p, e.method, sc.lo, sc.hi
		if !noStop {
			est.Decision = place(sc.lo, sc.hi, rule)
		}
		return est, nil
	}
	if ss == nil {
		return est, fmt.Errorf("alert: decide: window %d: %w", sc.k, ErrNoStateSpace)
	}
	if err := e.loadSystem(q, ss, &sc); err != nil {
		return est, fmt.Errorf("alert: decide: %w", err)
	}
	seed := q.Seed
	if seed == 0 {
		seed = deriveSeed(q, sc.k)
	}
	e.simulatePaths(ss, &sc, rule, noStop, seed, &est)
	e.method = MethodSimulation
	e.stdErr = est.StdErr
	est.Method = MethodSimulation
	return est, nil
}

// place returns where an interval [lo, hi] known to hold p lies against
// the levels: both for an Unknown state, only Raise for a Cleared rule,
// only Clear for a Raised one.
func place(lo, hi float64, r Rule) Decision {
	switch r.Current {
	case Cleared:
		switch {
		case lo >= r.Raise:
			return AboveRaise
		case hi < r.Raise:
			return BelowRaise
		}
		return Undecided
	case Raised:
		switch {
		case hi < r.Clear:
			return BelowClear
		case lo >= r.Clear:
			return AboveClear
		}
		return Undecided
	}
	switch {
	case lo >= r.Raise:
		return AboveRaise
	case hi < r.Clear:
		return BelowClear
	case lo >= r.Clear && hi < r.Raise:
		return Between
	}
	return Undecided
}

// loadSystem validates ss against q, factors σ²P and prepares the sparse
// index lists and the distances d_j = c − m_j.
func (e *Evaluator) loadSystem(q *Query, ss *StateSpace, sc *screened) error {
	r, nd := len(ss.Phi), len(ss.Delta)
	m := r + nd
	switch {
	case r < 1 || len(ss.Theta) != r || len(ss.X) != m || len(ss.P) != m*m:
		return fmt.Errorf("state space: %d φ, %d θ, %d δ, %d state values, %d covariance values: %w",
			r, len(ss.Theta), nd, len(ss.X), len(ss.P), ErrStateSpace)
	case !finite(ss.C) || !(ss.Sigma2 > 0 && ss.Sigma2 <= math.MaxFloat64):
		return fmt.Errorf("state space: c %v, σ² %v: %w", ss.C, ss.Sigma2, ErrStateSpace)
	}
	for _, s := range [...][]float64{ss.Phi, ss.Theta, ss.Delta, ss.X, ss.P} {
		for _, v := range s {
			if !finite(v) {
				return fmt.Errorf("state space: value %v: %w", v, ErrStateSpace)
			}
		}
	}
	w := &e.pw
	w.phiNZ, w.thetaNZ, w.deltaNZ = w.phiNZ[:0], w.thetaNZ[:0], w.deltaNZ[:0]
	for i := 0; i < r; i++ {
		if ss.Phi[i] != 0 {
			w.phiNZ = append(w.phiNZ, i)
		}
		if ss.Theta[i] != 0 {
			w.thetaNZ = append(w.thetaNZ, i)
		}
	}
	for i := 0; i < nd; i++ {
		if ss.Delta[i] != 0 {
			w.deltaNZ = append(w.deltaNZ, i)
		}
	}
	w.u = growF(w.u, m)
	w.z = growF(w.z, m)
	w.d = growF(w.d, e.maxH)
	w.L = growF(w.L, m*m)

	// Means: the noise-free recursion must reproduce Query.Mean.
	u := w.u
	copy(u, ss.X)
	for j := 0; j < sc.k; j++ {
		y := ss.C + u[0]
		for _, i := range w.deltaNZ {
			y += ss.Delta[i] * u[r+i]
		}
		mj, vj := q.Mean[j], q.Variance[j]
		yq := y
		if j < len(q.Offset) {
			yq += q.Offset[j]
		}
		if math.Abs(yq-mj) > 1e-6*math.Sqrt(vj)+1e-9*math.Abs(mj)+1e-300 {
			return fmt.Errorf("state space mean at step %d is %v, query mean %v: %w", j+1, yq, mj, ErrStateSpace)
		}
		// W_j = m_j + f_j e_j > c  ⟺  e_j > (c − m_j)/f_j (sign-adjusted).
		w.d[j] = sc.c - sc.sign*mj
		if q.Scale != nil {
			w.d[j] /= q.Scale[j]
		}
		a0 := u[0]
		copy(u[:r-1], u[1:r])
		u[r-1] = 0
		for _, i := range w.phiNZ {
			u[i] += ss.Phi[i] * a0
		}
		if nd > 0 {
			copy(u[r+1:m], u[r:m-1])
			u[r] = y
		}
	}
	// First variance: σ² Z P Zᵀ = Query.Variance[0].
	v1 := ss.P[0]
	for _, i := range w.deltaNZ {
		di := ss.Delta[i]
		v1 += 2 * di * ss.P[r+i]
		for _, l := range w.deltaNZ {
			v1 += di * ss.P[(r+i)*m+r+l] * ss.Delta[l]
		}
	}
	v1 *= ss.Sigma2
	if q.Scale != nil {
		v1 *= q.Scale[0] * q.Scale[0]
	}
	if v0 := q.Variance[0]; math.Abs(v1-v0) > 1e-6*math.Max(v0, v1)+1e-300 {
		return fmt.Errorf("state space variance at step 1 is %v, query variance %v: %w", v1, v0, ErrStateSpace)
	}
	scale := 0.0
	for j := 0; j < m; j++ {
		scale = math.Max(scale, ss.P[j*m+j])
	}
	if scale == 0 {
		scale = 1
	}
	if err := cholPSD(w.L, m, ss.P, m, m, scale); err != nil {
		return fmt.Errorf("state covariance: %w", err)
	}
	s := math.Sqrt(ss.Sigma2)
	for i := range w.L {
		w.L[i] *= s
	}
	return nil
}

// pairSums accumulates the antithetic pairs of a path simulation: the
// sums of Y (crossing), X (the control variate) and their squares and
// product, the pairs drawn and D, the paths with A ≠ B.
type pairSums struct {
	sy, sx, syy, sxx, sxy float64
	n, nDiff              int
}

// estimate returns the control-variate estimate of p from the sums (mean
// of the control variate pStar) and s², the per-pair variance of the
// estimator with its add-one floor (see Decide).
func (a *pairSums) estimate(pStar float64) (p, s2 float64) {
	nf := float64(a.n)
	ym, xm := a.sy/nf, a.sx/nf
	Sxx := a.sxx - nf*xm*xm
	Sxy := a.sxy - nf*xm*ym
	Syy := a.syy - nf*ym*ym
	beta := 0.0
	if Sxx > 1e-12*nf {
		beta = Sxy / Sxx
	}
	p = ym - beta*(xm-pStar)
	if a.n > 1 {
		s2 = math.Max(Syy-beta*Sxy, 0) / (nf - 1)
	}
	// Floor for a sample in which A and B (almost) never differ: the
	// residual A − B is then a rare Bernoulli event, whose rate is
	// taken as (D + 1)/(2n + 2) (add-one rule), D the paths with A ≠ B.
	qt := (float64(a.nDiff) + 1) / (2*nf + 2)
	return p, math.Max(s2, qt*(1-qt)/2)
}

// drawPairs simulates pairs more antithetic path pairs into a (see Decide).
func (e *Evaluator) drawPairs(ss *StateSpace, sc *screened, pairs int, a *pairSums) {
	rng := e.rng
	w := &e.pw
	r, nd := len(ss.Phi), len(ss.Delta)
	m := r + nd
	k, jStar := sc.k, sc.jStar
	L, u, z, d := w.L[:m*m], w.u[:m], w.z[:m], w.d[:k]
	phi, theta, delta := ss.Phi, ss.Theta, ss.Delta
	phiNZ, thetaNZ, deltaNZ := w.phiNZ, w.thetaNZ, w.deltaNZ
	sigma := math.Sqrt(ss.Sigma2)
	for ; pairs > 0; pairs-- {
		for i := range z {
			z[i] = rng.NormFloat64()
		}
		for i := 0; i < m; i++ {
			u[i] = dot(L[i*m:i*m+i+1], z[:i+1])
		}
		aP, aM, bP, bM := false, false, false, false
		for j := 0; ; j++ {
			ej := u[0]
			for _, i := range deltaNZ {
				ej += delta[i] * u[r+i]
			}
			dj := d[j]
			if ej > dj {
				aP = true
				bP = bP || j == jStar
			}
			if -ej > dj {
				aM = true
				bM = bM || j == jStar
			}
			if j+1 == k || (aP && aM && j >= jStar) {
				break
			}
			eta := sigma * rng.NormFloat64()
			a0 := u[0]
			copy(u[:r-1], u[1:r])
			u[r-1] = 0
			for _, i := range phiNZ {
				u[i] += phi[i] * a0
			}
			for _, i := range thetaNZ {
				u[i] += theta[i] * eta
			}
			if nd > 0 {
				copy(u[r+1:m], u[r:m-1])
				u[r] = ej
			}
		}
		if aP != bP {
			a.nDiff++
		}
		if aM != bM {
			a.nDiff++
		}
		y := 0.5 * (b2f(aP) + b2f(aM))
		x := 0.5 * (b2f(bP) + b2f(bM))
		a.sy += y
		a.sx += x
		a.syy += y * y
		a.sxx += x * x
		a.sxy += x * y
		a.n++
	}
}

// simulatePaths runs the antithetic, control-variate path simulation of
// Decide with its stopping rule and fills est.
func (e *Evaluator) simulatePaths(ss *StateSpace, sc *screened, rule Rule, noStop bool, seed uint64, est *Estimate) {
	e.pcg.Seed(seed, seed^0x9e3779b97f4a7c15)
	pStar := sc.lo

	alpha := DecisionError
	la := -2 * math.Log(alpha)
	rho2 := (la + math.Log(1+la)) / (csTarget * csVar)

	maxPairs := e.paths / 2
	var a pairSums
	for a.n < maxPairs {
		e.drawPairs(ss, sc, min(Batch/2, maxPairs-a.n), &a)
		nf := float64(a.n)
		p, s2 := a.estimate(pStar)
		v := math.Max(s2, 0.25/nf)
		t := nf * v * rho2
		hw := math.Sqrt(2 * (t + 1) / (nf * nf * rho2) * math.Log(math.Sqrt(t+1)/alpha))
		est.P = math.Max(sc.lo, math.Min(sc.hi, p))
		est.StdErr = math.Sqrt(s2 / nf)
		// Clamped into the bracket like P, so that Lo ≤ P ≤ Hi.
		est.Lo = math.Max(sc.lo, math.Min(sc.hi, p-hw))
		est.Hi = math.Min(sc.hi, math.Max(sc.lo, p+hw))
		est.Paths = 2 * a.n
		if noStop {
			continue
		}
		if est.Decision = place(est.Lo, est.Hi, rule); est.Decision == Undecided {
			continue
		}
		if prec := rule.precisionAt(est.P); prec > 0 && a.n < maxPairs {
			// always fresh paths: the deciding ones stopped because of
			// their own estimate, however precise it looks
			e.estimateAfresh(ss, sc, prec, s2, maxPairs-a.n, est)
		}
		return
	}
}

// estimateAfresh replaces est.P and est.StdErr by an estimate from fresh
// paths, as many pairs as the per-pair variance s2 of the paths so far
// says give a standard error of prec (at least one batch, at most room).
// The paths that decided are not reused: the moment the decision comes
// depends on their estimate, so an estimate from them is biased (low where
// p is small, as a low estimate also looks precise), while the fresh
// pairs are drawn after their number is fixed. The estimate is clamped to
// [est.Lo, est.Hi], so that Next still takes the transition the decision
// names.
func (e *Evaluator) estimateAfresh(ss *StateSpace, sc *screened, prec, s2 float64, room int, est *Estimate) {
	pairs := min(max(int(math.Ceil(s2/(prec*prec))), Batch/2), room)
	var b pairSums
	e.drawPairs(ss, sc, pairs, &b)
	p, s2b := b.estimate(sc.lo)
	est.P = math.Max(est.Lo, math.Min(est.Hi, p))
	est.StdErr = math.Sqrt(s2b / float64(b.n))
	est.Paths += 2 * b.n
}

func b2f(b bool) float64 {
	if b {
		return 1
	}
	return 0
}
