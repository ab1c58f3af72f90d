package outlier

import (
	"errors"
	"fmt"
	"math"
	"sort"
	"strconv"
	"time"

	"forewarn/engine/arima"
	"forewarn/engine/internal/linalg"
)

// Kind is the kind of an effect.
type Kind int

// The kinds.
const (
	AO Kind = iota // additive outlier: one value off
	LS             // level shift: a permanent step
	TC             // temporary change: a step that decays by δ per step
)

var kindNames = [...]string{AO: "AO", LS: "LS", TC: "TC"}

func (k Kind) String() string {
	if k >= 0 && int(k) < len(kindNames) {
		return kindNames[k]
	}
	return "Kind(" + strconv.Itoa(int(k)) + ")"
}

// Delta is the decay of a temporary change, Chen & Liu's δ = 0.7.
const Delta = 0.7

// ErrInput is wrapped by every error about the arguments of Detect.
var ErrInput = errors.New("outlier: bad input")

// Outlier is one effect found and fitted.
type Outlier struct {
	Kind   Kind
	Index  int     // time index in the series (0-based)
	Effect float64 // ω̂, the fitted regression coefficient (model scale)
	Tau    float64 // its t value in the final joint fit
	Name   string  // "KIND@time" or "KIND@index"
}

// Options tune Detect. The zero value (or nil) means defaults.
type Options struct {
	// Critical is C; 0 means CriticalValue(len(y)).
	Critical float64
	// Delta is the decay of a temporary change; 0 means Delta (0.7).
	Delta float64
	// Kinds are the kinds sought; nil means AO, LS and TC.
	Kinds []Kind
	// MaxOutliers caps the effects kept; 0 means 20 (and never more than
	// the regressors arima allows beside the caller's).
	MaxOutliers int
	// MaxIter caps the detect–re-estimate rounds; 0 means 4.
	MaxIter int
	// Start and Step, when Step > 0, give index i the time Start + i·Step
	// for the effects' names; otherwise names carry the index.
	Start time.Time
	Step  time.Duration
	// Fit is passed to arima.FitX.
	Fit *arima.FitOptions
	// Known are effects found before (Kind and Index are used): the
	// procedure starts with them in the model, as if its own earlier
	// rounds had found them, re-estimates them jointly with what it finds
	// and drops them when they no longer pass (Chen & Liu 1993, stage
	// II); nil means none.
	Known []Outlier
	// From is the first index searched for new effects (0: all); the
	// model is still fitted to the whole series.
	From int
}

// Result is the outcome of Detect.
type Result struct {
	Outliers []Outlier // ordered by index
	// Fit is the final fit: the caller's regressors first, then one
	// column per outlier in the order of Outliers.
	Fit *arima.Result
	// X are the columns Fit was made with (the caller's, then Column of
	// each outlier).
	X        [][]float64
	Critical float64
	Delta    float64
}

// CriticalValue returns the default critical value for a series of n
// values: 3 for n ≤ 50, 4 for n ≥ 450, linear between (the length rule of
// R package tsoutliers, function tso, from memory; Chen & Liu 1993 use C
// from 2.5 to 4).
func CriticalValue(n int) float64 {
	switch {
	case n <= 50:
		return 3
	case n >= 450:
		return 4
	}
	return 3 + 0.0025*float64(n-50)
}

// Value returns the regression column of an effect of kind k at index T
// at index t, with decay delta for a temporary change.
func Value(k Kind, T, t int, delta float64) float64 {
	if t < T {
		return 0
	}
	switch k {
	case AO:
		if t == T {
			return 1
		}
		return 0
	case LS:
		return 1
	case TC:
		return math.Pow(delta, float64(t-T))
	}
	return 0
}

// Column returns the regression column of an effect of kind k at index T
// over indices 0..n−1 (n may exceed the series to give future values).
func Column(k Kind, T, n int, delta float64) []float64 {
	c := make([]float64, n)
	for t := range c {
		c[t] = Value(k, T, t, delta)
	}
	return c
}

// Weights returns π_0 = 1, π_1, …, π_{n−1}, the coefficients of
// π(B) = φ(B)Φ(B^s)(1−B)^d(1−B^s)^D / (θ(B)Θ(B^s)) of the model (the
// residual filter, AR(∞) form, with the sign convention π(B) = 1 + Σ π_j B^j).
func Weights(m *arima.Model, n int) []float64 {
	if n <= 0 {
		return nil
	}
	s := m.Spec
	// numerator: φ(z) = 1 − Σ φ_i z^i times Φ(z^s), times the differences
	num := []float64{1}
	num = polyMul(num, arPoly(m.AR, 1))
	num = polyMul(num, arPoly(m.SAR, s.Period))
	for i := 0; i < s.D; i++ {
		num = polyMul(num, []float64{1, -1})
	}
	for i := 0; i < s.SD; i++ {
		d := make([]float64, s.Period+1)
		d[0], d[s.Period] = 1, -1
		num = polyMul(num, d)
	}
	den := polyMul(maPoly(m.MA, 1), maPoly(m.SMA, s.Period))
	out := make([]float64, n)
	for k := 0; k < n; k++ {
		v := 0.0
		if k < len(num) {
			v = num[k]
		}
		for j := 1; j < len(den) && j <= k; j++ {
			v -= den[j] * out[k-j]
		}
		out[k] = v
	}
	return out
}

func arPoly(c []float64, lag int) []float64 {
	p := make([]float64, len(c)*lag+1)
	p[0] = 1
	for i, v := range c {
		p[(i+1)*lag] = -v
	}
	return p
}

func maPoly(c []float64, lag int) []float64 {
	p := make([]float64, len(c)*lag+1)
	p[0] = 1
	for i, v := range c {
		p[(i+1)*lag] = v
	}
	return p
}

func polyMul(a, b []float64) []float64 {
	out := make([]float64, len(a)+len(b)-1)
	for i, x := range a {
		if x == 0 {
			continue
		}
		for j, y := range b {
			out[i+j] += x * y
		}
	}
	return out
}

// responses returns the residual-domain responses x_j of each kind
// (AO, LS, TC) to an effect, from the weights π.
func responses(pi []float64, delta float64) [3][]float64 {
	n := len(pi)
	var x [3][]float64
	for k := range x {
		x[k] = make([]float64, n)
	}
	cum, tc := 0.0, 0.0
	for j, p := range pi {
		cum += p
		tc = delta*tc + p
		x[AO][j], x[LS][j], x[TC][j] = p, cum, tc
	}
	return x
}

// robustScale is 1.4826 · MAD of the finite values of e (NaN if none).
func robustScale(e []float64, buf []float64) float64 {
	buf = buf[:0]
	for _, v := range e {
		if !math.IsNaN(v) {
			buf = append(buf, v)
		}
	}
	if len(buf) == 0 {
		return math.NaN()
	}
	sort.Float64s(buf)
	med := median(buf)
	for i, v := range buf {
		buf[i] = math.Abs(v - med)
	}
	sort.Float64s(buf)
	return 1.4826 * median(buf)
}

func median(s []float64) float64 {
	n := len(s)
	if n%2 == 1 {
		return s[n/2]
	}
	return (s[n/2-1] + s[n/2]) / 2
}

// scanner computes ω̂_k(T) and τ_k(T) over all T for one response x,
// using that x is constant (to 1e-10 of its largest value) after index
// tail, so the sums beyond it come from suffix sums.
type scanner struct {
	x    []float64
	tail int
	xc   float64
}

func newScanner(x []float64) scanner {
	n := len(x)
	maxAbs := 0.0
	for _, v := range x {
		maxAbs = math.Max(maxAbs, math.Abs(v))
	}
	xc := x[n-1]
	tail := n
	for tail > 1 && math.Abs(x[tail-1]-xc) <= 1e-10*maxAbs {
		tail--
	}
	return scanner{x: x, tail: tail, xc: xc}
}

// design holds the residuals and the regression columns already in the
// model (the mean or drift and the effects found), all in the residual
// domain (filtered by π(B)), with their suffix sums over the times where
// the residual is present. The statistic of a candidate column c is then
// that of c after projection on the columns Z:
//
//	ω̂ = (cᵀe − cᵀZ G⁻¹ Zᵀe) / s,   s = cᵀc − cᵀZ G⁻¹ Zᵀc,   τ = ω̂ √s / σ̂,
//
// G = ZᵀZ: the t statistic of c in the regression of ê on (Z, c). Without
// it a level shift is largely absorbed by a fitted mean (Chen & Liu's
// stage-II joint estimation treats the same issue after the fact).
type design struct {
	n     int
	e, S  []float64 // residuals (NaN = absent) and Σ_{u≥t} e_u
	N     []int     // present residuals at or after t
	z, zS [][]float64
	ze    []float64 // Zᵀe
	L     []float64 // Cholesky factor of G (k×k)
	cz, u []float64
	ok    bool
}

func newDesign(n int) *design {
	return &design{n: n, S: make([]float64, n+1), N: make([]int, n+1)}
}

// set fills the sums for residuals e and columns z (each of length n).
func (d *design) set(e []float64, z [][]float64) {
	n := d.n
	d.e, d.z = e, z
	k := len(z)
	for len(d.zS) < k {
		d.zS = append(d.zS, make([]float64, n+1))
	}
	d.zS = d.zS[:k]
	d.ze = resize(d.ze, k)
	d.cz, d.u = resize(d.cz, k), resize(d.u, k)
	d.S[n], d.N[n] = 0, 0
	for j := range z {
		d.zS[j][n] = 0
		d.ze[j] = 0
	}
	for t := n - 1; t >= 0; t-- {
		d.S[t], d.N[t] = d.S[t+1], d.N[t+1]
		present := !math.IsNaN(e[t])
		if present {
			d.S[t] += e[t]
			d.N[t]++
		}
		for j, c := range z {
			d.zS[j][t] = d.zS[j][t+1]
			if present {
				d.zS[j][t] += c[t]
				d.ze[j] += c[t] * e[t]
			}
		}
	}
	G := make([]float64, k*k)
	for i := 0; i < k; i++ {
		for j := 0; j <= i; j++ {
			v := 0.0
			for t := 0; t < n; t++ {
				if !math.IsNaN(e[t]) {
					v += z[i][t] * z[j][t]
				}
			}
			G[i*k+j], G[j*k+i] = v, v
		}
	}
	d.L = resize(d.L, k*k)
	d.ok = linalg.Cholesky(d.L, G, k)
}

// at returns ω̂ and s (the projected Σ c²) of the candidate with response
// sc at T.
func (d *design) at(sc *scanner, T int) (omega, s float64) {
	n := d.n
	e := d.e
	num, den := 0.0, 0.0
	end := n
	if T+sc.tail < n {
		end = T + sc.tail
	}
	x := sc.x
	k := len(d.z)
	for j := range d.cz {
		d.cz[j] = 0
	}
	for t := T; t < end; t++ {
		v := e[t]
		if math.IsNaN(v) {
			continue
		}
		xv := x[t-T]
		num += v * xv
		den += xv * xv
		for j, c := range d.z {
			d.cz[j] += xv * c[t]
		}
	}
	if end < n {
		num += sc.xc * d.S[end]
		den += sc.xc * sc.xc * float64(d.N[end])
		for j := range d.z {
			d.cz[j] += sc.xc * d.zS[j][end]
		}
	}
	if k > 0 && d.ok {
		linalg.CholSolve(d.u, d.L, d.cz, k)
		for j := 0; j < k; j++ {
			num -= d.u[j] * d.ze[j]
			den -= d.u[j] * d.cz[j]
		}
	}
	if !(den > 1e-12*float64(n)) {
		return 0, 0
	}
	return num / den, den
}

func resize(s []float64, n int) []float64 {
	if cap(s) < n {
		return make([]float64, n)
	}
	return s[:n]
}

// shifted returns the residual-domain column of an effect with response x
// at T: x_{t−T} for t ≥ T.
func shifted(x []float64, T int) []float64 {
	c := make([]float64, len(x))
	copy(c[T:], x)
	return c
}

type candidate struct {
	kind  Kind
	index int
}

// Detect runs the Chen–Liu procedure on y (model scale, NaN = missing)
// with the model shape spec and the caller's regressors X (spec.NX of
// them, as for arima.FitX; the outlier columns are added after them).
// It returns the effects found with the final joint fit.
func Detect(y []float64, X [][]float64, spec arima.Spec, opt *Options) (*Result, error) {
	if opt == nil {
		opt = &Options{}
	}
	n := len(y)
	if spec.NX != len(X) {
		return nil, fmt.Errorf("%w: spec has %d regressors, %d columns given", ErrInput, spec.NX, len(X))
	}
	C := opt.Critical
	if C == 0 {
		C = CriticalValue(n)
	}
	if !(C > 0) || math.IsInf(C, 0) {
		return nil, fmt.Errorf("%w: critical value %v: want a positive finite number", ErrInput, opt.Critical)
	}
	delta := opt.Delta
	if delta == 0 {
		delta = Delta
	}
	if !(delta > 0 && delta < 1) {
		return nil, fmt.Errorf("%w: temporary-change decay %v: want 0 < δ < 1", ErrInput, opt.Delta)
	}
	kinds := opt.Kinds
	if kinds == nil {
		kinds = []Kind{AO, LS, TC}
	}
	for _, k := range kinds {
		if k < AO || k > TC {
			return nil, fmt.Errorf("%w: unknown kind %d", ErrInput, int(k))
		}
	}
	maxOut := opt.MaxOutliers
	if maxOut <= 0 {
		maxOut = 20
	}
	if room := arima.MaxRegressors - len(X); maxOut > room {
		maxOut = room
	}
	maxIter := opt.MaxIter
	if maxIter <= 0 {
		maxIter = 4
	}
	nd := spec.D + spec.SD*spec.Period

	var found []candidate
	taken := make(map[int]bool)
	if opt.From < 0 || opt.From > n {
		return nil, fmt.Errorf("%w: search from index %d of %d values", ErrInput, opt.From, n)
	}
	for _, o := range opt.Known {
		if o.Kind < AO || o.Kind > TC || o.Index < 0 || o.Index >= n || taken[o.Index] {
			return nil, fmt.Errorf("%w: known effect %v at index %d of %d values", ErrInput, o.Kind, o.Index, n)
		}
		if len(found) < maxOut {
			found = append(found, candidate{o.Kind, o.Index})
			taken[o.Index] = true
		}
	}
	fit := func(cands []candidate) (*arima.Result, [][]float64, error) {
		cols := append([][]float64(nil), X...)
		for _, c := range cands {
			cols = append(cols, Column(c.kind, c.index, n, delta))
		}
		sp := spec
		sp.NX = len(cols)
		r, err := arima.FitX(y, cols, sp, opt.Fit)
		return r, cols, err
	}
	res, cols, err := fit(found)
	if err != nil && len(found) > 0 {
		// the known effects do not fit together now: start without them
		found = nil
		clear(taken)
		res, cols, err = fit(nil)
	}
	if err != nil {
		return nil, fmt.Errorf("outlier: fit without effects: %w", err)
	}
	e := make([]float64, n)
	buf := make([]float64, 0, n)
	des := newDesign(n)
	for iter := 0; iter < maxIter && len(found) < maxOut; iter++ {
		sd := math.Sqrt(res.Model.Sigma2)
		for t := range e {
			e[t] = res.Residuals[t] * sd
		}
		x := responses(Weights(res.Model, n), delta)
		var sc [3]scanner
		for _, k := range kinds {
			sc[k] = newScanner(x[k])
		}
		// the columns already in the model, filtered by π(B): the mean
		// (the step response from 0), the drift (its running sum) and
		// the effects found
		var z [][]float64
		switch {
		case spec.Mean:
			z = append(z, append([]float64(nil), x[LS]...))
		case spec.Drift:
			c := make([]float64, n)
			acc := 0.0
			for t, v := range x[LS] {
				acc += v
				c[t] = acc
			}
			z = append(z, c)
		}
		for _, c := range found {
			z = append(z, shifted(x[c.kind], c.index))
		}
		var added []candidate
		for len(found)+len(added) < maxOut {
			sigma := robustScale(e, buf)
			if !(sigma > 0) {
				break
			}
			des.set(e, z)
			best, bestTau, bestOmega := candidate{index: -1}, 0.0, 0.0
			for _, k := range kinds {
				lo := nd
				if k != AO && lo < 1 {
					lo = 1 // a step from the first value is the constant
				}
				for T := max(lo, opt.From); T < n; T++ {
					if taken[T] || math.IsNaN(y[T]) {
						continue
					}
					om, s := des.at(&sc[k], T)
					tau := om * math.Sqrt(s) / sigma
					if math.Abs(tau) > math.Abs(bestTau) {
						best, bestTau, bestOmega = candidate{k, T}, tau, om
					}
				}
			}
			if best.index < 0 || math.Abs(bestTau) < C {
				break
			}
			added = append(added, best)
			taken[best.index] = true
			xr := x[best.kind]
			for t := best.index; t < n; t++ {
				if !math.IsNaN(e[t]) {
					e[t] -= bestOmega * xr[t-best.index]
				}
			}
			z = append(z, shifted(xr, best.index))
		}
		if len(added) == 0 {
			break
		}
		// re-estimate with the new effects; if the columns do not fit
		// together (e.g. collinear), drop the last found until they do
		var r *arima.Result
		var c [][]float64
		for len(added) > 0 {
			trial := append(append([]candidate(nil), found...), added...)
			r, c, err = fit(trial)
			if err == nil {
				found, res, cols = trial, r, c
				break
			}
			taken[added[len(added)-1].index] = false
			added = added[:len(added)-1]
		}
		if len(added) == 0 {
			break
		}
	}
	// joint estimation: drop the least significant effect until all pass
	for len(found) > 0 {
		taus := tValues(res, len(X), len(found))
		worst, wt := -1, math.Inf(1)
		for i, t := range taus {
			if a := math.Abs(t); a < wt || math.IsNaN(t) {
				worst, wt = i, a
				if math.IsNaN(t) {
					break
				}
			}
		}
		if wt >= C {
			break
		}
		trial := append(append([]candidate(nil), found[:worst]...), found[worst+1:]...)
		r, c, err := fit(trial)
		if err != nil {
			return nil, fmt.Errorf("outlier: refit without %s at %d: %w", found[worst].kind, found[worst].index, err)
		}
		found, res, cols = trial, r, c
	}
	if !sort.SliceIsSorted(found, func(a, b int) bool { return found[a].index < found[b].index }) {
		// refit in time order so that Outliers, X and Fit agree; the
		// model is the same, its columns permuted
		sort.Slice(found, func(a, b int) bool { return found[a].index < found[b].index })
		r, c, err := fit(found)
		if err != nil {
			return nil, fmt.Errorf("outlier: final fit: %w", err)
		}
		res, cols = r, c
	}
	out := &Result{Fit: res, X: cols, Critical: C, Delta: delta}
	taus := tValues(res, len(X), len(found))
	for i, c := range found {
		out.Outliers = append(out.Outliers, Outlier{
			Kind: c.kind, Index: c.index, Effect: res.Model.Beta[len(X)+i], Tau: taus[i],
			Name: name(c.kind, c.index, opt.Start, opt.Step),
		})
	}
	return out, nil
}

// tValues returns β̂_j / se(β̂_j) of the last k regression coefficients of
// res (the outlier columns), with nx caller columns before them, from the
// GLS covariance RegCov (whose first row is the mean or drift when
// estimated).
func tValues(res *arima.Result, nx, k int) []float64 {
	m := res.Model
	off := 0
	if m.Spec.Mean || m.Spec.Drift {
		off = 1
	}
	kc := off + len(m.Beta)
	out := make([]float64, k)
	for i := 0; i < k; i++ {
		j := off + nx + i
		v := math.NaN()
		if len(res.RegCov) == kc*kc {
			v = res.RegCov[j*kc+j]
		}
		out[i] = m.Beta[nx+i] / math.Sqrt(v)
	}
	return out
}

// name is "KIND@2006-01-02T15:04Z" (seconds added when not zero) or
// "KIND@index" without a clock.
func name(k Kind, i int, start time.Time, step time.Duration) string {
	if step <= 0 {
		return k.String() + "@" + strconv.Itoa(i)
	}
	t := start.Add(time.Duration(i) * step).UTC()
	layout := "2006-01-02T15:04Z"
	if t.Second() != 0 || t.Nanosecond() != 0 {
		layout = "2006-01-02T15:04:05Z"
	}
	return k.String() + "@" + t.Format(layout)
}
