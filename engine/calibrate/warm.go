package calibrate

import (
	"fmt"
	"math"
	"slices"

	"forewarn/engine/arima"
)

// DefaultWarmOrigins is the number of forecast origins WarmStart uses at
// most when WarmOptions.Origins is 0.
const DefaultWarmOrigins = 64

// DefaultPrior is the weight, in forecast errors, with which WarmStart
// shrinks each horizon's empirical factor towards the previous horizon's
// (towards 1 at h = 1) when WarmOptions.Prior is 0.
const DefaultPrior = 4

// WarmOptions are the optional knobs of WarmStart; nil or the zero value
// of a field means its default.
type WarmOptions struct {
	Origins int     // N, the most forecast origins to evaluate; 0 means DefaultWarmOrigins
	Prior   float64 // n₀ ≥ 0, the shrinkage weight; 0 means DefaultPrior, negative means none
}

// WarmInfo tells what WarmStart learned from.
type WarmInfo struct {
	Origins int   // forecast origins evaluated
	Errors  []int // per horizon h (index h−1): forecast errors behind its thresholds
}

// WarmStart sets every threshold from the forecasts the model m would have
// issued over w, the series' window on the model's scale (NaN: missing),
// in one pass of the model's filter (empirical out-of-sample prediction
// intervals, Williams & Goodman 1971; Lee & Scholtes 2014):
//
//  1. The filter steps through w once. At N origins t (the last one at
//     len(w) − 2, the others evenly spaced back to the first origin at which
//     the filter is ready, at most o.Origins of them) it forecasts H steps,
//     ŷ_{t+h|t} and s_{t+h|t}.
//  2. Each forecast with an observed target inside w gives z = (w_{t+h} −
//     ŷ_{t+h|t})/s_{t+h|t}, kept per horizon: n_h values.
//  3. Learn: per horizon and level the finite-sample conformal quantile
//     of the |z| (the normal-shape scale √(Σ z²/n_h) when n_h is too small
//     for its rank), as a factor of Φ⁻¹(1 − α_l/2), shrunk towards the
//     previous horizon's with weight n₀. The online updates then fit each
//     level's threshold to its own quantile.
//
// The model's parameters were estimated on all of w, so these errors leave
// out the parameters' own uncertainty; the online updates take it up.
// Pending forecasts and the coverage record are kept.
//
// Cost: one filter step per value of w and N forecasts of H steps, each
// O(H·m²) for a state of dimension m, plus the errors' sums:
// O(len(w)·m + N·H·m²). It allocates H·N floats.
func (c *Calibrator) WarmStart(m *arima.Model, w []float64, o *WarmOptions) (WarmInfo, error) {
	var opt WarmOptions
	if o != nil {
		opt = *o
	}
	if opt.Origins == 0 {
		opt.Origins = DefaultWarmOrigins
	}
	if opt.Origins < 0 {
		return WarmInfo{}, fmt.Errorf("%w: %d origins (want ≥ 1)", ErrWarm, opt.Origins)
	}
	switch {
	case opt.Prior == 0:
		opt.Prior = DefaultPrior
	case opt.Prior < 0:
		opt.Prior = 0
	case math.IsNaN(opt.Prior) || math.IsInf(opt.Prior, 0):
		return WarmInfo{}, fmt.Errorf("%w: prior %v", ErrWarm, opt.Prior)
	}
	H, n := c.h, len(w)
	f, err := arima.NewFilter(m, H)
	if err != nil {
		return WarmInfo{}, fmt.Errorf("%w: %w", ErrWarm, err)
	}
	// Readiness depends only on the first d + s·D values, so the first
	// origin is known once the filter is ready; the same pass goes on.
	first := -1
	for t := 0; t < n; t++ {
		f.Step(w[t])
		if f.Ready() {
			first = t
			break
		}
	}
	if first < 0 || first > n-2 {
		return WarmInfo{}, fmt.Errorf("%w: %d values leave no forecast origin with a later value", ErrWarm, n)
	}
	span := n - 1 - first // candidate origins first..n−2
	N := min(opt.Origins, span)
	stride := (span + N - 1) / N
	N = (span + stride - 1) / stride
	// origins n−2, n−2−stride, …: the smallest one ≥ first
	start := n - 2 - (N-1)*stride

	zs := make([]float64, H*N)
	cnt := make([]int, H)
	mean, vr := make([]float64, H), make([]float64, H)
	origins := 0
	for t := first; t <= n-2; t++ {
		if t > first {
			f.Step(w[t])
		}
		if t < start || (t-start)%stride != 0 {
			continue
		}
		hh := min(H, n-1-t)
		f.Forecast(mean[:hh], vr[:hh])
		origins++
		for j := 0; j < hh; j++ {
			a := w[t+1+j]
			s := math.Sqrt(vr[j])
			if math.IsNaN(a) || math.IsNaN(mean[j]) || !(s > 0) || math.IsInf(s, 0) {
				continue
			}
			zs[j*N+cnt[j]] = math.Abs(a-mean[j]) / s
			cnt[j]++
		}
	}
	e := Errors{Z: make([][]float64, H)}
	for h := range e.Z {
		e.Z[h] = zs[h*N : h*N+cnt[h]]
	}
	if err := c.Learn(&e, opt.Prior); err != nil {
		return WarmInfo{}, err
	}
	return WarmInfo{Origins: origins, Errors: cnt}, nil
}

// Errors holds standardised forecast errors |z| per horizon: Z[h−1] for
// horizon h, in any order.
type Errors struct {
	Z [][]float64
}

// NewErrors returns an empty collection for horizons 1..H.
func NewErrors(H int) *Errors { return &Errors{Z: make([][]float64, H)} }

// Add adds the errors of one forecast: for each step j with an observed
// actual[j] and a positive finite variance[j], |actual[j] − mean[j]|/√variance[j]
// goes to horizon j+1. Steps beyond H or beyond len(actual) are ignored.
func (e *Errors) Add(mean, variance, actual []float64) {
	n := min(len(mean), len(variance), len(actual), len(e.Z))
	for j := 0; j < n; j++ {
		s := math.Sqrt(variance[j])
		d := math.Abs(actual[j] - mean[j])
		if math.IsNaN(d) || math.IsInf(d, 0) || !(s > 0) || math.IsInf(s, 0) {
			continue
		}
		e.Z[j] = append(e.Z[j], d/s)
	}
}

// Learn sets every threshold from the errors in e (step 3 of WarmStart).
// Per horizon h with n_h errors and level l (miss rate α_l):
//
//   - when n_h is large enough for the level, ⌈(n_h + 1)(1 − α_l)⌉ ≤ n_h,
//     the empirical factor is the finite-sample conformal quantile of the
//     |z|, the ⌈(n_h + 1)(1 − α_l)⌉-th smallest (split conformal
//     prediction, Vovk, Gammerman & Shafer 2005; Angelopoulos & Bates 2021,
//     §1.1), divided by Φ⁻¹(1 − α_l/2): it takes each level's band from its
//     own tail of the errors, whatever their shape, and the rank's n + 1
//     widens it for few errors;
//   - otherwise (too few errors for the rank: n_h < 19 at 95 %) it is the
//     normal-shape scale √(mean z²) (a parametric empirical interval,
//     Williams & Goodman 1971).
//
// Each factor is shrunk towards the previous horizon's at the same level
// with weight prior (≥ 0): f_{h,l} = (n_h f̂_{h,l} + prior·f_{h−1,l})/(n_h +
// prior), f_{0,l} = 1, and q_{h,l} = f_{h,l}·Φ⁻¹(1 − α_l/2); a horizon
// without errors takes its predecessor's factors. It returns an error
// wrapping ErrWarm, and changes nothing, when e holds no error at all or
// has another horizon. It sorts each e.Z[h] in place.
func (c *Calibrator) Learn(e *Errors, prior float64) error {
	if len(e.Z) != c.h {
		return fmt.Errorf("%w: errors for %d horizons, the calibrator has %d", ErrWarm, len(e.Z), c.h)
	}
	if !(prior >= 0) || math.IsInf(prior, 0) {
		return fmt.Errorf("%w: prior %v (want ≥ 0)", ErrWarm, prior)
	}
	total := 0
	for _, z := range e.Z {
		total += len(z)
	}
	if total == 0 {
		return fmt.Errorf("%w: no forecast error to learn from", ErrWarm)
	}
	prev := make([]float64, c.nl)
	for l := range prev {
		prev[l] = 1
	}
	for h := 0; h < c.h; h++ {
		z := e.Z[h]
		k := len(z)
		if k > 0 {
			slices.Sort(z)
			ss := 0.0
			for _, v := range z {
				ss += v * v
			}
			rms := math.Sqrt(ss / float64(k))
			for l := 0; l < c.nl; l++ {
				emp := rms
				if r := int(math.Ceil(float64(k+1) * (1 - c.miss[l]))); r <= k {
					emp = z[r-1] / c.zq[l]
				}
				prev[l] = (float64(k)*emp + prior*prev[l]) / (float64(k) + prior)
			}
		}
		for l := 0; l < c.nl; l++ {
			c.q[h*c.nl+l] = prev[l] * c.zq[l]
		}
	}
	return nil
}
