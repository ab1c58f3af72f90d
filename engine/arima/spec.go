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
)

// Spec is the shape of a seasonal ARIMA(p,d,q)(P,D,Q)[s] model:
//
//	φ(B) Φ(B^s) (1−B)^d (1−B^s)^D (y_t − μ − δ·t) = θ(B) Θ(B^s) ε_t,  ε_t ~ N(0, σ²)
//
// with φ(z) = 1 − φ_1 z − … − φ_p z^p, θ(z) = 1 + θ_1 z + … + θ_q z^q and
// likewise Φ, Θ of orders P and Q in z = B^s. μ is estimated only when
// Mean is set (allowed only when d+D = 0), δ (the drift, a slope per time
// step) only when Drift is set (allowed only when d+D = 1).
type Spec struct {
	P, D, Q    int
	SP, SD, SQ int  // seasonal orders
	Period     int  // s; 0 when there is no seasonal part
	Mean       bool // estimate a process mean (only valid when D+SD == 0)
	Drift      bool // estimate a drift (only valid when D+SD == 1)
}

// Suffixes used by String and ParseSpec for the regression part when it
// differs from the default (a mean when d+D = 0, nothing otherwise).
const (
	suffixDrift    = " with drift"
	suffixZeroMean = " with zero mean"
)

// ParseSpec reads "ARIMA(p,d,q)" or "ARIMA(p,d,q)(P,D,Q)[s]", optionally
// followed by " with drift" or " with zero mean". Without a suffix the model
// has a mean when d+D = 0 and no drift. Spaces inside the brackets are
// allowed. The result is validated.
func ParseSpec(s string) (Spec, error) {
	var sp Spec
	t := strings.TrimSpace(s)
	drift, zeroMean := false, false
	switch {
	case strings.HasSuffix(t, suffixDrift):
		drift = true
		t = strings.TrimSpace(strings.TrimSuffix(t, suffixDrift))
	case strings.HasSuffix(t, suffixZeroMean):
		zeroMean = true
		t = strings.TrimSpace(strings.TrimSuffix(t, suffixZeroMean))
	}
	if !strings.HasPrefix(t, "ARIMA(") {
		return sp, &SpecError{Field: "syntax", Value: strconv.Quote(s), Reason: `want "ARIMA(p,d,q)" or "ARIMA(p,d,q)(P,D,Q)[s]"`}
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
			return sp, &SpecError{Field: "syntax", Value: strconv.Quote(s), Reason: "seasonal orders must be followed by the period in brackets, e.g. [12]"}
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

// parseTriple reads "(a,b,c)" at the start of t and returns the rest.
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

// String formats the specification so that ParseSpec(s.String()) == s for
// every valid s.
func (s Spec) String() string {
	var b strings.Builder
	b.WriteString("ARIMA(")
	b.WriteString(strconv.Itoa(s.P) + "," + strconv.Itoa(s.D) + "," + strconv.Itoa(s.Q) + ")")
	if s.Period > 0 || s.SP+s.SD+s.SQ > 0 {
		b.WriteString("(" + strconv.Itoa(s.SP) + "," + strconv.Itoa(s.SD) + "," + strconv.Itoa(s.SQ) + ")")
		b.WriteString("[" + strconv.Itoa(s.Period) + "]")
	}
	if s.Drift {
		b.WriteString(suffixDrift)
	} else if s.D+s.SD == 0 && !s.Mean {
		b.WriteString(suffixZeroMean)
	}
	return b.String()
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
		{"period", s.Period, MaxPeriod}} {
		if err := check(c.f, c.v, c.max); err != nil {
			return err
		}
	}
	if s.SP+s.SD+s.SQ > 0 && s.Period < 2 {
		return &SpecError{Field: "period", Value: strconv.Itoa(s.Period), Reason: "a seasonal part needs a period of at least 2"}
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
// p + q + P + Q, plus one for a mean or a drift.
func (s Spec) NumParams() int {
	k := s.P + s.Q + s.SP + s.SQ
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
