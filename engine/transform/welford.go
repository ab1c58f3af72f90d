package transform

import "math"

// Welford is a running mean and variance, updated one observation at a time without
// catastrophic cancellation:
//
//	N ← N + 1,  δ = x − Mean,  Mean ← Mean + δ/N,  M2 ← M2 + δ·(x − Mean)
//
// so that the sample variance is M2/(N − 1). The zero value is an empty accumulator.
//
// References:
//   - Welford, B. P. (1962). Note on a method for calculating corrected sums of squares and
//     products. Technometrics 4(3), 419–420.
type Welford struct {
	N        int64
	Mean, M2 float64
}

// Add includes x; NaN (missing) and ±Inf are skipped.
func (w *Welford) Add(x float64) {
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return
	}
	w.N++
	d := x - w.Mean
	w.Mean += d / float64(w.N)
	w.M2 += d * (x - w.Mean)
}

// Std is the sample standard deviation sqrt(M2/(N − 1)); 0 when N < 2.
func (w Welford) Std() float64 {
	if w.N < 2 {
		return 0
	}
	return math.Sqrt(w.M2 / float64(w.N-1))
}

// Freeze returns t with its z-score fixed from the series x (missing values skipped): for
// scaled-exp Loc is the mean and Scale the sample standard deviation of x; every other
// transform is returned unchanged. See FreezeFrom.
func Freeze(t Transform, x []float64) Transform {
	if t.Name != ScaledExp {
		return t
	}
	var acc Welford
	for _, v := range x {
		acc.Add(v)
	}
	return FreezeFrom(t, acc)
}

// FreezeFrom is Freeze from a running estimate, e.g. the one a daemon keeps up to date
// between refits. With fewer than two observations, or a constant series, Scale is 1 so that
// the transform stays invertible.
func FreezeFrom(t Transform, acc Welford) Transform {
	if t.Name != ScaledExp {
		return t
	}
	t.Loc, t.Scale = acc.Mean, acc.Std()
	if !(t.Scale > 0) {
		t.Scale = 1
	}
	return t
}
