package auto

import (
	"fmt"
	"math"
	"strings"

	"forewarn/engine/arima"
	"forewarn/engine/transform"
)

// Options configures Select. The zero value of a field means its default.
type Options struct {
	Period    int    // seasonal period in steps; 0 or 1: non-seasonal
	Transform string // "auto" (or "") or a fixed transform (transform.Parse syntax)
	// Model is "auto" (or "") or fixed orders "p,d,q" or "p,d,q x P,D,Q"
	// (arima.ParseOrders); then only the transform is chosen. Seasonal
	// orders take Period as their period, which must then be at least 2.
	Model string
	// Constant is, for a fixed Model, the constant of arima.NewSpec
	// (ConstantAuto: a mean when d + D = 0, nothing otherwise). With Model
	// "auto", ConstantAuto lets the search try the constant on and off and
	// ConstantNone leaves it out; mean and drift need a fixed Model, as
	// the search chooses d and D.
	Constant arima.Constant
	Warm     *Warm // previous choice, for warm-started refits (may be nil)
	// Order bounds; 0 means the defaults 5, 5, 2, 2 (Hyndman & Khandakar 2008).
	MaxP, MaxQ, MaxSP, MaxSQ int

	// Seasons lists the seasonal cycles in the unit of Step (seconds, or
	// steps when Step is 0); they need not be whole numbers of steps. When
	// set, Period is ignored: the first whole cycle of 2…MaxARIMAPeriod
	// steps may get seasonal ARIMA terms, every other cycle K Fourier pairs
	// with K chosen by AICc (package doc, "Several cycles"). A fixed Model
	// takes at most one cycle, the period of its seasonal orders.
	Seasons []float64
	// Step is the spacing of y in the unit of Seasons; 0 means 1.
	Step float64
	// Start is the data time of y[0] in the unit of Step: the phase of
	// the Fourier terms comes from it.
	Start float64
	// MaxK caps the Fourier pairs per cycle; 0 means DefaultMaxK.
	MaxK int
	// MaxARIMAPeriod is the longest cycle in steps that may get seasonal
	// ARIMA terms; 0 means DefaultMaxARIMAPeriod, −1 none.
	MaxARIMAPeriod int
}

// Warm is a previous choice that a refit starts from.
type Warm struct {
	Spec      arima.Spec
	Params    []float64 // in arima.Model.Params layout
	Transform transform.Transform
	// Seasons is the previous choice per cycle (Choice.Seasons); the
	// Fourier cycles keep their K.
	Seasons []SeasonChoice
	// Route is the previous Choice.Route: a refit of RouteProfile redoes
	// the decomposition and starts the ARIMA errors from Spec and Params.
	Route string
}

// Candidate is one fit that Select tried.
type Candidate struct {
	Spec      arima.Spec
	Transform string  // transform spec (transform.Transform.String)
	AICc      float64 // raw-scale AICc; NaN when the fit failed or was rejected
	Err       string  // why the fit failed or was rejected; "" for an accepted fit
}

// Choice is the outcome of Select.
type Choice struct {
	Spec      arima.Spec
	Transform transform.Transform // frozen (Loc/Scale set) as used for the fit
	Result    *arima.Result       // fit on the transformed series
	RawAICc   float64             // AICc on the raw scale (log-Jacobian added)
	Tried     []Candidate         // every fit, in the order tried
	// Seasons is the choice per cycle of Options.Seasons, in its order
	// (nil without Seasons).
	Seasons []SeasonChoice
	// Fourier generates the model's regressors (Spec.NX columns, Beta in
	// Result.Model) from absolute data time in the unit of Options.Step;
	// nil when no cycle has Fourier terms. Cycles lists its cycles and K.
	Fourier *arima.Fourier
	Cycles  []arima.Cycle
	// Start and Step are Options.Start and Options.Step (normalised): the
	// data time of y[0] and the spacing, for arima.NewFilterX.
	Start, Step float64

	// Route is how the cycles are carried, with Options.Seasons: RouteFourier
	// (Fourier or seasonal ARIMA terms) or RouteProfile (package doc,
	// "Choosing the route"); "" without Seasons.
	Route string
	// Profile generates the regressors of RouteProfile (nil otherwise):
	// one column per entry of ProfileCycles (cycle lengths in the unit of
	// Step), whose seasonal shape is the same entry of ProfileShapes,
	// sample k at phase k/M of the cycle (M = len of the shape). The
	// coefficients (Result.Model.Beta) are 1.
	Profile       *arima.Profile
	ProfileCycles []float64
	ProfileShapes [][]float64
	// Score is the holdout comparison of the two routes; nil when it was
	// not made (a warm refit, a fixed model, missing values, or too short
	// a series).
	Score *RouteScore
}

// Default order bounds (Hyndman & Khandakar 2008, §3.2).
const (
	DefaultMaxP  = 5
	DefaultMaxQ  = 5
	DefaultMaxSP = 2
	DefaultMaxSQ = 2
)

// maxModels bounds the number of fits of one stepwise search (a bound of
// our own, so a search on a flat AICc surface ends).
const maxModels = 60

// rootMargin: a fit is rejected when a root of one of its polynomials has
// modulus ≤ rootMargin (Hyndman & Khandakar 2008 use 1.001).
const rootMargin = 1.001

// Select chooses a transform and a seasonal ARIMA order for y (raw units,
// NaN = missing) and fits it; see the package documentation for the
// procedure. It is deterministic.
func Select(y []float64, o Options) (*Choice, error) {
	if err := o.normalise(); err != nil {
		return nil, err
	}
	nobs := 0
	for _, v := range y {
		if math.IsInf(v, 0) {
			return nil, fmt.Errorf("%w: value %v in the series", ErrDomain, v)
		}
		if !math.IsNaN(v) {
			nobs++
		}
	}
	if nobs < minObs {
		return nil, fmt.Errorf("%w: %d observed values, need at least %d", ErrTooShort, nobs, minObs)
	}
	s := &selector{y: y, o: o}
	if len(o.Seasons) > 0 {
		cs, err := o.splitCycles()
		if err != nil {
			return nil, err
		}
		if len(cs.fidx) > 0 {
			return s.seasonsX(cs)
		}
		s.o.Period = cs.period
		c, err := s.plain()
		if err != nil {
			return nil, err
		}
		c.Seasons = s.seasonChoices(cs, c.Spec, nil)
		return c, nil
	}
	return s.plain()
}

// plain is Select with at most one cycle, carried by seasonal ARIMA terms.
func (s *selector) plain() (*Choice, error) {
	o := s.o
	if o.Warm != nil {
		if c, err := s.warm(); err == nil {
			return c, nil
		}
		// The previous model no longer fits (e.g. a value left the
		// transform's domain): choose afresh.
		s.tried = s.tried[:0]
	}
	return s.cold()
}

// minObs is the fewest observed values Select fits a model to.
const minObs = 8

func (o *Options) normalise() error {
	if o.Period < 0 {
		return fmt.Errorf("%w: period %d is negative", ErrBadOptions, o.Period)
	}
	if o.Period == 1 {
		o.Period = 0
	}
	if math.IsNaN(o.Step) || math.IsInf(o.Step, 0) || o.Step < 0 || math.IsNaN(o.Start) || math.IsInf(o.Start, 0) {
		return fmt.Errorf("%w: step %v, start %v: want a finite step ≥ 0 and a finite start", ErrBadOptions, o.Step, o.Start)
	}
	if o.Step == 0 {
		o.Step = 1
	}
	switch {
	case o.MaxK < 0:
		return fmt.Errorf("%w: MaxK %d is negative", ErrBadOptions, o.MaxK)
	case o.MaxK == 0:
		o.MaxK = DefaultMaxK
	}
	switch {
	case o.MaxARIMAPeriod < -1:
		return fmt.Errorf("%w: MaxARIMAPeriod %d: want −1, 0 or a period", ErrBadOptions, o.MaxARIMAPeriod)
	case o.MaxARIMAPeriod == 0:
		o.MaxARIMAPeriod = DefaultMaxARIMAPeriod
	}
	for _, b := range []struct {
		v   *int
		def int
		nm  string
	}{{&o.MaxP, DefaultMaxP, "MaxP"}, {&o.MaxQ, DefaultMaxQ, "MaxQ"}, {&o.MaxSP, DefaultMaxSP, "MaxSP"}, {&o.MaxSQ, DefaultMaxSQ, "MaxSQ"}} {
		switch {
		case *b.v < 0:
			return fmt.Errorf("%w: %s %d is negative", ErrBadOptions, b.nm, *b.v)
		case *b.v == 0:
			*b.v = b.def
		}
	}
	o.Transform = strings.TrimSpace(o.Transform)
	if o.Transform == "" {
		o.Transform = "auto"
	}
	o.Model = strings.TrimSpace(o.Model)
	if o.Model == "" {
		o.Model = "auto"
	}
	switch o.Constant {
	case arima.ConstantAuto, arima.ConstantNone:
	case arima.ConstantMean, arima.ConstantDrift:
		if o.Model == "auto" {
			return fmt.Errorf("%w: constant %s needs fixed orders (the search chooses d and D; use auto or none)", ErrBadOptions, o.Constant)
		}
	default:
		return fmt.Errorf("%w: constant %v: want auto, none, mean or drift", ErrBadOptions, o.Constant)
	}
	if o.Model != "auto" && len(o.Seasons) > 0 {
		_, _, seasonal, err := arima.ParseOrders(o.Model)
		if err != nil {
			return fmt.Errorf("%w: model %q: %w", ErrBadOptions, o.Model, err)
		}
		switch {
		case !seasonal:
			return fmt.Errorf("%w: model %q has no seasonal orders to use the %d seasonal cycles; give seasonal orders \"p,d,q x P,D,Q\", model auto, or no cycles", ErrBadOptions, o.Model, len(o.Seasons))
		case len(o.Seasons) > 1:
			return fmt.Errorf("%w: model %q uses one cycle (the period of its seasonal orders), but %d are given; keep the first or use model auto", ErrBadOptions, o.Model, len(o.Seasons))
		}
		m := o.Seasons[0] / o.Step
		if math.Abs(m-math.Round(m)) > 1e-9*m {
			return fmt.Errorf("%w: model %q needs a cycle of a whole number of steps; the cycle is %.6g steps", ErrBadOptions, o.Model, m)
		}
		if o.MaxARIMAPeriod < int(math.Round(m)) {
			o.MaxARIMAPeriod = int(math.Round(m))
		}
	}
	return nil
}

// fixedSpec is the specification of a fixed Model (normalised options).
func (o *Options) fixedSpec() (arima.Spec, error) {
	ord, sord, seasonal, err := arima.ParseOrders(o.Model)
	if err != nil {
		return arima.Spec{}, fmt.Errorf("%w: model %q: %w", ErrBadOptions, o.Model, err)
	}
	period := 0
	if seasonal {
		if o.Period < 2 {
			return arima.Spec{}, fmt.Errorf("%w: model %q has seasonal orders but the period is %d (want at least 2)", ErrBadOptions, o.Model, o.Period)
		}
		period = o.Period
	}
	spec, err := arima.NewSpec(ord, sord, period, o.Constant)
	if err != nil {
		return arima.Spec{}, fmt.Errorf("%w: model %q, constant %s: %w", ErrBadOptions, o.Model, o.Constant, err)
	}
	return spec, nil
}
