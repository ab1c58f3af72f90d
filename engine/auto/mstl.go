package auto

import (
	"fmt"
	"forewarn/engine/arima"
	"math"
	"sort"
)

// Decomposition is the result of MSTL: x = Σ Seasonal[i] + Trend + Remainder.
type Decomposition struct {
	Periods   []int       // the cycles in steps, ascending
	Seasonal  [][]float64 // one component per period, in the order of Periods
	Trend     []float64
	Remainder []float64
}

// Adjusted returns the seasonally adjusted series, x less every seasonal
// component (trend plus remainder).
func (d *Decomposition) Adjusted() []float64 {
	out := make([]float64, len(d.Trend))
	for t := range out {
		out[t] = d.Trend[t] + d.Remainder[t]
	}
	return out
}

// SeasonalNaive writes into dst the seasonal part of the next len(dst)
// steps: each component repeated from its last full cycle (the seasonal
// forecast of the decomposition-plus-ARIMA route, Bandara, Hyndman &
// Bergmeir 2021, §3).
func (d *Decomposition) SeasonalNaive(dst []float64) {
	n := len(d.Trend)
	for k := range dst {
		s := 0.0
		for i, m := range d.Periods {
			s += d.Seasonal[i][n-m+k%m]
		}
		dst[k] = s
	}
}

// MSTL decomposes the complete series x (no missing values) into one
// seasonal component per period, a trend and a remainder by multiple STL
// (Bandara, Hyndman & Bergmeir 2021): periods ascending, two passes, each
// period's component re-estimated by STL on the series less the other
// components, with seasonal windows 7 + 4i (i = 1, 2, …) and STL's other
// settings at their published defaults (Cleveland et al. 1990, §3: no
// robustness iterations, two inner passes, trend window the next odd
// integer above 1.5·m/(1 − 1.5/n_s), low-pass window the next odd integer
// from m, degree 0 for the cycle-subseries smoother, 1 for the trend and
// low-pass smoothers). A period needs at least two full cycles of data;
// shorter ones are left out.
//
// References:
//   - Cleveland, R. B., Cleveland, W. S., McRae, J. E. & Terpenning, I.
//     (1990). STL: a seasonal-trend decomposition procedure based on
//     loess. Journal of Official Statistics 6(1), 3–73.
//   - Bandara, K., Hyndman, R. J. & Bergmeir, C. (2021). MSTL: a
//     seasonal-trend decomposition algorithm for time series with
//     multiple seasonal patterns. arXiv:2107.13462.
func MSTL(x []float64, periods []int) (*Decomposition, error) {
	n := len(x)
	for i, v := range x {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return nil, fmt.Errorf("%w: MSTL needs a complete series; value %d is %v", ErrBadOptions, i+1, v)
		}
	}
	var ps []int
	for _, m := range periods {
		if m < 2 {
			return nil, fmt.Errorf("%w: MSTL period %d: want at least 2 steps", ErrBadOptions, m)
		}
		if n > 2*m {
			ps = append(ps, m)
		}
	}
	sort.Ints(ps)
	d := &Decomposition{Periods: ps, Seasonal: make([][]float64, len(ps))}
	deseas := append([]float64(nil), x...)
	trend := make([]float64, n)
	if len(ps) == 0 {
		// no cycle has two full cycles of data: all trend
		d.Trend = deseas
		d.Remainder = make([]float64, n)
		return d, nil
	}
	for i := range ps {
		d.Seasonal[i] = make([]float64, n)
	}
	for iter := 0; iter < 2; iter++ {
		for i, m := range ps {
			for t := range deseas {
				deseas[t] += d.Seasonal[i][t]
			}
			s, tr := stl(deseas, m, 7+4*(i+1))
			copy(d.Seasonal[i], s)
			copy(trend, tr)
			for t := range deseas {
				deseas[t] -= s[t]
			}
		}
	}
	d.Trend = trend
	d.Remainder = make([]float64, n)
	for t := range deseas {
		d.Remainder[t] = deseas[t] - trend[t]
	}
	return d, nil
}

// jumpOf is STL's default jump for a window: ⌈q/10⌉ (Cleveland et al.
// 1990, §3).
func jumpOf(q int) int { return (q + 9) / 10 }

func nextOdd(v float64) int {
	k := int(math.Round(v))
	if k%2 == 0 {
		k++
	}
	return k
}

// stl is STL without robustness weights (Cleveland et al. 1990, §2, the
// inner loop twice) with seasonal window ns (odd) at period np; it returns
// the seasonal and trend components. Every smoother is evaluated at every
// point (no interpolation between jumps).
func stl(y []float64, np, ns int) (season, trend []float64) {
	n := len(y)
	nt := nextOdd(math.Ceil(1.5 * float64(np) / (1 - 1.5/float64(ns))))
	nl := nextOdd(float64(np))
	season = make([]float64, n)
	trend = make([]float64, n)
	work := make([]float64, n)
	c := make([]float64, n+2*np)
	for pass := 0; pass < 2; pass++ {
		// 1. detrend; 2. cycle-subseries smoothing, extended one cycle each side
		for t := range work {
			work[t] = y[t] - trend[t]
		}
		cycleSubseries(work, np, ns, c)
		// 3. low-pass filter of the smoothed subseries
		l := lowPass(c, np, nl)
		// 4. seasonal = C − L, 5. deseasonalise, 6. trend smoothing
		for t := 0; t < n; t++ {
			season[t] = c[np+t] - l[t]
			work[t] = y[t] - season[t]
		}
		loessAll(work, nt, 1, jumpOf(nt), trend)
	}
	return season, trend
}

// cycleSubseries smooths each cycle-subseries of y (period np) by loess of
// degree 0 with window ns, evaluated at its points and one step beyond each
// end; c (length len(y)+2np) receives the values in time order, from one
// cycle before the series to one cycle after.
func cycleSubseries(y []float64, np, ns int, c []float64) {
	n := len(y)
	sub := make([]float64, 0, n/np+1)
	sm := make([]float64, n/np+1)
	scratch := make([]float64, ns)
	for j := 0; j < np; j++ {
		sub = sub[:0]
		for t := j; t < n; t += np {
			sub = append(sub, y[t])
		}
		k := len(sub)
		loessAll(sub, ns, 0, jumpOf(ns), sm[:k])
		// extrapolate to positions −1 and k (0-based)
		lo := sm[0]
		if v, ok := loessAt(sub, ns, 0, -1, 0, min(ns, k)-1, scratch); ok {
			lo = v
		}
		hi := sm[k-1]
		if v, ok := loessAt(sub, ns, 0, float64(k), max(0, k-ns), k-1, scratch); ok {
			hi = v
		}
		c[j] = lo
		for i := 0; i < k; i++ {
			c[np+j+i*np] = sm[i]
		}
		c[np+j+k*np] = hi
	}
}

// lowPass is STL's low-pass filter of c: moving averages of lengths np, np
// and 3, then loess of degree 1 with window nl; the result has len(c) − 2np
// values.
func lowPass(c []float64, np, nl int) []float64 {
	a := movingAverage(c, np)
	a = movingAverage(a, np)
	a = movingAverage(a, 3)
	out := make([]float64, len(a))
	loessAll(a, nl, 1, jumpOf(nl), out)
	return out
}

func movingAverage(x []float64, m int) []float64 {
	out := make([]float64, len(x)-m+1)
	s := 0.0
	for i := 0; i < m; i++ {
		s += x[i]
	}
	out[0] = s / float64(m)
	for i := 1; i < len(out); i++ {
		s += x[i+m-1] - x[i-1]
		out[i] = s / float64(m)
	}
	return out
}

// loessAll evaluates the loess smooth of y (positions 0…n−1) with window q
// and degree deg into out: the q nearest points, shifted inside the series
// at its ends (Cleveland et al. 1990, §2.1), at every jump-th position and
// the last, linearly interpolated in between (§3, the jump parameters).
func loessAll(y []float64, q, deg, jump int, out []float64) {
	n := len(y)
	nj := max(1, min(jump, n-1))
	half := (q + 1) / 2
	scratch := make([]float64, min(q, n))
	at := func(i int) {
		left, right := 0, n-1
		if q < n {
			switch {
			case i < half-1:
				left, right = 0, q-1
			case i >= n-half:
				left, right = n-q, n-1
			default:
				left, right = i-half+1, i-half+q
			}
		}
		v, ok := loessAt(y, q, deg, float64(i), left, right, scratch)
		if !ok {
			v = y[i]
		}
		out[i] = v
	}
	if n == 1 {
		out[0] = y[0]
		return
	}
	for i := 0; i < n; i += nj {
		at(i)
	}
	if nj == 1 {
		return
	}
	for i := 0; i+nj < n; i += nj {
		d := (out[i+nj] - out[i]) / float64(nj)
		for j := i + 1; j < i+nj; j++ {
			out[j] = out[i] + d*float64(j-i)
		}
	}
	k := ((n - 1) / nj) * nj
	if k != n-1 {
		at(n - 1)
		if k != n-2 {
			d := (out[n-1] - out[k]) / float64(n-1-k)
			for j := k + 1; j < n-1; j++ {
				out[j] = out[k] + d*float64(j-k)
			}
		}
	}
}

// loessAt is the local fit at position x from the points left…right with
// tricube weights over the distance h to the farthest of them (widened by
// (q − n)/2 when the window exceeds the series), degree 0 (weighted mean)
// or 1 (weighted line); ok is false when every weight is zero.
// scratch holds at least right − left + 1 values.
func loessAt(y []float64, q, deg int, x float64, left, right int, scratch []float64) (float64, bool) {
	ws := scratch[:right-left+1]
	n := len(y)
	h := math.Max(x-float64(left), float64(right)-x)
	if q > n {
		h += float64((q - n) / 2)
	}
	h9, h1 := 0.999*h, 0.001*h
	sw := 0.0
	for j := left; j <= right; j++ {
		r := math.Abs(float64(j) - x)
		wj := 0.0
		if r <= h9 {
			if r <= h1 {
				wj = 1
			} else {
				u := r / h
				u = 1 - u*u*u
				wj = u * u * u
			}
		}
		ws[j-left] = wj
		sw += wj
	}
	if sw <= 0 {
		return 0, false
	}
	for j := range ws {
		ws[j] /= sw
	}
	if deg > 0 && h > 0 {
		a := 0.0
		for j := left; j <= right; j++ {
			a += ws[j-left] * float64(j)
		}
		b := x - a
		cc := 0.0
		for j := left; j <= right; j++ {
			dj := float64(j) - a
			cc += ws[j-left] * dj * dj
		}
		if math.Sqrt(cc) > 0.001*float64(n-1) {
			b /= cc
			for j := left; j <= right; j++ {
				ws[j-left] *= b*(float64(j)-a) + 1
			}
		}
	}
	s := 0.0
	for j := left; j <= right; j++ {
		s += ws[j-left] * y[j]
	}
	return s, true
}

// MSTLChoice is the decomposition-plus-ARIMA route for several cycles
// (Bandara, Hyndman & Bergmeir 2021, §3): MSTL, the automatic ARIMA choice
// of Select without seasonal terms on the seasonally adjusted series, and
// each seasonal component carried forward by its last full cycle.
type MSTLChoice struct {
	Decomposition *Decomposition
	Adjusted      *Choice // the choice on the seasonally adjusted series
	adj           []float64
}

// SelectMSTL runs the route on the complete series x with the cycles
// periods (whole steps); o configures the order search on the adjusted
// series (o.Period and o.Seasons are ignored).
func SelectMSTL(x []float64, periods []int, o Options) (*MSTLChoice, error) {
	d, err := MSTL(x, periods)
	if err != nil {
		return nil, err
	}
	adj := d.Adjusted()
	o.Period, o.Seasons = 0, nil
	c, err := Select(adj, o)
	if err != nil {
		return nil, err
	}
	return &MSTLChoice{Decomposition: d, Adjusted: c, adj: adj}, nil
}

// Forecast returns the h-step point forecasts: the adjusted series'
// forecast (the median on the raw scale, the inverse of the transform)
// plus the seasonal components' last cycles.
func (m *MSTLChoice) Forecast(h int) ([]float64, error) {
	c := m.Adjusted
	w := make([]float64, len(m.adj))
	if err := c.Transform.ForwardSlice(w, m.adj); err != nil {
		return nil, fmt.Errorf("%w: %w", ErrDomain, err)
	}
	f, err := arima.NewFilter(c.Result.Model, h)
	if err != nil {
		return nil, err
	}
	f.Steps(w)
	mean, v := make([]float64, h), make([]float64, h)
	f.Forecast(mean, v)
	seas := make([]float64, h)
	m.Decomposition.SeasonalNaive(seas)
	for k := range mean {
		y, ok := c.Transform.Inverse(mean[k])
		if !ok {
			return nil, fmt.Errorf("%w: forecast %d outside the inverse transform's domain", ErrDomain, k+1)
		}
		mean[k] = y + seas[k]
	}
	return mean, nil
}
