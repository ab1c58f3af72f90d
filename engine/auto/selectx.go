package auto

import (
	"fmt"
	"math"

	"forewarn/engine/arima"
	"forewarn/engine/transform"
)

// seasonChoices describes the choice per cycle: the ARIMA cycle carries
// "arima" terms when the spec has seasonal orders or differencing, the
// Fourier cycles their K (nil K: none).
func (s *selector) seasonChoices(cs cycleSetup, spec arima.Spec, K []int) []SeasonChoice {
	out := make([]SeasonChoice, len(s.o.Seasons))
	for i, L := range s.o.Seasons {
		out[i] = SeasonChoice{Length: L, Steps: cs.steps[i], Terms: TermsNone}
	}
	if cs.arimaIdx >= 0 && spec.Period >= 2 && spec.SP+spec.SD+spec.SQ > 0 {
		out[cs.arimaIdx].Terms = TermsARIMA
	}
	for ci, i := range cs.fidx {
		if K != nil && K[ci] > 0 {
			out[i].Terms, out[i].K = TermsFourier, K[ci]
		}
	}
	return out
}

// guerreroPeriod is the subseries length for Guerrero's λ with cycles:
// the ARIMA cycle, else the shortest cycle rounded, at least 2.
func guerreroPeriod(cs cycleSetup) int {
	if cs.period >= 2 {
		return cs.period
	}
	p := math.Inf(1)
	for _, m := range cs.steps {
		p = math.Min(p, m)
	}
	return max(2, int(math.Round(p)))
}

// seasonsX is Select with at least one Fourier cycle: the Fourier route
// and the profile route compared on a holdout (package doc, "Choosing the
// route").
func (s *selector) seasonsX(cs cycleSetup) (*Choice, error) {
	if w := s.o.Warm; w != nil && w.Route == RouteProfile {
		if c, err := s.profileRoute(); err == nil {
			return c, nil
		}
		// e.g. a value now missing: choose afresh
		s.tried = s.tried[:0]
		s.o.Warm = nil
	}
	H, h, ok := s.holdout(cs)
	if !ok || (s.o.Warm != nil && s.o.Warm.Route != RouteProfile) {
		return s.fourierRoute(cs)
	}
	n := len(s.y)
	sf := &selector{y: s.y[:n-H], o: s.o}
	sf.o.Warm = nil
	cf, errF := sf.fourierRoute(cs)
	sp := &selector{y: s.y[:n-H], o: sf.o}
	cp, errP := sp.profileRoute()
	score := &RouteScore{Fourier: math.NaN(), Profile: math.NaN(), Holdout: H, Horizon: h}
	if errF == nil {
		score.Fourier = holdoutMAE(cf, s.y, n-H, h)
	}
	if errP == nil {
		score.Profile = holdoutMAE(cp, s.y, n-H, h)
	}
	var c *Choice
	var err error
	if score.Profile < score.Fourier || (math.IsNaN(score.Fourier) && !math.IsNaN(score.Profile)) {
		s.o.Warm = cp.warm()
		c, err = s.profileRoute()
	}
	if c == nil {
		s.o.Warm = nil
		if errF == nil {
			s.o.Warm = cf.warm()
		}
		c, err = s.fourierRoute(cs)
	}
	s.o.Warm = nil
	if err != nil {
		return nil, err
	}
	c.Score = score
	return c, nil
}

// holdout says whether the two routes are compared, and on how many final
// steps H (the longest cycle, rounded up) and up to which lead h (the
// shortest cycle, rounded, at most H): only for the automatic model on a
// complete series that keeps more than two of its longest cycles before
// the holdout (so that MSTL of the training part has every cycle).
func (s *selector) holdout(cs cycleSetup) (H, h int, ok bool) {
	if s.o.Model != "auto" || len(cs.steps) == 0 {
		return 0, 0, false
	}
	for _, v := range s.y {
		if math.IsNaN(v) {
			return 0, 0, false
		}
	}
	lo, hi := math.Inf(1), 0.0
	for _, m := range cs.steps {
		lo, hi = math.Min(lo, m), math.Max(hi, m)
	}
	H = int(math.Ceil(hi - 1e-9))
	h = min(H, max(1, int(math.Round(lo))))
	if len(s.y)-H <= 2*int(math.Round(hi)) {
		return 0, 0, false
	}
	return H, h, true
}

// warm returns the choice as a Warm for a refit.
func (c *Choice) warm() *Warm {
	return &Warm{Spec: c.Spec, Params: c.Result.Model.Params(), Transform: c.Transform, Seasons: c.Seasons, Route: c.Route}
}

// fourierRoute is Select with at least one Fourier cycle by dynamic
// harmonic regression (package doc, "Several cycles").
func (s *selector) fourierRoute(cs cycleSetup) (*Choice, error) {
	s.countObs()
	s.o.Period = guerreroPeriod(cs)
	pool := newPool(&s.o, cs)
	X := pool.columns(len(s.y))
	if s.o.Warm != nil && len(s.o.Warm.Seasons) == len(s.o.Seasons) {
		if c, err := s.warmX(cs, pool, X); err == nil {
			return c, nil
		}
		s.tried = s.tried[:0]
	}
	cands, err := s.transforms()
	if err != nil {
		return nil, err
	}
	base := s.base(cands)
	s.differencingX(base, cs, X)
	for _, c := range cands {
		c.jac = jacobian(c.tr, s.y, s.d+s.period*s.sd)
	}
	cons := s.constantAllowed()
	conc := newConcentrated(base.w, X, s.d, s.sd, s.period, cons)
	K, _ := conc.chooseK(pool, proxySpec(s.period))

	// Order search on the concentrated residuals at K.
	e, nb, err := conc.residuals(pool.selected(K))
	if err != nil {
		return nil, fmt.Errorf("%w: %v", ErrNoModel, err)
	}
	sub := s.residualSelector(e)
	sc := &scaled{tr: transform.Transform{Name: transform.None}, w: e, cache: map[arima.Spec]*fitted{}}
	var best *fitted
	for _, spec := range sub.starts() {
		if f := sub.fit(sc, spec, nil); f != nil && (best == nil || f.aicc < best.aicc) {
			best = f
		}
	}
	s.tried = append(s.tried, sub.tried...)
	if best == nil {
		return s.choice(nil, nil)
	}
	best = sub.stepwise(sc, best)
	s.tried = append(s.tried[:0], sub.tried...)

	// Transform: the chosen orders on every candidate's concentrated
	// residuals, on the raw scale.
	bestC, bestA := base, aiccK(best.res, nb)-2*base.jac
	for _, c := range cands {
		if c == base {
			continue
		}
		cc := newConcentrated(c.w, X, s.d, s.sd, s.period, cons)
		ec, nbc, err := cc.residuals(pool.selected(K))
		if err != nil {
			continue
		}
		res, err := arima.Fit(ec, best.spec, &arima.FitOptions{Start: best.res.Model.Params()})
		if err != nil || nearUnitRoot(res.Model) != "" {
			continue
		}
		if a := aiccK(res, nbc) - 2*c.jac; a < bestA {
			bestC, bestA = c, a
		}
	}
	cm := consNone
	if cons {
		cm = s.constantX(bestC, X, pool.selected(K), best)
	}
	return s.finalX(bestC, cs, pool, X, K, best.spec, best.res.Model.Params(), cm)
}

// constantX decides the constant (a mean when d + D = 0, a drift when 1)
// of the final fit by AICc on the concentrated residuals, as the stepwise
// search of Hyndman & Khandakar (2008) decides it: the chosen orders are
// fitted to the residuals of the least-squares regression on cols with and
// without the constant column, the constant counted as a coefficient. One
// FitX then fits the winner (the regression with ARIMA errors costs far more
// than these fits).
func (s *selector) constantX(c *scaled, X [][]float64, cols []int, best *fitted) int {
	aic := func(cons bool) float64 {
		cc := newConcentrated(c.w, X, s.d, s.sd, s.period, cons)
		e, nb, err := cc.residuals(cols)
		if err != nil {
			return math.Inf(1)
		}
		res, err := arima.Fit(e, best.spec, &arima.FitOptions{Start: best.res.Model.Params()})
		if err != nil || nearUnitRoot(res.Model) != "" {
			return math.Inf(1)
		}
		return aiccK(res, nb)
	}
	on, off := aic(true), aic(false)
	switch {
	case math.IsInf(on, 1) && math.IsInf(off, 1):
		return consBoth // undecided here: FitX compares both
	case on < off:
		return consOn
	}
	return consNone
}

// residualSelector is a selector for the order search on the concentrated
// residuals e: already differenced, no constant.
func (s *selector) residualSelector(e []float64) *selector {
	o := s.o
	o.Constant, o.Model, o.Warm, o.Seasons = arima.ConstantNone, "auto", nil, nil
	sub := &selector{y: e, o: o, seasonal: s.seasonal, period: s.period}
	sub.countObs()
	return sub
}

// finalX fits the chosen orders (of the differenced residuals: d = D = 0
// in arma) with the regression on the Fourier columns of K by FitX on c's
// scale, with the constant as cons says.
func (s *selector) finalX(c *scaled, cs cycleSetup, pool *fourierPool, X [][]float64, K []int, arma arima.Spec, start []float64, cons int) (*Choice, error) {
	sel := pool.selected(K)
	Xs := make([][]float64, len(sel))
	for j, col := range sel {
		Xs[j] = X[col]
	}
	spec := arima.Spec{P: arma.P, D: s.d, Q: arma.Q, SP: arma.SP, SD: s.sd, SQ: arma.SQ, NX: len(sel)}
	if spec.SP+spec.SD+spec.SQ > 0 {
		spec.Period = s.period
	}
	specs := []arima.Spec{spec}
	if cons != consNone {
		sc := spec
		switch s.d + s.sd {
		case 0:
			sc.Mean = true
		case 1:
			sc.Drift = true
		}
		specs = append([]arima.Spec{sc}, specs...)
		if cons == consOn {
			specs = specs[:1]
		}
	}
	var best *fitted
	for _, sp := range specs {
		st := adjustStart(start, arma, arima.Spec{P: sp.P, Q: sp.Q, SP: sp.SP, SQ: sp.SQ, Mean: sp.Mean, Drift: sp.Drift})
		if st != nil {
			st = append(st, make([]float64, sp.NX)...)
		}
		var opt *arima.FitOptions
		if len(st) == sp.NumParams() {
			opt = &arima.FitOptions{Start: st}
		}
		res, err := arima.FitX(c.w, Xs, sp, opt)
		cand := Candidate{Spec: sp, Transform: c.tr.String(), AICc: math.NaN()}
		if err == nil && (math.IsNaN(res.AICc) || math.IsInf(res.AICc, 0)) {
			err = fmt.Errorf("log-likelihood %v is not finite", res.LogLik)
		}
		if err != nil {
			cand.Err = err.Error()
			s.tried = append(s.tried, cand)
			continue
		}
		if why := nearUnitRoot(res.Model); why != "" && res.Note == "" {
			res.Note = errRoots.Error() + " (" + why + ")"
		}
		f := &fitted{spec: sp, res: res, aicc: res.AICc - 2*c.jac}
		cand.AICc = f.aicc
		s.tried = append(s.tried, cand)
		if best == nil || f.aicc < best.aicc {
			best = f
		}
	}
	ch, err := s.choice(c, best)
	if err != nil {
		return nil, err
	}
	ch.Seasons = s.seasonChoices(cs, ch.Spec, K)
	ch.Cycles = pool.cycles(K)
	ch.Start, ch.Step = s.o.Start, s.o.Step
	ch.Route = RouteFourier
	if len(ch.Cycles) > 0 {
		gen, err := arima.NewFourier(ch.Cycles, s.o.Step)
		if err != nil {
			return nil, fmt.Errorf("%w: %v", ErrNoModel, err)
		}
		if gen.NumRegressors() != ch.Spec.NX {
			return nil, fmt.Errorf("%w: %d Fourier columns for %d regressors", ErrNoModel, gen.NumRegressors(), ch.Spec.NX)
		}
		ch.Fourier = gen
	}
	return ch, nil
}

// warmX refits the previous choice: the same transform, differencing,
// cycles and K; the orders ±1 on p and on q are compared on the
// concentrated residuals, and the best is fitted by FitX from the previous
// coefficients (package doc, "Several cycles").
func (s *selector) warmX(cs cycleSetup, pool *fourierPool, X [][]float64) (*Choice, error) {
	w := s.o.Warm
	spec := w.Spec
	if err := spec.Validate(); err != nil {
		return nil, fmt.Errorf("%w: warm spec: %w", ErrBadOptions, err)
	}
	K := make([]int, len(cs.fidx))
	for ci, i := range cs.fidx {
		if w.Seasons[i].Terms == TermsFourier {
			K[ci] = min(w.Seasons[i].K, cs.kmax[ci])
		}
	}
	tr := transform.Freeze(w.Transform, s.y)
	c := &scaled{tr: tr, w: make([]float64, len(s.y))}
	if err := tr.ForwardSlice(c.w, s.y); err != nil {
		return nil, fmt.Errorf("%w: %w", ErrDomain, err)
	}
	s.d, s.sd, s.period = spec.D, spec.SD, spec.Period
	s.seasonal = spec.Period >= 2
	if !s.seasonal {
		s.period = cs.period
		s.seasonal = cs.period >= 2
	}
	c.jac = jacobian(tr, s.y, s.d+spec.Period*s.sd)
	cons := spec.Mean || spec.Drift
	conc := newConcentrated(c.w, X, s.d, s.sd, spec.Period, cons)
	e, _, err := conc.residuals(pool.selected(K))
	if err != nil {
		return nil, err
	}
	sub := s.residualSelector(e)
	sc := &scaled{tr: transform.Transform{Name: transform.None}, w: e, cache: map[arima.Spec]*fitted{}}
	arma := arima.Spec{P: spec.P, Q: spec.Q, SP: spec.SP, SQ: spec.SQ}
	if arma.SP+arma.SQ > 0 {
		arma.Period = spec.Period
	}
	prev := adjustStart(w.Params, spec, arma)
	best := sub.fit(sc, arma, prev)
	fixed := s.o.Model != "auto"
	for _, dv := range [][2]int{{-1, 0}, {1, 0}, {0, -1}, {0, 1}} {
		p, q := arma.P+dv[0], arma.Q+dv[1]
		if fixed || !sub.inBounds(p, q, arma.SP, arma.SQ) {
			continue
		}
		nb := sub.spec(p, q, arma.SP, arma.SQ, false)
		if f := sub.fit(sc, nb, adjustStart(prev, arma, nb)); f != nil && (best == nil || f.aicc < best.aicc) {
			best = f
		}
	}
	s.tried = append(s.tried, sub.tried...)
	if best == nil {
		return nil, fmt.Errorf("%w: warm refit failed", ErrNoModel)
	}
	start := adjustStart(w.Params[:min(len(w.Params), spec.NumParams()-spec.NX)], arima.Spec{P: spec.P, Q: spec.Q, SP: spec.SP, SQ: spec.SQ, Mean: spec.Mean, Drift: spec.Drift}, best.spec)
	if start == nil {
		start = best.res.Model.Params()
	}
	// the previous constant choice is kept
	cm := consNone
	if cons {
		cm = consOn
	}
	return s.finalX(c, cs, pool, X, K, best.spec, start, cm)
}

// The constant of finalX: none, on, or both tried.
const (
	consNone = iota
	consOn
	consBoth
)
