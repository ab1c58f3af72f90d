package transform

import (
	"fmt"
	"math"
	"strconv"
	"strings"

	"gonum.org/v1/gonum/integrate/quad"
)

// Name names a transform.
type Name string

// The transforms this package knows.
const (
	None      Name = "none"
	Log       Name = "log"
	BoxCox    Name = "boxcox"
	ScaledExp Name = "scaled-exp"
)

// maxExpArg is the largest z for which exp(z) is finite in float64 (log of the largest
// float64, ≈ 709.78; common practice).
var maxExpArg = math.Log(math.MaxFloat64)

// Transform is one invertible step from raw units x to the model scale w; see the package
// documentation for the formulas. The zero value of Loc and Scale means no scaling (Scale 0
// is read as 1). Lambda is used by boxcox only; NaN means "not chosen yet".
type Transform struct {
	Name   Name
	Lambda float64
	// Loc and Scale are the frozen z-score: applied after g for none, log and boxcox,
	// and before exp for scaled-exp. Scale must not be negative (0 means 1).
	Loc, Scale float64
}

// Parse reads a transform: "none", "log", "boxcox(λ)" with λ a finite number, "boxcox"
// (λ left NaN, to be chosen, e.g. by Guerrero) or "scaled-exp". Case and surrounding spaces
// are ignored. "auto" is not a transform: choosing one is the caller's business.
func Parse(s string) (Transform, error) {
	v := strings.ToLower(strings.TrimSpace(s))
	switch Name(v) {
	case None, Log, ScaledExp:
		return Transform{Name: Name(v), Scale: 1}, nil
	case BoxCox:
		return Transform{Name: BoxCox, Lambda: math.NaN(), Scale: 1}, nil
	}
	if arg, ok := strings.CutPrefix(v, string(BoxCox)+"("); ok {
		if arg, ok = strings.CutSuffix(arg, ")"); ok {
			lambda, err := strconv.ParseFloat(strings.TrimSpace(arg), 64)
			if err != nil || math.IsNaN(lambda) || math.IsInf(lambda, 0) {
				return Transform{}, fmt.Errorf("transform: parse %q: λ %q is not a finite number: %w", s, arg, ErrBadArgument)
			}
			return Transform{Name: BoxCox, Lambda: lambda, Scale: 1}, nil
		}
	}
	return Transform{}, fmt.Errorf("transform: parse %q: want none, log, boxcox, boxcox(λ) or scaled-exp: %w", s, ErrUnknown)
}

// String gives the transform's spec as Parse reads it: the name, and λ for a chosen boxcox
// (shortest form that parses back to the same float64). Loc and Scale are fitted state, not
// part of the spec, and are not printed.
func (t Transform) String() string {
	if t.Name == BoxCox && !math.IsNaN(t.Lambda) {
		return string(BoxCox) + "(" + strconv.FormatFloat(t.Lambda, 'g', -1, 64) + ")"
	}
	return string(t.Name)
}

// scale returns the effective scale (0 read as 1).
func (t Transform) scale() float64 {
	if t.Scale == 0 {
		return 1
	}
	return t.Scale
}

// Forward maps a raw value x to the model scale w. NaN (missing) maps to NaN without error.
// A value outside the domain returns ErrDomain, a scaled-exp argument beyond ≈ 709.78
// returns ErrOverflow; both errors name the value.
func (t Transform) Forward(x float64) (float64, error) {
	if math.IsNaN(x) {
		return x, nil
	}
	if math.IsInf(x, 0) {
		return 0, fmt.Errorf("transform: %s of %v: %w", t, x, ErrDomain)
	}
	s := t.scale()
	switch t.Name {
	case None:
		return (x - t.Loc) / s, nil
	case Log:
		if x <= 0 {
			return 0, fmt.Errorf("transform: log of %v (want x > 0): %w", x, ErrDomain)
		}
		return (math.Log(x) - t.Loc) / s, nil
	case BoxCox:
		if math.IsNaN(t.Lambda) || math.IsInf(t.Lambda, 0) {
			return 0, fmt.Errorf("transform: boxcox λ = %v: %w", t.Lambda, ErrNoLambda)
		}
		if x <= 0 {
			return 0, fmt.Errorf("transform: %s of %v (want x > 0): %w", t, x, ErrDomain)
		}
		return (boxcox(x, t.Lambda) - t.Loc) / s, nil
	case ScaledExp:
		z := (x - t.Loc) / s
		if z > maxExpArg {
			return 0, fmt.Errorf("transform: scaled-exp of %v: exp(%v) (Loc %v, Scale %v): %w", x, z, t.Loc, s, ErrOverflow)
		}
		return math.Exp(z), nil
	}
	return 0, fmt.Errorf("transform: %q: %w", string(t.Name), ErrUnknown)
}

// boxcox is g(x) = (x^λ − 1)/λ, log x at λ = 0, computed as expm1(λ log x)/λ for accuracy
// near λ = 0.
func boxcox(x, lambda float64) float64 {
	if lambda == 0 {
		return math.Log(x)
	}
	return math.Expm1(lambda*math.Log(x)) / lambda
}

// ForwardSlice writes Forward(x[i]) to dst[i]; NaN stays NaN. dst and x may be the same
// slice. It stops at the first bad value and returns an error naming its index. A length
// mismatch is a programmer error and panics.
func (t Transform) ForwardSlice(dst, x []float64) error {
	if len(dst) != len(x) {
		panic("transform: ForwardSlice: len(dst) != len(x)")
	}
	for i, v := range x {
		w, err := t.Forward(v)
		if err != nil {
			return fmt.Errorf("transform: observation %d: %w", i, err)
		}
		dst[i] = w
	}
	return nil
}

// Inverse maps a model-scale value w back to raw units:
//
//	none:       x = Loc + Scale·w
//	log:        x = exp(Loc + Scale·w)
//	boxcox:     x = (λu + 1)^{1/λ},  u = Loc + Scale·w   (needs λu + 1 > 0)
//	scaled-exp: x = Loc + Scale·log w                   (needs w > 0)
//
// ok is false when w is outside the inverse's domain, when the result is not a finite
// float64, or when w is NaN; x is then meaningless (NaN). Inverse never returns NaN with ok.
func (t Transform) Inverse(w float64) (x float64, ok bool) {
	s := t.scale()
	switch t.Name {
	case None:
		return t.invNone(s, w)
	case Log:
		return t.invLog(s, w)
	case BoxCox:
		return t.invBoxCox(s, w)
	case ScaledExp:
		return t.invScaledExp(s, w)
	}
	return math.NaN(), false
}

// InverseSlice sets x[i], ok[i] = Inverse(w[i]) for every i, choosing
// the formula once for the whole slice (a forecast maps some hundred
// values at each bucket close). A length mismatch is a programmer error
// and panics.
func (t Transform) InverseSlice(x []float64, ok []bool, w []float64) {
	if len(x) != len(w) || len(ok) != len(w) {
		panic("transform: InverseSlice: lengths differ")
	}
	s := t.scale()
	switch t.Name {
	case None:
		for i, v := range w {
			x[i], ok[i] = t.invNone(s, v)
		}
	case Log:
		for i, v := range w {
			x[i], ok[i] = t.invLog(s, v)
		}
	case BoxCox:
		for i, v := range w {
			x[i], ok[i] = t.invBoxCox(s, v)
		}
	case ScaledExp:
		for i, v := range w {
			x[i], ok[i] = t.invScaledExp(s, v)
		}
	default:
		for i := range w {
			x[i], ok[i] = math.NaN(), false
		}
	}
}

func (t Transform) invNone(s, w float64) (float64, bool) { return finite(t.Loc + s*w) }

func (t Transform) invLog(s, w float64) (float64, bool) { return finite(math.Exp(t.Loc + s*w)) }

func (t Transform) invBoxCox(s, w float64) (float64, bool) {
	u := t.Loc + s*w
	if t.Lambda == 0 {
		return finite(math.Exp(u))
	}
	if !(t.Lambda*u+1 > 0) { // also false for NaN
		return math.NaN(), false
	}
	return finite(math.Exp(math.Log1p(t.Lambda*u) / t.Lambda))
}

func (t Transform) invScaledExp(s, w float64) (float64, bool) {
	if !(w > 0) { // also false for NaN
		return math.NaN(), false
	}
	return finite(t.Loc + s*math.Log(w))
}

// finite returns x, true for a finite x and NaN, false otherwise (a NaN
// w propagates to a NaN x, so it lands here too).
func finite(x float64) (float64, bool) {
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return math.NaN(), false
	}
	return x, true
}

// Median is the back-transformed median of a forecast distribution whose median on the model
// scale is w. Every inverse is monotone, so it is Inverse(w).
func (t Transform) Median(w float64) (float64, bool) { return t.Inverse(w) }

// ghNodes is the number of Gauss–Hermite nodes used by Mean for scaled-exp.
const ghNodes = 40

// ghX and ghW are the Gauss–Hermite nodes and weights for ∫ e^{−t²} f(t) dt, scaled so that
// Σ ghW[i]·f(√2·ghX[i]) = E f(Z) for Z ~ N(0, 1). Read-only after init.
var ghX, ghW [ghNodes]float64

func init() {
	quad.Hermite{}.FixedLocations(ghX[:], ghW[:], math.Inf(-1), math.Inf(1))
	for i := range ghX {
		ghX[i] *= math.Sqrt2
		ghW[i] /= math.SqrtPi
	}
}

// Mean is the back-transformed mean of a forecast distribution N(w, variance) on the model
// scale. With u = Loc + Scale·w and σ² = Scale²·variance on the scale of g:
//
//	none:       Loc + Scale·w
//	log:        exp(u)·(1 + σ²/2)
//	boxcox:     (λu+1)^{1/λ}·[1 + σ²(1−λ) / (2(λu+1)²)]      (exp(u)(1 + σ²/2) at λ = 0)
//	scaled-exp: Loc + Scale·E[log W], W ~ N(w, variance), by 40-node Gauss–Hermite quadrature
//
// The log and boxcox forms are the second-order Taylor expansion of E g⁻¹(U). For scaled-exp
// log W is undefined for W ≤ 0, so the mean is reported (ok) only when every quadrature node
// is positive, i.e. w > 11.46·√variance, where P(W ≤ 0) < 2e-30. ok is false for a negative or
// NaN variance, outside the domain, or for a result that is not finite.
//
// References:
//   - Guerrero, V. M. (1993). Time-series analysis supported by power transformations.
//     Journal of Forecasting 12(1), 37–48 (bias-adjusted back-transform).
//   - Golub, G. H. & Welsch, J. H. (1969). Calculation of Gauss quadrature rules.
//     Mathematics of Computation 23, 221–230.
func (t Transform) Mean(w, variance float64) (float64, bool) {
	if !(variance >= 0) || math.IsInf(variance, 0) {
		return math.NaN(), false
	}
	s := t.scale()
	var m float64
	switch t.Name {
	case None:
		return t.Inverse(w)
	case Log, BoxCox:
		med, ok := t.Inverse(w)
		if !ok {
			return med, false
		}
		s2 := s * s * variance
		if t.Name == Log || t.Lambda == 0 {
			m = med * (1 + s2/2)
			break
		}
		b := t.Lambda*(t.Loc+s*w) + 1
		m = med * (1 + s2*(1-t.Lambda)/(2*b*b))
	case ScaledExp:
		if math.IsNaN(w) {
			return math.NaN(), false
		}
		sd := math.Sqrt(variance)
		var e float64
		for i := range ghX {
			z := ghX[i]
			v := w + sd*z
			if !(v > 0) {
				return math.NaN(), false
			}
			e += ghW[i] * math.Log(v)
		}
		m = t.Loc + s*e
	default:
		return math.NaN(), false
	}
	if math.IsNaN(m) || math.IsInf(m, 0) {
		return math.NaN(), false
	}
	return m, true
}

// LogJacobian returns Σ log|dw/dx| over the non-missing x: adding it to a log-likelihood on
// the model scale gives the log-likelihood of the raw series.
//
//	none:       −n·log Scale
//	log:        −Σ log x − n·log Scale
//	boxcox:     (λ − 1)·Σ log x − n·log Scale
//	scaled-exp: Σ (x − Loc)/Scale − n·log Scale
//
// A value outside the domain (x ≤ 0 for log and boxcox) gives NaN: pass the series through
// ForwardSlice first.
//
// References:
//   - Box, G. E. P. & Cox, D. R. (1964). An analysis of transformations. Journal of the Royal
//     Statistical Society B 26(2), 211–252 (the Jacobian term of the likelihood).
func (t Transform) LogJacobian(x []float64) float64 {
	s := t.scale()
	var sum float64
	var n int
	for _, v := range x {
		if math.IsNaN(v) {
			continue
		}
		n++
		switch t.Name {
		case None:
		case Log, BoxCox:
			if !(v > 0) {
				return math.NaN()
			}
			if t.Name == Log {
				sum -= math.Log(v)
			} else {
				sum += (t.Lambda - 1) * math.Log(v)
			}
		case ScaledExp:
			sum += (v - t.Loc) / s
		default:
			return math.NaN()
		}
	}
	return sum - float64(n)*math.Log(math.Abs(s))
}

// Increasing reports whether the inverse is increasing, so that a band's lower endpoint maps
// to the lower endpoint in raw units. It is false only for a negative Scale.
func (t Transform) Increasing() bool { return t.scale() > 0 }

// FloorAt raises every non-missing value below floor to floor, in place. A counter's
// forecasts and band endpoints never fall below its last value: the caller applies
// FloorAt(values, last) after inversion for series of kind counter.
func FloorAt(values []float64, floor float64) {
	for i, v := range values {
		if v < floor {
			values[i] = floor
		}
	}
}
