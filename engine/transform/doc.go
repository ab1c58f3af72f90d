// Package transform maps a raw series onto the scale a model is fitted on, and maps the
// model's forecasts back into raw units exactly.
//
// A Transform is a plain value: a name ("none", "log", "boxcox", "scaled-exp"), the Box-Cox λ,
// and a frozen location and scale. With g the named function, the model scale w is
//
//	none, log, boxcox:  w = (g(x) − Loc) / Scale,   g(x) = x, log x, (x^λ − 1)/λ
//	scaled-exp:         w = exp((x − Loc) / Scale)
//
// Scale 0 is read as 1, so the zero value of Loc and Scale means "no scaling". For scaled-exp
// the z-score comes before exp, which keeps exp from overflowing (exp overflows a float64
// above about 709.78; common practice). Freeze fills Loc and Scale for scaled-exp from the
// series a model is fitted to; a Welford accumulator keeps the running estimate for the next
// refit while the frozen values stay with the fitted model.
//
// # Inversion into raw units
//
// Every inverse is monotone, so the median and every band endpoint map exactly through
// Inverse and a band's coverage on the model scale is its coverage in raw units. Mean gives
// the bias-adjusted back-transformed mean (a second-order expansion for log and boxcox,
// Gauss–Hermite quadrature for scaled-exp). A value whose image lies outside the inverse's
// domain, or would not be a finite float64, comes back with ok = false: the caller reports
// that band bound as unbounded (null in JSON). Inverse never returns NaN with ok = true.
// Multi-step inversion needs no state here: a model's h-step forecast distribution on the
// model scale already follows the forecast path, and each step is inverted on its own.
//
// A counter never decreases, so its forecasts and bands are clipped at its last value after
// inversion; FloorAt does that and is left for the caller to apply (only the caller knows the
// series' kind).
//
// # Likelihood on the raw scale
//
// A model's log-likelihood on the model scale plus LogJacobian of the raw observations is the
// log-likelihood of the raw series, so fits under different transforms compare by AIC or AICc.
//
// # Missing values
//
// NaN is a missing value: Forward and ForwardSlice keep it, LogJacobian, Guerrero, Welford and
// Freeze skip it.
//
// # Concurrency
//
// Everything is a function of its arguments; values may be shared between goroutines freely.
// Welford is a value with pointer-receiver Add and needs the caller's synchronisation.
package transform
