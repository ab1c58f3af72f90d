package auto

import (
	"errors"
	"fmt"
	"math"

	"forewarn/engine/arima"
	"forewarn/engine/stationarity"
	"forewarn/engine/transform"
)

// selector holds the state of one Select call.
type selector struct {
	y     []float64
	o     Options
	tried []Candidate
	nobs  int // observed values of y

	d, sd    int  // differencing orders shared by every transform
	seasonal bool // whether seasonal terms (and D) are allowed
	period   int  // s when seasonal, else 0
}

// scaled is one candidate transform with the series on its scale.
type scaled struct {
	tr    transform.Transform
	w     []float64 // y on the model scale
	jac   float64   // Σ log|g'(x)| over the observations in the likelihood
	cache map[arima.Spec]*fitted
	fits  int
}

// fitted is one accepted fit.
type fitted struct {
	spec arima.Spec
	res  *arima.Result
	aicc float64 // raw scale
}

func (s *selector) countObs() {
	s.nobs = 0
	for _, v := range s.y {
		if !math.IsNaN(v) {
			s.nobs++
		}
	}
}

// cold runs the full procedure of the package documentation.
func (s *selector) cold() (*Choice, error) {
	s.countObs()
	cands, err := s.transforms()
	if err != nil {
		return nil, err
	}
	var fixed *arima.Spec
	if s.o.Model != "auto" {
		spec, err := s.o.fixedSpec()
		if err != nil {
			return nil, err
		}
		fixed = &spec
		s.d, s.sd, s.period = spec.D, spec.SD, spec.Period
		s.seasonal = spec.Period >= 2
	} else {
		s.differencing(cands)
	}
	for _, c := range cands {
		c.jac = jacobian(c.tr, s.y, s.d+s.period*s.sd)
		c.cache = map[arima.Spec]*fitted{}
	}

	if fixed != nil {
		var best *fitted
		var bestC *scaled
		for _, c := range cands {
			if f := s.fit(c, *fixed, nil); f != nil && (best == nil || f.aicc < best.aicc) {
				best, bestC = f, c
			}
		}
		return s.choice(bestC, best)
	}

	// Transform choice at the best starting model of the base transform.
	base := s.base(cands)
	var best *fitted
	for _, spec := range s.starts() {
		if f := s.fit(base, spec, nil); f != nil && (best == nil || f.aicc < best.aicc) {
			best = f
		}
	}
	if best == nil {
		return s.choice(nil, nil)
	}
	bestC := base
	for _, c := range cands {
		if c == base {
			continue
		}
		if f := s.fit(c, best.spec, nil); f != nil && f.aicc < best.aicc {
			best, bestC = f, c
		}
	}
	best = s.stepwise(bestC, best)
	// The chosen order under every other transform.
	for _, c := range cands {
		if c == bestC {
			continue
		}
		if f := s.fit(c, best.spec, nil); f != nil && f.aicc < best.aicc {
			best, bestC = f, c
		}
	}
	return s.choice(bestC, best)
}

// choice builds the Choice, or ErrNoModel when nothing was accepted.
func (s *selector) choice(c *scaled, f *fitted) (*Choice, error) {
	if f == nil {
		reason := "no candidate model could be fitted"
		for i := len(s.tried) - 1; i >= 0; i-- {
			if s.tried[i].Err != "" {
				reason = s.tried[i].Spec.Label() + ", transform " + s.tried[i].Transform + ": " + s.tried[i].Err
				break
			}
		}
		return nil, fmt.Errorf("%w: %s", ErrNoModel, reason)
	}
	return &Choice{Spec: f.spec, Transform: c.tr, Result: f.res, RawAICc: f.aicc, Tried: s.tried}, nil
}

// transforms returns the candidate transforms, frozen, with the series on
// their scale.
func (s *selector) transforms() ([]*scaled, error) {
	var trs []transform.Transform
	if s.o.Transform == "auto" {
		trs = append(trs, transform.Transform{Name: transform.None})
		if allPositive(s.y) {
			trs = append(trs, transform.Transform{Name: transform.Log})
			if lam, err := transform.Guerrero(s.y, max(s.o.Period, 2), -1, 2); err == nil {
				trs = append(trs, transform.Transform{Name: transform.BoxCox, Lambda: lam})
			}
		}
		if concaveGrowth(s.y) {
			trs = append(trs, transform.Transform{Name: transform.ScaledExp})
		}
	} else {
		t, err := transform.Parse(s.o.Transform)
		if err != nil {
			return nil, fmt.Errorf("%w: transform %q: %w", ErrBadOptions, s.o.Transform, err)
		}
		if t.Name == transform.BoxCox && math.IsNaN(t.Lambda) {
			lam, err := transform.Guerrero(s.y, max(s.o.Period, 2), -1, 2)
			if err != nil {
				return nil, fmt.Errorf("%w: boxcox λ: %w", ErrDomain, err)
			}
			t.Lambda = lam
		}
		trs = append(trs, t)
	}
	var out []*scaled
	var firstErr error
	for _, t := range trs {
		t = transform.Freeze(t, s.y)
		w := make([]float64, len(s.y))
		if err := t.ForwardSlice(w, s.y); err != nil {
			if firstErr == nil {
				firstErr = err
			}
			continue
		}
		out = append(out, &scaled{tr: t, w: w})
	}
	if len(out) == 0 {
		return nil, fmt.Errorf("%w: %w", ErrDomain, firstErr)
	}
	return out, nil
}

// differencing chooses d and D once for every candidate (package doc,
// step 2).
func (s *selector) differencing(cands []*scaled) {
	x := interpolate(s.base(cands).w)
	p := s.o.Period
	s.seasonal = p >= 2 && s.nobs >= 2*p+2
	s.sd = 0
	if s.seasonal {
		s.period = p
		if D, err := stationarity.NSDiffs(x, p, 1); err == nil {
			s.sd = D
		}
	}
	for i := 0; i < s.sd; i++ {
		x = diff(x, p)
	}
	s.d = 0
	if d, err := stationarity.NDiffs(x, 0.05, 2); err == nil {
		s.d = d
	}
}

// base is the variance-stabilised candidate: boxcox when there is one,
// else the first candidate (none, or the fixed transform).
func (s *selector) base(cands []*scaled) *scaled {
	for _, c := range cands {
		if c.tr.Name == transform.BoxCox {
			return c
		}
	}
	return cands[0]
}

// spec builds the spec of orders (p, q)(P, Q) at the shared differencing
// orders, with or without the constant.
func (s *selector) spec(p, q, sp, sq int, constant bool) arima.Spec {
	sp2 := arima.Spec{P: p, D: s.d, Q: q, SP: sp, SD: s.sd, SQ: sq}
	if sp+s.sd+sq > 0 {
		sp2.Period = s.period
	}
	if constant {
		switch s.d + s.sd {
		case 0:
			sp2.Mean = true
		case 1:
			sp2.Drift = true
		}
	}
	return sp2
}

func (s *selector) constantAllowed() bool {
	return s.d+s.sd <= 1 && s.o.Constant != arima.ConstantNone
}

// starts are the starting models of Hyndman & Khandakar (2008), with a
// constant when d + D ≤ 1.
func (s *selector) starts() []arima.Spec {
	c := s.constantAllowed()
	var out []arima.Spec
	add := func(p, q, sp, sq int) {
		if !s.seasonal {
			sp, sq = 0, 0
		}
		if s.inBounds(p, q, sp, sq) {
			out = append(out, s.spec(p, q, sp, sq, c))
		}
	}
	add(2, 2, 1, 1)
	add(0, 0, 0, 0)
	add(1, 0, 1, 0)
	add(0, 1, 0, 1)
	return out
}

func (s *selector) inBounds(p, q, sp, sq int) bool {
	if !s.seasonal && sp+sq > 0 {
		return false
	}
	return p >= 0 && q >= 0 && sp >= 0 && sq >= 0 &&
		p <= s.o.MaxP && q <= s.o.MaxQ && sp <= s.o.MaxSP && sq <= s.o.MaxSQ
}

// stepwise runs the neighbourhood search of Hyndman & Khandakar (2008)
// from cur (package doc, step 4).
func (s *selector) stepwise(c *scaled, cur *fitted) *fitted {
	type move struct{ dp, dq, dsp, dsq int }
	moves := []move{
		{-1, 0, 0, 0}, {1, 0, 0, 0}, {0, -1, 0, 0}, {0, 1, 0, 0},
		{0, 0, -1, 0}, {0, 0, 1, 0}, {0, 0, 0, -1}, {0, 0, 0, 1},
		{-1, -1, 0, 0}, {1, 1, 0, 0}, {0, 0, -1, -1}, {0, 0, 1, 1},
	}
	for improved := true; improved && c.fits < maxModels; {
		improved = false
		sp := cur.spec
		constant := sp.Mean || sp.Drift
		var next []arima.Spec
		for _, m := range moves {
			p, q, P, Q := sp.P+m.dp, sp.Q+m.dq, sp.SP+m.dsp, sp.SQ+m.dsq
			if s.inBounds(p, q, P, Q) {
				next = append(next, s.spec(p, q, P, Q, constant))
			}
		}
		if s.constantAllowed() {
			next = append(next, s.spec(sp.P, sp.Q, sp.SP, sp.SQ, !constant))
		}
		for _, nb := range next {
			if c.fits >= maxModels {
				break
			}
			if f := s.fit(c, nb, adjustStart(cur.res.Model.Params(), cur.spec, nb)); f != nil && f.aicc < cur.aicc {
				cur, improved = f, true
				break
			}
		}
	}
	return cur
}

// fit fits spec on c's scale (cached), records the candidate, and returns
// the fit, or nil when it failed or was rejected.
func (s *selector) fit(c *scaled, spec arima.Spec, start []float64) *fitted {
	if f, ok := c.cache[spec]; ok {
		return f
	}
	c.fits++
	f, err := s.fitOne(c, spec, start)
	cand := Candidate{Spec: spec, Transform: c.tr.String(), AICc: math.NaN()}
	if err != nil {
		cand.Err = err.Error()
		f = nil
	} else {
		cand.AICc = f.aicc
	}
	s.tried = append(s.tried, cand)
	c.cache[spec] = f
	return f
}

var errRoots = errors.New("a root within 1.001 of the unit circle")

func (s *selector) fitOne(c *scaled, spec arima.Spec, start []float64) (*fitted, error) {
	n := s.nobs - spec.D - spec.Period*spec.SD
	k := spec.NumParams()
	if n-k-2 <= 0 {
		return nil, fmt.Errorf("%d coefficients need more than %d observations", k, n)
	}
	var opt *arima.FitOptions
	if len(start) == k {
		opt = &arima.FitOptions{Start: start}
	}
	res, err := arima.Fit(c.w, spec, opt)
	if err != nil {
		return nil, err
	}
	if math.IsNaN(res.LogLik) || math.IsInf(res.LogLik, 0) || math.IsNaN(res.AICc) || math.IsInf(res.AICc, 0) {
		return nil, fmt.Errorf("log-likelihood %v is not finite", res.LogLik)
	}
	// The root check steers the order search (Hyndman & Khandakar 2008);
	// an order the user fixed is kept, with the finding in its note.
	if why := nearUnitRoot(res.Model); why != "" {
		if s.o.Model == "auto" {
			return nil, fmt.Errorf("%w (%s)", errRoots, why)
		}
		if res.Note != "" {
			res.Note += "; "
		}
		res.Note += errRoots.Error() + " (" + why + ")"
	}
	return &fitted{spec: spec, res: res, aicc: res.AICc - 2*c.jac}, nil
}

// nearUnitRoot names the first polynomial of m with a root of modulus
// ≤ rootMargin, or returns "".
func nearUnitRoot(m *arima.Model) string {
	for _, p := range []struct {
		nm   string
		c    []float64
		sign float64
	}{{"AR", m.AR, -1}, {"MA", m.MA, 1}, {"seasonal AR", m.SAR, -1}, {"seasonal MA", m.SMA, 1}} {
		if minRootModulus(p.c, p.sign) <= rootMargin {
			return p.nm
		}
	}
	return ""
}
