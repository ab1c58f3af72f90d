package arima

import (
	"fmt"
	"math"
)

// Profile is a periodic regressor set: one column per cycle, the cycle's
// seasonal shape looked up by the phase of absolute data time,
//
//	x_c(t) = s_c(φ_c(t)),   φ_c(t) = (t mod L_c) / L_c,
//
// where s_c is given at the M_c equally spaced phases k/M_c (k = 0…M_c−1)
// and linearly interpolated, periodically, in between. With a cycle of a
// whole number M_c of steps and times on the step grid the lookup hits the
// samples exactly; a cycle that is not a whole number of steps is sampled
// at M_c = round(L_c/step) phases and interpolated.
//
// The shapes are those of a seasonal decomposition at a refit (the last
// cycle of each seasonal component of MSTL, Bandara, Hyndman & Bergmeir
// 2021), so that a regression with ARIMA errors on these columns forecasts
// as the decomposition-plus-ARIMA route does: the seasonal part repeats
// its last cycle, the ARIMA errors carry the rest. As for Fourier, the
// phase comes from absolute time, never from a count of steps.
type Profile struct {
	cycles []float64   // L_c, in the unit of time
	shapes [][]float64 // M_c samples each, sample k at phase k/M_c
}

// NewProfile returns the regressors of the given cycles (positive, finite
// durations) and shapes (at least two finite samples per cycle). The
// shapes are copied.
func NewProfile(cycles []float64, shapes [][]float64) (*Profile, error) {
	if len(cycles) != len(shapes) {
		return nil, fmt.Errorf("arima: profile: %d cycles but %d shapes", len(cycles), len(shapes))
	}
	if len(cycles) == 0 {
		return nil, fmt.Errorf("arima: profile: no cycle")
	}
	p := &Profile{cycles: append([]float64(nil), cycles...), shapes: make([][]float64, len(shapes))}
	for c, L := range cycles {
		if !(L > 0) || math.IsInf(L, 0) {
			return nil, fmt.Errorf("arima: profile: cycle %d is %v long: want a positive finite duration", c+1, L)
		}
		if len(shapes[c]) < 2 {
			return nil, fmt.Errorf("arima: profile: cycle %d has %d shape samples: want at least 2", c+1, len(shapes[c]))
		}
		for k, v := range shapes[c] {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return nil, fmt.Errorf("arima: profile: cycle %d, sample %d is %v: want a finite value", c+1, k+1, v)
			}
		}
		p.shapes[c] = append([]float64(nil), shapes[c]...)
	}
	return p, nil
}

// NumRegressors returns the number of columns, one per cycle.
func (p *Profile) NumRegressors() int { return len(p.cycles) }

// Cycles returns the cycle lengths.
func (p *Profile) Cycles() []float64 { return append([]float64(nil), p.cycles...) }

// Shapes returns copies of the shapes, sample k of cycle c at phase k/M_c.
func (p *Profile) Shapes() [][]float64 {
	out := make([][]float64, len(p.shapes))
	for c, s := range p.shapes {
		out[c] = append([]float64(nil), s...)
	}
	return out
}

// at is the shape of cycle c at absolute time t.
func (p *Profile) at(c int, t float64) float64 {
	s := p.shapes[c]
	return interp(s, phasePos(t, p.cycles[c], float64(len(s))))
}

// Regressors writes the row at absolute time t into dst. It does not
// allocate.
func (p *Profile) Regressors(dst []float64, t float64) {
	for c := range p.cycles {
		dst[c] = p.at(c, t)
	}
}

// LinearPath writes Σ_c β_c x_c(t0 + k·step) into dst[k] (RegressorPath).
// It does not allocate and keeps no state.
func (p *Profile) LinearPath(dst, beta []float64, t0, step float64) {
	for k := range dst {
		dst[k] = 0
	}
	for c, L := range p.cycles {
		s := p.shapes[c]
		M := float64(len(s))
		// the position in samples, advanced by the step's share of the
		// cycle at each lead (one remainder per cycle, not per lead)
		x := phasePos(t0, L, M)
		dx := phasePos(step, L, M)
		b := beta[c]
		for k := range dst {
			dst[k] += b * interp(s, x)
			x += dx
			if x >= M {
				x -= M
			}
		}
	}
}

// phasePos is (t mod L)/L·M in [0, M).
func phasePos(t, L, M float64) float64 {
	ph := math.Mod(t, L) / L
	if ph < 0 {
		ph++
	}
	x := ph * M
	if x >= M {
		x = 0
	}
	return x
}

// interp is the periodic linear interpolation of s at position x in
// [0, len(s)), exact at whole positions (to 1e-9 of a sample).
func interp(s []float64, x float64) float64 {
	M := len(s)
	i := int(x)
	fr := x - float64(i)
	if i >= M {
		i, fr = 0, 0
	}
	j := i + 1
	if j == M {
		j = 0
	}
	if fr < 1e-9 {
		return s[i]
	}
	if fr > 1-1e-9 {
		return s[j]
	}
	return s[i] + fr*(s[j]-s[i])
}

// Matrix returns the columns at times t0, t0+step, … (n values each):
// X[c][i] is column c at time t0 + i·step.
func (p *Profile) Matrix(t0, step float64, n int) [][]float64 {
	X := make([][]float64, len(p.cycles))
	for c := range X {
		X[c] = make([]float64, n)
		for i := range X[c] {
			X[c][i] = p.at(c, t0+float64(i)*step)
		}
	}
	return X
}

// LastCycleShape samples the last cycle of x (a seasonal component at
// times start, start+step, …) at the M = round(cycle/step) phases k/M of
// the cycle: sample k is x at the latest time τ ≤ the last time with
// phase k/M, linearly interpolated between the neighbouring steps (exact on
// the step grid for a whole cycle). It errors when x is shorter than one
// cycle, has a missing value in that cycle, or the cycle spans fewer than
// two steps.
func LastCycleShape(x []float64, start, step, cycle float64) ([]float64, error) {
	if !(step > 0) || !(cycle > 0) || math.IsInf(cycle, 0) || math.IsNaN(start) || math.IsInf(start, 0) {
		return nil, fmt.Errorf("arima: profile: start %v, step %v, cycle %v: want finite values, step and cycle positive", start, step, cycle)
	}
	M := int(math.Round(cycle / step))
	if M < 2 {
		return nil, fmt.Errorf("arima: profile: cycle %v is shorter than two steps of %v", cycle, step)
	}
	n := len(x)
	if float64(n) < cycle/step+1 {
		return nil, fmt.Errorf("arima: profile: %d values are less than one cycle of %v steps", n, cycle/step)
	}
	tEnd := start + float64(n-1)*step
	out := make([]float64, M)
	for k := range out {
		// latest τ ≤ tEnd with (τ mod L)/L = k/M
		back := math.Mod(tEnd-float64(k)*cycle/float64(M), cycle)
		if back < 0 {
			back += cycle
		}
		if back > cycle*(1-1e-12) {
			back = 0
		}
		pos := float64(n-1) - back/step
		i := int(math.Floor(pos + 1e-9))
		fr := pos - float64(i)
		if fr < 1e-9 {
			fr = 0
		}
		if i < 0 {
			return nil, fmt.Errorf("arima: profile: %d values are less than one cycle", n)
		}
		v := x[i]
		if fr > 0 && i+1 < n {
			v += fr * (x[i+1] - x[i])
		}
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return nil, fmt.Errorf("arima: profile: value %d of the last cycle is %v", i+1, v)
		}
		out[k] = v
	}
	return out, nil
}
