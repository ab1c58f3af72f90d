package arima

import (
	"strconv"
	"strings"
)

// Limits on the orders accepted by Validate. They keep the state dimension
// and the optimiser's work bounded; every model forewarn selects lies well
// inside them.
const (
	MaxOrder         = 20   // p and q
	MaxSeasonalOrder = 4    // P and Q
	MaxDiff          = 2    // d
	MaxSeasonalDiff  = 1    // D
	MaxPeriod        = 1000 // s
	MaxRegressors    = MaxFourierTerms
)

// Spec is the shape of a seasonal ARIMA model, in the multiplicative
// notation of Box & Jenkins (1976, ch. 9), orders (p,d,q)×(P,D,Q) with
// seasonal period s:
//
//	φ(B) Φ(B^s) (1−B)^d (1−B^s)^D (y_t − μ − δ·t) = θ(B) Θ(B^s) ε_t,  ε_t ~ N(0, σ²)
//
// with φ(z) = 1 − φ_1 z − … − φ_p z^p, θ(z) = 1 + θ_1 z + … + θ_q z^q and
// likewise Φ, Θ of orders P and Q in z = B^s. μ is estimated only when
// Mean is set (allowed only when d+D = 0), δ (the drift, a slope per time
// step) only when Drift is set (allowed only when d+D = 1).
//
// NewSpec builds a validated Spec from orders, a period and a Constant;
// ParseOrders reads the orders as written in configuration and on the
// command line ("1,1,1" or "0,1,1 x 0,1,1"). Label renders a Spec for
// people ("ARIMA 0,1,1 × 0,1,1 s=12").
type Spec struct {
	P, D, Q    int
	SP, SD, SQ int  // seasonal orders
	Period     int  // s; 0 when there is no seasonal part
	Mean       bool // estimate a process mean (only valid when D+SD == 0)
	Drift      bool // estimate a drift (only valid when D+SD == 1)
	// NX is the number of external regressors x_t (Fourier terms, outlier
	// effects, …) with coefficients Model.Beta: the model is then
	// y_t = μ + δ·t + x_tᵀβ + u_t with u_t the ARIMA process (regression
	// with ARIMA errors). Zero for a plain ARIMA model.
	NX int
}

// Constant says which constant term a model estimates.
type Constant int

// The constants. The zero value is ConstantAuto.
const (
	// ConstantAuto: for a fixed order, a mean when d+D = 0 and nothing
	// otherwise; an order search tries the constant on and off.
	ConstantAuto Constant = iota
	// ConstantNone: no constant term.
	ConstantNone
	// ConstantMean: a process mean μ; needs d+D = 0.
	ConstantMean
	// ConstantDrift: a drift δ, a slope per time step; needs d+D = 1.
	ConstantDrift
)

var constantNames = [...]string{ConstantAuto: "auto", ConstantNone: "none", ConstantMean: "mean", ConstantDrift: "drift"}

// String returns "auto", "none", "mean" or "drift".
func (c Constant) String() string {
	if c >= 0 && int(c) < len(constantNames) {
		return constantNames[c]
	}
	return "Constant(" + strconv.Itoa(int(c)) + ")"
}

// ParseConstant reads "auto", "none", "mean" or "drift"; "" is auto.
func ParseConstant(s string) (Constant, error) {
	t := strings.TrimSpace(s)
	if t == "" {
		return ConstantAuto, nil
	}
	for c, n := range constantNames {
		if t == n {
			return Constant(c), nil
		}
	}
	return ConstantAuto, &SpecError{Field: "constant", Value: strconv.Quote(s), Reason: "want auto, none, mean or drift"}
}

// maxOrderDigits bounds the digits of one order in ParseOrders, so that a
// long run of digits is refused as syntax before it could overflow.
const maxOrderDigits = 6

// ParseOrders reads the orders of a model as "p,d,q" or "p,d,q x P,D,Q"
// (the seasonal separator is the letter x or the sign ×; white space is
// allowed between any two tokens). seasonal reports whether the seasonal
// orders were given. Only the syntax is checked here; NewSpec checks the
// values.
func ParseOrders(s string) (ord, sord [3]int, seasonal bool, err error) {
	t := strings.ReplaceAll(s, "×", "x")
	parts := strings.Split(t, "x")
	if len(parts) > 2 {
		return ord, sord, false, &SpecError{Field: "syntax", Value: strconv.Quote(s), Reason: `more than one "x"; want "p,d,q" or "p,d,q x P,D,Q"`}
	}
	if ord, err = parseOrderTriple(parts[0], s); err != nil {
		return ord, sord, false, err
	}
	if len(parts) == 2 {
		if sord, err = parseOrderTriple(parts[1], s); err != nil {
			return ord, sord, false, err
		}
		seasonal = true
	}
	return ord, sord, seasonal, nil
}

// parseOrderTriple reads "a,b,c" (white space around each number).
func parseOrderTriple(t, orig string) ([3]int, error) {
	var out [3]int
	f := strings.Split(t, ",")
	if len(f) != 3 {
		return out, &SpecError{Field: "syntax", Value: strconv.Quote(orig), Reason: `want three orders separated by commas, as in "p,d,q" or "p,d,q x P,D,Q"`}
	}
	for i, p := range f {
		p = strings.TrimSpace(p)
		if p == "" || len(p) > maxOrderDigits || strings.TrimLeft(p, "0123456789") != "" {
			return out, &SpecError{Field: "syntax", Value: strconv.Quote(p), Reason: "an order is a whole number such as 0, 1 or 2"}
		}
		out[i], _ = strconv.Atoi(p)
	}
	return out, nil
}

// NewSpec returns the validated Spec of orders ord = (p,d,q), seasonal
// orders sord = (P,D,Q) with period s (0: none; sord must then be zero)
// and constant c. ConstantAuto gives a mean when d+D = 0 and no constant
// otherwise. The error is a *SpecError.
func NewSpec(ord, sord [3]int, period int, c Constant) (Spec, error) {
	s := Spec{P: ord[0], D: ord[1], Q: ord[2], SP: sord[0], SD: sord[1], SQ: sord[2], Period: period}
	nd := s.D + s.SD
	switch c {
	case ConstantAuto:
		s.Mean = nd == 0
	case ConstantNone:
	case ConstantMean:
		if nd != 0 {
			return s, &SpecError{Field: "mean", Reason: "a mean is only estimated when d+D = 0, here d+D = " + strconv.Itoa(nd)}
		}
		s.Mean = true
	case ConstantDrift:
		if nd != 1 {
			return s, &SpecError{Field: "drift", Reason: "a drift is only estimated when d+D = 1, here d+D = " + strconv.Itoa(nd)}
		}
		s.Drift = true
	default:
		return s, &SpecError{Field: "constant", Value: c.String(), Reason: "want auto, none, mean or drift"}
	}
	return s, s.Validate()
}

// seasonalPart reports whether the Spec has a seasonal part to show.
func (s Spec) seasonalPart() bool { return s.Period > 0 || s.SP+s.SD+s.SQ > 0 }

func triple(a, b, c int) string {
	return strconv.Itoa(a) + "," + strconv.Itoa(b) + "," + strconv.Itoa(c)
}

// Orders returns the orders as "p,d,q" or "p,d,q x P,D,Q", the syntax
// ParseOrders reads. The period and the constant are not part of it.
func (s Spec) Orders() string {
	o := triple(s.P, s.D, s.Q)
	if s.seasonalPart() {
		o += " x " + triple(s.SP, s.SD, s.SQ)
	}
	return o
}

// ConstantName returns "mean", "drift" or "none": the constant term the
// Spec estimates.
func (s Spec) ConstantName() string {
	switch {
	case s.Mean:
		return ConstantMean.String()
	case s.Drift:
		return ConstantDrift.String()
	}
	return ConstantNone.String()
}

// Label renders the Spec for people:
//
//	ARIMA 1,1,1
//	ARIMA 0,1,1 × 0,1,1 s=12
//	ARIMA 2,0,0 + mean
//	ARIMA 1,1,0 × 0,1,0 s=24 + drift
//
// the orders p,d,q, then "×", the seasonal orders P,D,Q and the period s
// when there is a seasonal part, then "+ mean" or "+ drift" when the model
// estimates one (no suffix: no constant term).
func (s Spec) Label() string {
	var b strings.Builder
	b.WriteString("ARIMA ")
	b.WriteString(triple(s.P, s.D, s.Q))
	if s.seasonalPart() {
		b.WriteString(" × ")
		b.WriteString(triple(s.SP, s.SD, s.SQ))
		b.WriteString(" s=")
		b.WriteString(strconv.Itoa(s.Period))
	}
	if s.Mean {
		b.WriteString(" + mean")
	} else if s.Drift {
		b.WriteString(" + drift")
	}
	switch {
	case s.NX == 1:
		b.WriteString(" + 1 regressor")
	case s.NX > 1:
		b.WriteString(" + " + strconv.Itoa(s.NX) + " regressors")
	}
	return b.String()
}

// String returns Label().
func (s Spec) String() string { return s.Label() }

// Suffixes of the format-1 spelling read by ParseLegacySpec.
const (
	legacyDrift    = " with drift"
	legacyZeroMean = " with zero mean"
)

// Replacement is what replaces a model written in forewarn's first
// spelling: the orders in today's syntax, the seasonal period in steps (0
// for none) and the constant where it differs from auto ("" otherwise).
// Known is false when the old string could not be read, and then only the
// shape of the replacement can be named.
type Replacement struct {
	Orders   string
	Period   int
	Constant string
	Known    bool
}

// LegacyReplacement tells whether s is in forewarn's first spelling
// ("ARIMA(…)…") and, if so, what replaces it. The configuration and the
// command line word it in their own terms.
func LegacyReplacement(s string) (r Replacement, old bool) {
	if !strings.HasPrefix(strings.TrimSpace(s), "ARIMA(") {
		return r, false
	}
	sp, err := ParseLegacySpec(s)
	if err != nil {
		return r, true
	}
	r = Replacement{Orders: sp.Orders(), Period: sp.Period, Known: true}
	switch {
	case sp.Drift:
		r.Constant = "drift"
	case sp.D+sp.SD == 0 && !sp.Mean:
		r.Constant = "none"
	}
	return r, true
}

// ParseLegacySpec reads the spelling of a model that forewarn used before
// its own syntax: "ARIMA(p,d,q)" or "ARIMA(p,d,q)(P,D,Q)[s]", optionally
// followed by " with drift" or " with zero mean"; without a suffix the
// model has a mean when d+D = 0. It serves only to read state records of
// format version 1 and to word the error for an old spelling in a
// configuration or on a command line. The result is validated.
func ParseLegacySpec(s string) (Spec, error) {
	var sp Spec
	t := strings.TrimSpace(s)
	drift, zeroMean := false, false
	switch {
	case strings.HasSuffix(t, legacyDrift):
		drift = true
		t = strings.TrimSpace(strings.TrimSuffix(t, legacyDrift))
	case strings.HasSuffix(t, legacyZeroMean):
		zeroMean = true
		t = strings.TrimSpace(strings.TrimSuffix(t, legacyZeroMean))
	}
	if !strings.HasPrefix(t, "ARIMA(") {
		return sp, &SpecError{Field: "syntax", Value: strconv.Quote(s), Reason: "not the old bracketed spelling"}
	}
	t = t[len("ARIMA"):]
	ord, rest, err := parseTriple(t, s)
	if err != nil {
		return sp, err
	}
	sp.P, sp.D, sp.Q = ord[0], ord[1], ord[2]
	if rest != "" {
		sord, rest2, err := parseTriple(rest, s)
		if err != nil {
			return sp, err
		}
		sp.SP, sp.SD, sp.SQ = sord[0], sord[1], sord[2]
		if !strings.HasPrefix(rest2, "[") || !strings.HasSuffix(rest2, "]") {
			return sp, &SpecError{Field: "syntax", Value: strconv.Quote(s), Reason: "seasonal orders must be followed by the period in brackets"}
		}
		per, err := strconv.Atoi(strings.TrimSpace(rest2[1 : len(rest2)-1]))
		if err != nil {
			return sp, &SpecError{Field: "period", Value: strconv.Quote(rest2[1 : len(rest2)-1]), Reason: "not an integer"}
		}
		sp.Period = per
	}
	nd := sp.D + sp.SD
	sp.Mean = nd == 0 && !zeroMean
	sp.Drift = drift
	if zeroMean && nd != 0 {
		return sp, &SpecError{Field: "mean", Reason: "\"with zero mean\" applies only when d+D = 0"}
	}
	return sp, sp.Validate()
}

// parseTriple reads "(a,b,c)" at the start of t and returns the rest
// (ParseLegacySpec).
func parseTriple(t, orig string) ([3]int, string, error) {
	var out [3]int
	if !strings.HasPrefix(t, "(") {
		return out, "", &SpecError{Field: "syntax", Value: strconv.Quote(orig), Reason: "expected '(' before the orders"}
	}
	end := strings.IndexByte(t, ')')
	if end < 0 {
		return out, "", &SpecError{Field: "syntax", Value: strconv.Quote(orig), Reason: "missing ')'"}
	}
	parts := strings.Split(t[1:end], ",")
	if len(parts) != 3 {
		return out, "", &SpecError{Field: "syntax", Value: strconv.Quote(orig), Reason: "want three orders separated by commas"}
	}
	for i, p := range parts {
		v, err := strconv.Atoi(strings.TrimSpace(p))
		if err != nil {
			return out, "", &SpecError{Field: "syntax", Value: strconv.Quote(strings.TrimSpace(p)), Reason: "order is not an integer"}
		}
		out[i] = v
	}
	return out, t[end+1:], nil
}

// Validate checks the orders against the limits above and the
// consistency of the seasonal part, mean and drift. The error is a
// *SpecError naming the first bad part.
func (s Spec) Validate() error {
	check := func(field string, v, max int) error {
		if v < 0 {
			return &SpecError{Field: field, Value: strconv.Itoa(v), Reason: "must not be negative"}
		}
		if v > max {
			return &SpecError{Field: field, Value: strconv.Itoa(v), Reason: "exceeds the limit of " + strconv.Itoa(max)}
		}
		return nil
	}
	for _, c := range []struct {
		f      string
		v, max int
	}{{"p", s.P, MaxOrder}, {"d", s.D, MaxDiff}, {"q", s.Q, MaxOrder},
		{"P", s.SP, MaxSeasonalOrder}, {"D", s.SD, MaxSeasonalDiff}, {"Q", s.SQ, MaxSeasonalOrder},
		{"period", s.Period, MaxPeriod}, {"regressors", s.NX, MaxRegressors}} {
		if err := check(c.f, c.v, c.max); err != nil {
			return err
		}
	}
	if s.SP+s.SD+s.SQ > 0 && s.Period < 2 {
		return &SpecError{Field: "period", Value: strconv.Itoa(s.Period), Reason: "seasonal orders need a period of at least 2"}
	}
	if s.Period == 1 {
		return &SpecError{Field: "period", Value: "1", Reason: "a period must be at least 2 (use 0 for no seasonal part)"}
	}
	nd := s.D + s.SD
	if s.Mean && nd != 0 {
		return &SpecError{Field: "mean", Reason: "a mean is only estimated when d+D = 0"}
	}
	if s.Drift && nd != 1 {
		return &SpecError{Field: "drift", Reason: "a drift is only estimated when d+D = 1"}
	}
	return nil
}

// NumParams is the number k of estimated coefficients (excluding σ²):
// p + q + P + Q, plus one for a mean or a drift, plus NX.
func (s Spec) NumParams() int {
	k := s.P + s.Q + s.SP + s.SQ + s.NX
	if s.Mean {
		k++
	}
	if s.Drift {
		k++
	}
	return k
}

// nd is the number of levels used up by differencing, d + s·D.
func (s Spec) nd() int { return s.D + s.Period*s.SD }

// arDegree and maDegree are the degrees of the multiplied-out polynomials.
func (s Spec) arDegree() int { return s.P + s.Period*s.SP }
func (s Spec) maDegree() int { return s.Q + s.Period*s.SQ }

// stateDim is r = max(p + sP, q + sQ + 1), the dimension of the ARMA block.
func (s Spec) stateDim() int {
	r := s.arDegree()
	if m := s.maDegree() + 1; m > r {
		r = m
	}
	return r
}
