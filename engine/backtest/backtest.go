package backtest

import (
	"fmt"
	"math"
)

// Forecast is one origin's forecast in raw units.
type Forecast struct {
	// Mean holds the h point forecasts ŷ_{T+1}, …, ŷ_{T+h}.
	Mean []float64
	// Lower and Upper hold one row per level of Options.Levels, each of
	// length h; a NaN bound is unbounded on that side.
	Lower, Upper [][]float64
}

// Forecaster fits a model to train (raw units, NaN = missing) and forecasts
// h steps ahead with intervals at the given levels (percent). It must not
// keep or modify train.
type Forecaster func(train []float64, h int, levels []float64) (Forecast, error)

// Options configures Run. The zero value of a field means its default.
type Options struct {
	Horizon int       // h, steps ahead; required (≥ 1)
	Origins int       // N, the number of origins; 0 means 20
	Every   int       // K, steps between consecutive origins, the last at n − h; 0 means 1
	Period  int       // seasonal period m of the baseline and of the MASE scale; 0 or 1: naive
	Levels  []float64 // interval levels in percent; nil means 80, 95
}

// DefaultOrigins is the number of origins when Options.Origins is 0.
const DefaultOrigins = 20

// Scores are the accuracy scores of one forecaster.
type Scores struct {
	MASE  float64 // mean absolute scaled error; NaN when no origin had a non-zero scale
	SMAPE float64 // symmetric MAPE in percent
}

// Report is the outcome of Run.
type Report struct {
	Origins  int       // origins requested (N)
	Horizon  int       // h
	Levels   []float64 // interval levels, percent
	Model    Scores    // the forecaster's scores
	Coverage []float64 // per level: share of actuals inside the interval (0..1)
	Baseline Scores    // the seasonal-naive baseline on the same origins
	Failed   int       // origins at which the forecaster returned an error
	LastErr  string    // the last forecaster error, "" when none failed
	Errors   int       // number of (origin, step) errors scored
}

// Run evaluates f at the last o.Origins origins of y (see the package
// documentation for the procedure and the scores). progress, when not nil,
// is called after each origin with the number done and the total.
func Run(y []float64, o Options, f Forecaster, progress func(done, total int)) (*Report, error) {
	if o.Horizon < 1 {
		return nil, fmt.Errorf("%w: horizon %d, need at least 1", ErrBadOptions, o.Horizon)
	}
	if o.Origins == 0 {
		o.Origins = DefaultOrigins
	}
	if o.Origins < 0 {
		return nil, fmt.Errorf("%w: %d origins, need at least 1", ErrBadOptions, o.Origins)
	}
	if o.Every == 0 {
		o.Every = 1
	}
	if o.Every < 0 {
		return nil, fmt.Errorf("%w: origins %d steps apart, need at least 1", ErrBadOptions, o.Every)
	}
	if o.Period < 0 {
		return nil, fmt.Errorf("%w: period %d is negative", ErrBadOptions, o.Period)
	}
	m := max(o.Period, 1)
	levels := o.Levels
	if levels == nil {
		levels = []float64{80, 95}
	}
	for _, l := range levels {
		if !(l > 0 && l < 100) {
			return nil, fmt.Errorf("%w: level %v is not in (0, 100)", ErrBadOptions, l)
		}
	}
	n, h := len(y), o.Horizon
	first := n - h - (o.Origins-1)*o.Every
	if o.Origins > (n-h)/o.Every+1 || first <= m {
		return nil, fmt.Errorf("%w: %d values cannot give %d origins of %d steps with at least %d training values each",
			ErrTooShort, n, o.Origins, h, m+1)
	}

	r := &Report{Origins: o.Origins, Horizon: h, Levels: append([]float64(nil), levels...)}
	var acc, base accum
	covered := make([]int, len(levels))
	counted := 0
	naive := make([]float64, h)
	for k, T := 0, first; T <= n-h; k, T = k+1, T+o.Every {
		train := y[:T:T]
		fc, err := f(train, h, levels)
		if err == nil {
			err = checkShape(fc, h, len(levels))
		}
		if err != nil {
			r.Failed++
			r.LastErr = fmt.Sprintf("origin %d: %v", T, err)
			if progress != nil {
				progress(k+1, o.Origins)
			}
			continue
		}
		scale := naiveMAE(train, m)
		SeasonalNaive(naive, train, m)
		for j := 0; j < h; j++ {
			a := y[T+j]
			if math.IsNaN(a) {
				continue
			}
			acc.add(a, fc.Mean[j], scale)
			base.add(a, naive[j], scale)
			counted++
			for l := range levels {
				lo, hi := fc.Lower[l][j], fc.Upper[l][j]
				if (math.IsNaN(lo) || a >= lo) && (math.IsNaN(hi) || a <= hi) {
					covered[l]++
				}
			}
		}
		if progress != nil {
			progress(k+1, o.Origins)
		}
	}
	if r.Failed == o.Origins {
		return nil, fmt.Errorf("%w: %s", ErrAllFailed, r.LastErr)
	}
	r.Errors = counted
	r.Model = acc.scores()
	r.Baseline = base.scores()
	r.Coverage = make([]float64, len(levels))
	for l := range levels {
		r.Coverage[l] = math.NaN()
		if counted > 0 {
			r.Coverage[l] = float64(covered[l]) / float64(counted)
		}
	}
	return r, nil
}

func checkShape(fc Forecast, h, nl int) error {
	if len(fc.Mean) != h || len(fc.Lower) != nl || len(fc.Upper) != nl {
		return fmt.Errorf("%w: %d means, %d lower and %d upper rows; want %d means and %d rows",
			ErrBadForecast, len(fc.Mean), len(fc.Lower), len(fc.Upper), h, nl)
	}
	for l := 0; l < nl; l++ {
		if len(fc.Lower[l]) != h || len(fc.Upper[l]) != h {
			return fmt.Errorf("%w: interval row %d has %d/%d values, want %d",
				ErrBadForecast, l, len(fc.Lower[l]), len(fc.Upper[l]), h)
		}
	}
	return nil
}

// accum sums scaled absolute errors and sMAPE terms.
type accum struct {
	sumQ, sumS float64
	nQ, nS     int
}

// add scores one actual a against forecast f with the origin's MASE scale.
// A forecast that is not finite counts as an infinite error.
func (c *accum) add(a, f, scale float64) {
	e := math.Abs(a - f)
	if math.IsNaN(e) {
		e = math.Inf(1)
	}
	if scale > 0 {
		c.sumQ += e / scale
		c.nQ++
	}
	d := math.Abs(a) + math.Abs(f)
	switch {
	case math.IsInf(e, 1):
		c.sumS += 200
	case d > 0:
		c.sumS += 200 * e / d
	}
	c.nS++
}

func (c *accum) scores() Scores {
	s := Scores{MASE: math.NaN(), SMAPE: math.NaN()}
	if c.nQ > 0 {
		s.MASE = c.sumQ / float64(c.nQ)
	}
	if c.nS > 0 {
		s.SMAPE = c.sumS / float64(c.nS)
	}
	return s
}

// naiveMAE is the in-sample mean absolute error of the seasonal-naive
// forecast, Q = mean |y_t − y_{t−m}| over the pairs where both are observed
// (Hyndman & Koehler 2006, eq. for q_t). It is 0 when there is no such pair.
func naiveMAE(y []float64, m int) float64 {
	var s float64
	k := 0
	for t := m; t < len(y); t++ {
		d := math.Abs(y[t] - y[t-m])
		if !math.IsNaN(d) {
			s += d
			k++
		}
	}
	if k == 0 {
		return 0
	}
	return s / float64(k)
}

// SeasonalNaive writes the seasonal-naive forecast of the len(dst) values
// after train into dst:
//
//	ŷ_{T+j} = y_{T+j−k·m},  k the smallest integer ≥ 1 with T+j−k·m < T and y observed there
//
// (m ≤ 1: the last observed value). A step with no observed value at any
// earlier season is NaN.
//
// References:
//   - Hyndman, R. J. & Athanasopoulos, G. (2021). Forecasting: Principles and
//     Practice, 3rd ed., §5.2 (seasonal naïve method).
func SeasonalNaive(dst, train []float64, m int) {
	m = max(m, 1)
	T := len(train)
	for j := range dst {
		dst[j] = math.NaN()
		// T+j−k·m < T ⇔ k > j/m; start at the smallest such k.
		for i := T + j - (j/m+1)*m; i >= 0; i -= m {
			if !math.IsNaN(train[i]) {
				dst[j] = train[i]
				break
			}
		}
	}
}
