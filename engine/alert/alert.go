package alert

import (
	"fmt"
	"math"
	"math/rand/v2"
)

// Direction says on which side of the threshold the alert condition lies.
// The zero value is invalid, so a forgotten direction is an error, not a
// silent default.
type Direction int

const (
	// Above: the condition is W > c.
	Above Direction = iota + 1
	// Below: the condition is W < c.
	Below
)

// String returns "above" or "below" (the words of the alert message).
func (d Direction) String() string {
	switch d {
	case Above:
		return "above"
	case Below:
		return "below"
	}
	return fmt.Sprintf("Direction(%d)", int(d))
}

const (
	// Negligible is the level under which a crossing probability is treated
	// as zero without building the joint covariance: when the union bound
	// k·Q(z_min) ≤ Negligible the bound itself is returned.
	Negligible = 1e-6
	// BracketTol is the half-width under which the bracket
	// max_j P_j ≤ p ≤ min(1, Σ_j P_j) is narrow enough that its midpoint is
	// returned instead of a simulation (deterministic error ≤ BracketTol).
	BracketTol = 1e-3
	// MinPaths is the fewest simulation paths NewEvaluator accepts:
	// SE = sqrt(p(1−p)/N) ≤ 0.5/sqrt(N) ≤ 0.01 needs N ≥ 2500.
	MinPaths = 2500
	// DefaultPaths is used when NewEvaluator is given paths ≤ 0:
	// SE ≤ 0.5/sqrt(10000) = 0.005, so the 95 % Monte Carlo half-width
	// 1.96·SE is below 1 % whatever p is.
	DefaultPaths = 10000
)

// Query is one evaluation of one rule against one forecast, on the model
// scale (the caller has already mapped the raw threshold through the
// transform and flipped Direction if the transform is decreasing).
type Query struct {
	// Mean[j-1] is the forecast mean of W_{t+j}, j = 1..h.
	Mean []float64
	// Variance[j-1] is the marginal forecast variance of W_{t+j}.
	Variance []float64
	// Threshold is c, on the model scale.
	Threshold float64
	// Direction is Above (W > c) or Below (W < c).
	Direction Direction
	// Window is k, the number of steps looked ahead, 1 ≤ k ≤ h.
	Window int
	// Monotone selects the counter rule: the probability is the marginal at
	// step k. Otherwise (a gauge) it is the probability of crossing at any
	// step 1..k.
	Monotone bool
	// Seed seeds the path simulation. Zero means: derive the seed from the
	// query's values, so that equal inputs give equal outputs.
	Seed uint64
	// Offset[j-1] is the part of Mean[j-1] that the state-space system of
	// Decide leaves out: a regression on known future values (Fourier
	// terms, outlier effects; arima.Filter.RegressionMean). nil: none. The
	// paths are deviations from Mean, so only Decide's check of the
	// system's means against Mean uses it.
	Offset []float64
	// Scale, when not nil (length h, each positive and finite), widens
	// the forecast errors step by step: W_j = Mean_j + Scale_j·e_j, e the
	// errors of the joint covariance or the state space, so the paths keep
	// their correlation and step j has variance Scale_j²·(its model
	// variance). Variance must already hold the widened variances (the
	// shortcuts use them alone); joint and the state space give the model's
	// own. Nil: every factor 1.
	Scale []float64
}

// Evaluator computes crossing probabilities. It owns all workspaces, so a
// call to Probability does not allocate. It is not safe for concurrent
// use: keep one per worker goroutine.
type Evaluator struct {
	maxH  int
	paths int
	zSkip []float64 // zSkip[k] = Q⁻¹(Negligible/k), k = 1..maxH

	cov  []float64 // h×h, filled by the caller's callback
	chol []float64 // k×k lower factor, row-major, stride k
	m    []float64 // sign-adjusted means, length k
	z    []float64 // one path's standard normal draws
	pcg  *rand.PCG
	rng  *rand.Rand

	stdErr float64
	method Method

	pw pathWork // Decide's workspace
}

// Method says how the last probability was obtained.
type Method int

const (
	// MethodNone: no successful evaluation yet.
	MethodNone Method = iota
	// MethodMarginal: exact marginal probability (counter, or window 1).
	MethodMarginal
	// MethodSkip: union bound below Negligible; the bound was returned.
	MethodSkip
	// MethodBracket: midpoint of the narrow bracket [max P_j, min(1, Σ P_j)].
	MethodBracket
	// MethodSimulation: seeded Monte Carlo of the joint Gaussian path.
	MethodSimulation
)

// String names the method.
func (m Method) String() string {
	switch m {
	case MethodMarginal:
		return "marginal"
	case MethodSkip:
		return "skip"
	case MethodBracket:
		return "bracket"
	case MethodSimulation:
		return "simulation"
	}
	return "none"
}

// NewEvaluator returns an evaluator for forecasts of up to maxHorizon steps
// that simulates paths paths when a path probability is needed
// (paths ≤ 0 selects DefaultPaths; fewer than MinPaths is an error).
func NewEvaluator(maxHorizon, paths int) (*Evaluator, error) {
	if maxHorizon < 1 {
		return nil, fmt.Errorf("alert: new evaluator: max horizon %d: %w", maxHorizon, ErrMaxHorizon)
	}
	if paths <= 0 {
		paths = DefaultPaths
	}
	if paths < MinPaths {
		return nil, fmt.Errorf("alert: new evaluator: %d paths, need at least %d: %w", paths, MinPaths, ErrPaths)
	}
	e := &Evaluator{
		maxH:  maxHorizon,
		paths: paths,
		zSkip: make([]float64, maxHorizon+1),
		cov:   make([]float64, maxHorizon*maxHorizon),
		chol:  make([]float64, maxHorizon*maxHorizon),
		m:     make([]float64, maxHorizon),
		z:     make([]float64, maxHorizon),
		pcg:   rand.NewPCG(0, 0),
	}
	e.rng = rand.New(e.pcg)
	for k := 1; k <= maxHorizon; k++ {
		e.zSkip[k] = upperQuantile(Negligible / float64(k))
	}
	return e, nil
}

// StdErr is the Monte Carlo standard error of the last probability
// (0 when it was computed exactly or by a bound).
func (e *Evaluator) StdErr() float64 { return e.stdErr }

// LastMethod says how the last probability was computed.
func (e *Evaluator) LastMethod() Method { return e.method }

// Paths is the number of simulated paths per path probability.
func (e *Evaluator) Paths() int { return e.paths }

// Probability returns the probability p that the forecast crosses the
// threshold within the window, and etaStep, the first step j (1-based,
// j ≤ h) at which the mean forecast is beyond the threshold, or 0 if it
// never is within the horizon. joint is called at most once, and only
// when a path probability must be simulated; it must fill cov (h×h,
// row-major) with the covariance of the h forecast errors. joint may be
// nil for counters and for a window of one step.
//
// See the package documentation for the formulas.
func (e *Evaluator) Probability(q *Query, joint func(cov []float64)) (p float64, etaStep int, err error) {
	var sc screened
	p, done, err := e.screen(q, &sc)
	etaStep = sc.eta
	if err != nil || done {
		return p, etaStep, err
	}
	h, k, c, sign, lo, hi, jStar := sc.h, sc.k, sc.c, sc.sign, sc.lo, sc.hi, sc.jStar
	if joint == nil {
		return 0, etaStep, fmt.Errorf("alert: probability: window %d: %w", k, ErrNoCovariance)
	}
	cov := e.cov[:h*h]
	joint(cov)
	if q.Scale != nil {
		for i := 0; i < h; i++ {
			for j := 0; j < h; j++ {
				cov[i*h+j] *= q.Scale[i] * q.Scale[j]
			}
		}
	}
	if err := e.factor(cov, q.Variance, h, k); err != nil {
		return 0, etaStep, fmt.Errorf("alert: probability: %w", err)
	}
	for j := 0; j < k; j++ {
		e.m[j] = sign * q.Mean[j]
	}
	seed := q.Seed
	if seed == 0 {
		seed = deriveSeed(q, k)
	}
	p, e.stdErr = e.simulate(k, c, jStar, lo, seed)
	p = math.Max(lo, math.Min(hi, p))
	e.method = MethodSimulation
	return p, etaStep, nil
}

// screened is what screen learns about a query: the sign-adjusted
// threshold c (W > c is the condition), the window k ≤ h, eta, and for a
// gauge that needs simulation the bracket [lo, hi] and the step j*
// (0-based) with the largest marginal P_{j*} = lo.
type screened struct {
	h, k    int
	sign, c float64
	eta     int
	lo, hi  float64
	jStar   int
}

// screen validates q, finds eta and applies the exact and bounding
// shortcuts of the package documentation (marginal, skip, bracket). done
// is true when p is final (e.method is then set); otherwise sc holds the
// bracket for a simulation.
func (e *Evaluator) screen(q *Query, sc *screened) (p float64, done bool, err error) {
	e.stdErr, e.method = 0, MethodNone
	h := len(q.Mean)
	if h == 0 || len(q.Variance) != h {
		return 0, true, fmt.Errorf("alert: probability: %d means, %d variances: %w", h, len(q.Variance), ErrShape)
	}
	if h > e.maxH {
		return 0, true, fmt.Errorf("alert: probability: horizon %d > %d: %w", h, e.maxH, ErrHorizon)
	}
	k := q.Window
	if k < 1 || k > h {
		return 0, true, fmt.Errorf("alert: probability: window %d, horizon %d: %w", k, h, ErrWindow)
	}
	var sign float64
	switch q.Direction {
	case Above:
		sign = 1
	case Below:
		sign = -1
	default:
		return 0, true, fmt.Errorf("alert: probability: %v: %w", q.Direction, ErrDirection)
	}
	if !finite(q.Threshold) {
		return 0, true, fmt.Errorf("alert: probability: threshold %v: %w", q.Threshold, ErrNotFinite)
	}
	if q.Scale != nil {
		if len(q.Scale) != h {
			return 0, true, fmt.Errorf("alert: probability: %d scale factors, horizon %d: %w", len(q.Scale), h, ErrShape)
		}
		for j, f := range q.Scale {
			if !(f > 0 && f <= math.MaxFloat64) {
				return 0, true, fmt.Errorf("alert: probability: step %d scale %v: %w", j+1, f, ErrNotFinite)
			}
		}
	}
	c := sign * q.Threshold
	sc.h, sc.k, sc.sign, sc.c = h, k, sign, c

	// One pass over the window 1..k validates the values and runs the
	// union-bound test: far while every step has d_j = c' − m'_j > 0 and
	// d_j² ≥ zSkip[k]²·v_j, i.e. P_j ≤ Negligible/k. (bestD, bestV) is the
	// step with the smallest d/√v, compared without division. The checks are
	// comparisons, not arithmetic, so no step waits on the previous one;
	// written as !(lo ≤ x ≤ hi) they are also false for NaN.
	mean, variance := q.Mean[:h], q.Variance[:h]
	zs := e.zSkip[k]
	zs2 := zs * zs
	far := true
	bestD, bestV := math.Inf(1), 1.0
	for j, mj := range mean[:k] {
		vj := variance[j]
		if !(mj >= -math.MaxFloat64 && mj <= math.MaxFloat64 && vj >= 0 && vj <= math.MaxFloat64) {
			return 0, true, badInput(mean, variance)
		}
		d := c - sign*mj
		if far {
			if d <= 0 || d*d < zs2*vj {
				far = false
			} else if d*d*bestV < bestD*bestD*vj {
				bestD, bestV = d, vj
			}
		}
	}
	for j, mj := range mean[k:] {
		vj := variance[k+j]
		if !(mj >= -math.MaxFloat64 && mj <= math.MaxFloat64 && vj >= 0 && vj <= math.MaxFloat64) {
			return 0, true, badInput(mean, variance)
		}
	}
	// eta: when far, no mean within the window is beyond c, so the search
	// starts after it.
	from := 0
	if far {
		from = k
	}
	for j := from; j < h; j++ {
		if sign*mean[j] > c {
			sc.eta = j + 1
			break
		}
	}

	if q.Monotone || k == 1 {
		e.method = MethodMarginal
		p = tail(c-sign*q.Mean[k-1], q.Variance[k-1])
		sc.lo, sc.hi = p, p
		return p, true, nil
	}
	if far {
		e.method = MethodSkip
		p = skipBound(k, bestD, bestV)
		sc.lo, sc.hi = 0, p
		return p, true, nil
	}

	// Bracket: max_j P_j ≤ p ≤ min(1, Σ_j P_j) (Boole's inequality).
	lo, hi, jStar := 0.0, 0.0, 0
	for j := 0; j < k; j++ {
		pj := tail(c-sign*q.Mean[j], q.Variance[j])
		hi += pj
		if pj > lo {
			lo, jStar = pj, j
		}
	}
	hi = math.Min(hi, 1)
	sc.lo, sc.hi, sc.jStar = lo, hi, jStar
	if hi-lo <= 2*BracketTol {
		e.method = MethodBracket
		return 0.5 * (lo + hi), true, nil
	}
	return 0, false, nil
}

// badInput builds the error for the first mean or variance that is not
// finite, or the first negative variance.
func badInput(mean, variance []float64) error {
	for j, mj := range mean {
		vj := variance[j]
		if !finite(mj) || !finite(vj) {
			return fmt.Errorf("alert: probability: step %d mean %v variance %v: %w", j+1, mj, vj, ErrNotFinite)
		}
		if vj < 0 {
			return fmt.Errorf("alert: probability: step %d variance %v: %w", j+1, vj, ErrNegativeVariance)
		}
	}
	panic("alert: badInput called on valid input")
}

// simulate estimates p = P(max_{j≤k} W'_j > c') with W' = m' + L z by the
// control-variate estimator of the package documentation, using
// B = 1{W'_{j*} > c'}, whose mean pStar is known exactly.
func (e *Evaluator) simulate(k int, c float64, jStar int, pStar float64, seed uint64) (p, se float64) {
	e.pcg.Seed(seed, seed^0x9e3779b97f4a7c15)
	L, m, z := e.chol, e.m, e.z
	var nA, nB int
	for n := 0; n < e.paths; n++ {
		crossed, end := false, false
		for j := 0; j < k; j++ {
			z[j] = e.rng.NormFloat64()
			w := m[j] + dot(L[j*k:j*k+j+1], z[:j+1])
			if w > c {
				crossed = true
				if j == jStar {
					end = true
				}
			}
			if crossed && j >= jStar {
				break
			}
		}
		if crossed {
			nA++
		}
		if end {
			nB++
		}
	}
	N := float64(e.paths)
	a, b := float64(nA)/N, float64(nB)/N
	// B ⊂ A, so cov(A,B) = b(1−a) and var(B) = b(1−b).
	varA := a * (1 - a)
	varB := b * (1 - b)
	if varB == 0 {
		return a, math.Sqrt(varA / N)
	}
	covAB := b * (1 - a)
	beta := covAB / varB
	p = a - beta*(b-pStar)
	resid := math.Max(varA-covAB*beta, 0)
	return p, math.Sqrt(resid / N)
}

// skipBound returns min(Negligible, k·φ(z)/z), z = d/√v, an upper bound of
// the union bound k·Q(z_min) by Gordon's inequality Q(z) < φ(z)/z (z > 0),
// at the cost of one exp instead of one erfc (for z ≥ 5 it exceeds Q(z) by
// under 4 %). The caller guarantees k·Q(z) ≤ Negligible, hence the min.
//
// References:
//   - Gordon, R. D. (1941). Values of Mills' ratio of area to bounding
//     ordinate and of the normal probability integral for large values of
//     the argument. Ann. Math. Statist. 12(3), 364–366.
func skipBound(k int, d, v float64) float64 {
	if v == 0 {
		return 0
	}
	z := d / math.Sqrt(v)
	const invSqrt2Pi = 0.3989422804014327 // 1/√(2π)
	return math.Min(Negligible, float64(k)*invSqrt2Pi*math.Exp(-0.5*z*z)/z)
}

// dot returns Σ a_i b_i (len(b) ≥ len(a)) with four independent
// accumulators, so the adds do not wait on each other.
func dot(a, b []float64) float64 {
	b = b[:len(a)]
	var s0, s1, s2, s3 float64
	i := 0
	for ; i+4 <= len(a); i += 4 {
		s0 += a[i] * b[i]
		s1 += a[i+1] * b[i+1]
		s2 += a[i+2] * b[i+2]
		s3 += a[i+3] * b[i+3]
	}
	for ; i < len(a); i++ {
		s0 += a[i] * b[i]
	}
	return (s0 + s1) + (s2 + s3)
}

// tail returns P(W > c) for W ~ N(c − d, v), that is Q(d/√v), with the
// degenerate case v = 0 giving 1 if d < 0 and 0 otherwise.
func tail(d, v float64) float64 {
	if v == 0 {
		if d < 0 {
			return 1
		}
		return 0
	}
	return 0.5 * math.Erfc(d/math.Sqrt(2*v))
}

// upperQuantile returns z with Q(z) = p, Q the standard normal upper tail.
func upperQuantile(p float64) float64 { return math.Sqrt2 * math.Erfcinv(2*p) }

// finite reports whether x is neither NaN nor ±Inf: x − x is 0 for finite
// x and NaN otherwise (IEEE 754). Written this way it inlines.
func finite(x float64) bool { return x-x == 0 }

// deriveSeed hashes the inputs that define the simulated distribution
// (splitmix64 finaliser over the bit patterns), so equal queries give
// equal simulations.
func deriveSeed(q *Query, k int) uint64 {
	s := mix(uint64(k)<<8 | uint64(q.Direction))
	s = mix(s ^ math.Float64bits(q.Threshold))
	for j := 0; j < k; j++ {
		s = mix(s ^ math.Float64bits(q.Mean[j]))
		s = mix(s ^ math.Float64bits(q.Variance[j]))
	}
	return s
}

func mix(x uint64) uint64 {
	x += 0x9e3779b97f4a7c15
	x = (x ^ (x >> 30)) * 0xbf58476d1ce4e5b9
	x = (x ^ (x >> 27)) * 0x94d049bb133111eb
	return x ^ (x >> 31)
}
