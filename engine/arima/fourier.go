package arima

import (
	"fmt"
	"math"
	"strconv"
)

// Regressors supplies the values of a model's external regressors at an
// absolute data time t (seconds, any fixed origin such as the Unix epoch).
// Filter.Step calls it once per step and Filter.Forecast once per horizon,
// so an implementation must not allocate.
type Regressors interface {
	// NumRegressors is the number of columns, Model.Spec.NX.
	NumRegressors() int
	// Regressors writes the row x_t (NumRegressors values) into dst.
	Regressors(dst []float64, t float64)
}

// RegressorPath is an optional interface of a Regressors whose values at
// equally spaced times can be combined in one pass faster than row by row
// (Fourier does so by rotations). The Filter uses it for forecasts.
type RegressorPath interface {
	// LinearPath writes Σ_j β_j x_j(t0 + k·step) into dst[k].
	LinearPath(dst, beta []float64, t0, step float64)
}

// Cycle is one seasonal cycle given as a duration, with the number of
// sin/cos pairs (harmonics 1..K) that represent it.
type Cycle struct {
	Seconds float64 // length of the cycle; need not be a whole number of steps
	K       int     // harmonics 1..K
}

// Fourier generates the Fourier terms of one or more cycles: for cycle c
// of length L_c and harmonic k = 1..K_c the pair
//
//	sin(2π k φ_c(t)),  cos(2π k φ_c(t)),   φ_c(t) = (t mod L_c) / L_c,
//
// the terms of dynamic harmonic regression (Hyndman & Athanasopoulos,
// Forecasting: Principles and Practice, 3rd ed., §10.5 and §12.1; the same
// columns as fourier() in R's forecast package). The phase comes from the
// absolute data time t, never from a count of steps, so a restart, a gap or
// another machine continuing the series keeps it.
//
// Column order and pruning follow the same rules as R forecast 8.20
// fourier(): cycles in the order given, for each harmonic the sine then the
// cosine; a harmonic whose frequency k/L_c equals one already generated for
// an earlier cycle (a weekly harmonic 7 is the daily harmonic 1) is left
// out; a sine that is zero at every step (k/L_c = 1/(2·step), the Nyquist
// harmonic, detectable only when a step is given) is left out.
//
// Origin. fourier() counts time as t = 1, 2, … from the first observation,
// so its phase at observation i (1-based) is i/period. Fourier measures it
// from t = 0 of the data clock. For a series whose first observation is at
// time t₁ with step Δ, the two agree exactly when t₁ = Δ (the test series
// are laid out so); otherwise each pair differs by the fixed rotation
// 2πk(t₁ − Δ)/L_c, which spans the same columns and so changes neither the
// likelihood nor the forecasts, only the split of β within each pair.
type Fourier struct {
	cycles []Cycle
	keep   [][]uint8 // per cycle and harmonic k−1: 0 dropped, 1 cosine only, 2 both
	ncol   int
	names  []string
}

// MaxFourierTerms bounds the number of columns a Fourier generator makes.
const MaxFourierTerms = 400

// NewFourier returns the generator of the cycles' Fourier terms. step (the
// series' step in the same unit as the cycles, 0 when unknown) serves only
// to drop the all-zero Nyquist sines and to check that each cycle spans at
// least two steps and 2K ≤ L/step. It errors on a non-positive or
// non-finite cycle, K < 1, or too many terms.
func NewFourier(cycles []Cycle, step float64) (*Fourier, error) {
	if math.IsNaN(step) || math.IsInf(step, 0) || step < 0 {
		return nil, fmt.Errorf("arima: fourier: step %v: want a finite value ≥ 0", step)
	}
	f := &Fourier{cycles: append([]Cycle(nil), cycles...)}
	var seen []float64
	for ci, c := range cycles {
		if !(c.Seconds > 0) || math.IsInf(c.Seconds, 0) {
			return nil, fmt.Errorf("arima: fourier: cycle %d is %v long: want a positive finite duration", ci+1, c.Seconds)
		}
		if c.K < 1 {
			return nil, fmt.Errorf("arima: fourier: cycle %d has K = %d pairs: want at least 1", ci+1, c.K)
		}
		if step > 0 {
			if c.Seconds < 2*step {
				return nil, fmt.Errorf("arima: fourier: cycle %d (%v) is shorter than two steps of %v", ci+1, c.Seconds, step)
			}
			if float64(2*c.K) > c.Seconds/step*(1+1e-12) {
				return nil, fmt.Errorf("arima: fourier: cycle %d: K = %d pairs exceed half the %v steps of the cycle", ci+1, c.K, c.Seconds/step)
			}
		}
		keep := make([]uint8, c.K)
		f.keep = append(f.keep, keep)
		for k := 1; k <= c.K; k++ {
			fr := float64(k) / c.Seconds
			if SeenFrequency(seen, fr) {
				continue
			}
			seen = append(seen, fr)
			hasSin := HasSine(k, step, c.Seconds)
			keep[k-1] = 1
			if hasSin {
				keep[k-1] = 2
			}
			lab := strconv.Itoa(k) + "-" + strconv.FormatFloat(c.Seconds, 'g', -1, 64)
			if hasSin {
				f.names = append(f.names, "S"+lab)
				f.ncol++
			}
			f.names = append(f.names, "C"+lab)
			f.ncol++
		}
	}
	if f.ncol > MaxFourierTerms {
		return nil, fmt.Errorf("arima: fourier: %d terms exceed the limit of %d", f.ncol, MaxFourierTerms)
	}
	return f, nil
}

// NumRegressors returns the number of columns.
func (f *Fourier) NumRegressors() int { return f.ncol }

// Names returns the column names, "S<k>-<L>" and "C<k>-<L>" (sine and
// cosine of harmonic k of the cycle of length L).
func (f *Fourier) Names() []string { return append([]string(nil), f.names...) }

// Regressors writes the terms at absolute time t into dst (len ≥
// NumRegressors). The phase of each cycle, (t mod L)/L, is computed exactly
// by math.Mod, so the values depend on t alone; harmonic k is reached from
// the fundamental by k−1 rotations (angle addition), one math.Sincos per
// cycle. It does not allocate.
func (f *Fourier) Regressors(dst []float64, t float64) {
	j := 0
	for ci, c := range f.cycles {
		ph := math.Mod(t, c.Seconds) / c.Seconds // exact remainder, in (−1, 1)
		s1, c1 := math.Sincos(2 * math.Pi * ph)
		s, co := s1, c1
		for _, kp := range f.keep[ci] {
			switch kp {
			case 2:
				dst[j], dst[j+1] = s, co
				j += 2
			case 1:
				dst[j] = co
				j++
			}
			s, co = s*c1+co*s1, co*c1-s*s1
		}
	}
}

// LinearPath writes Σ_j β_j x_j(t0 + k·step) into dst[k], k < len(dst):
// the regression part of a forecast path in one pass (RegressorPath). The
// terms at t0 are computed from absolute time as in Regressors; each
// later one by rotating with e^{i·2πk·step/L}, which keeps the error below
// about len(dst)·1e-16 relative. It does not allocate and, like
// Regressors, keeps no state, so one Fourier may serve many filters.
func (f *Fourier) LinearPath(dst, beta []float64, t0, step float64) {
	for i := range dst {
		dst[i] = 0
	}
	j := 0
	for ci, c := range f.cycles {
		ph := math.Mod(t0, c.Seconds) / c.Seconds
		s1, c1 := math.Sincos(2 * math.Pi * ph)
		ws1, wc1 := math.Sincos(2 * math.Pi * math.Mod(step, c.Seconds) / c.Seconds)
		zs, zc := s1, c1   // e^{ikθ(t0)}
		ws, wc := ws1, wc1 // e^{ik·2π step/L}
		for _, kp := range f.keep[ci] {
			if kp != 0 {
				bs, bc := 0.0, beta[j]
				if kp == 2 {
					bs, bc = beta[j], beta[j+1]
					j += 2
				} else {
					j++
				}
				s, co := zs, zc
				for i := range dst {
					dst[i] += bs*s + bc*co
					s, co = s*wc+co*ws, co*wc-s*ws
				}
			}
			zs, zc = zs*c1+zc*s1, zc*c1-zs*s1
			ws, wc = ws*wc1+wc*ws1, wc*wc1-ws*ws1
		}
	}
}

// Matrix returns the columns of the terms at times t0, t0+step, …,
// (n values each): X[j][i] is column j at time t0 + i·step.
func (f *Fourier) Matrix(t0, step float64, n int) [][]float64 {
	X := make([][]float64, f.ncol)
	for j := range X {
		X[j] = make([]float64, n)
	}
	row := make([]float64, f.ncol)
	for i := 0; i < n; i++ {
		f.Regressors(row, t0+float64(i)*step)
		for j, v := range row {
			X[j][i] = v
		}
	}
	return X
}

// SameFrequency reports whether the harmonic frequencies a and b (per
// second) are one: equal to a relative 1e-12 of b.
func SameFrequency(a, b float64) bool { return math.Abs(a-b) <= 1e-12*b }

// SeenFrequency reports whether fr is one of seen (SameFrequency): the
// Fourier terms leave out a frequency an earlier cycle already generated,
// as R forecast's fourier() does.
func SeenFrequency(seen []float64, fr float64) bool {
	for _, s := range seen {
		if SameFrequency(s, fr) {
			return true
		}
	}
	return false
}

// HasSine reports whether harmonic k of a cycle of L seconds has a sine
// term at steps of step seconds: not when 2·k·step/L is a whole number,
// for the sine is then zero at every step. Without a step (0) it has one.
func HasSine(k int, step, L float64) bool {
	if step <= 0 {
		return true
	}
	x := 2 * float64(k) * step / L
	return math.Abs(x-math.Round(x)) > 1e-12
}
