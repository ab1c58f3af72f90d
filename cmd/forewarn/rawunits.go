package main

import (
	"math"

	"gonum.org/v1/gonum/stat/distuv"

	"forewarn/engine/transform"
)

// rawForecast is a model-scale forecast in raw units: what forewarn fit
// prints and forewarn backtest scores.
type rawForecast struct {
	Mean, Median []float64   // one value per step
	Lower, Upper [][]float64 // one row per level, each one value per step
}

// toRawUnits maps the model-scale forecast N(mean[h], variance[h]) into raw
// units with the transform g (CONTRACT.md §3):
//
//	mean         = E g⁻¹(W), bias-adjusted (transform.Transform.Mean)
//	median       = g⁻¹(mean[h])
//	lower, upper = g⁻¹(mean[h] ∓ z·se),  se = √variance[h],  z = Φ⁻¹(½ + level/200)
//
// exact because g⁻¹ is monotone (endpoints swap for a decreasing one). A
// value outside the inverse's domain is NaN: an unbounded side of a band,
// null in JSON.
func toRawUnits(tr transform.Transform, mean, variance, levels []float64) rawForecast {
	return toRawUnitsWith(tr, mean, variance, levels, nil)
}

// toRawUnitsWith is toRawUnits with the multiplier of se given per step and
// level: thr[j·len(levels)+l] replaces z for step j+1 and level l (a
// calibrated band, engine/calibrate); nil means the normal quantile z.
func toRawUnitsWith(tr transform.Transform, mean, variance, levels, thr []float64) rawForecast {
	h := len(mean)
	out := rawForecast{Mean: make([]float64, h), Median: make([]float64, h)}
	for j := range mean {
		out.Mean[j] = invOrNaN(tr.Mean(mean[j], variance[j]))
		out.Median[j] = invOrNaN(tr.Median(mean[j]))
	}
	for li, l := range levels {
		z := distuv.UnitNormal.Quantile(0.5 + l/200)
		lo, hi := make([]float64, h), make([]float64, h)
		for j := range mean {
			se := math.Sqrt(variance[j])
			if thr != nil {
				z = thr[j*len(levels)+li]
			}
			a, b := invOrNaN(tr.Inverse(mean[j]-z*se)), invOrNaN(tr.Inverse(mean[j]+z*se))
			if !tr.Increasing() {
				a, b = b, a
			}
			lo[j], hi[j] = a, b
		}
		out.Lower = append(out.Lower, lo)
		out.Upper = append(out.Upper, hi)
	}
	return out
}

func invOrNaN(x float64, ok bool) float64 {
	if !ok {
		return math.NaN()
	}
	return x
}
