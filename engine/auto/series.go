package auto

import (
	"math"
	"math/cmplx"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/stat"

	"forewarn/engine/transform"
)

// allPositive reports whether every observed value is > 0.
func allPositive(y []float64) bool {
	for _, v := range y {
		if v <= 0 {
			return false
		}
	}
	return true
}

// concaveGrowth reports whether the least-squares quadratic trend
// y ≈ a + b·t + c·t² through the observed values (t centred and scaled to
// [−1, 1]) rises at the mean time (b > 0 after centring) and bends down
// with a t-ratio of c below −2 (a heuristic; common practice).
func concaveGrowth(y []float64) bool {
	var ts, ys []float64
	n := float64(len(y) - 1)
	for i, v := range y {
		if !math.IsNaN(v) {
			ts = append(ts, 2*float64(i)/n-1)
			ys = append(ys, v)
		}
	}
	k := len(ys)
	if k < 6 {
		return false
	}
	tbar := stat.Mean(ts, nil)
	x := mat.NewDense(k, 3, nil)
	for i, t := range ts {
		u := t - tbar
		x.Set(i, 0, 1)
		x.Set(i, 1, u)
		x.Set(i, 2, u*u)
	}
	yv := mat.NewVecDense(k, ys)
	var qr mat.QR
	qr.Factorize(x)
	var beta mat.VecDense
	if err := qr.SolveVecTo(&beta, false, yv); err != nil {
		return false
	}
	var fit mat.VecDense
	fit.MulVec(x, &beta)
	var rss float64
	for i := range ys {
		r := ys[i] - fit.AtVec(i)
		rss += r * r
	}
	s2 := rss / float64(k-3)
	var xtx mat.Dense
	xtx.Mul(x.T(), x)
	var inv mat.Dense
	if err := inv.Inverse(&xtx); err != nil {
		return false
	}
	se := math.Sqrt(s2 * inv.At(2, 2))
	b, c := beta.AtVec(1), beta.AtVec(2)
	return b > 0 && se > 0 && c/se < -2
}

// jacobian is t.LogJacobian over the observed values of y after the first
// skip observed ones: the observations whose density the likelihood of the
// differenced series carries.
func jacobian(t transform.Transform, y []float64, skip int) float64 {
	x := make([]float64, len(y))
	copy(x, y)
	for i := 0; i < len(x) && skip > 0; i++ {
		if !math.IsNaN(x[i]) {
			x[i] = math.NaN()
			skip--
		}
	}
	return t.LogJacobian(x)
}

// interpolate returns y without leading and trailing missing values and
// with interior ones filled linearly (for the differencing tests only).
func interpolate(y []float64) []float64 {
	lo, hi := 0, len(y)
	for lo < hi && math.IsNaN(y[lo]) {
		lo++
	}
	for hi > lo && math.IsNaN(y[hi-1]) {
		hi--
	}
	x := make([]float64, hi-lo)
	copy(x, y[lo:hi])
	for i := 0; i < len(x); i++ {
		if !math.IsNaN(x[i]) {
			continue
		}
		j := i
		for math.IsNaN(x[j]) {
			j++
		}
		a, b := x[i-1], x[j]
		for k := i; k < j; k++ {
			x[k] = a + (b-a)*float64(k-i+1)/float64(j-i+1)
		}
		i = j
	}
	return x
}

// diff returns x_t − x_{t−lag}.
func diff(x []float64, lag int) []float64 {
	if len(x) <= lag {
		return nil
	}
	out := make([]float64, len(x)-lag)
	for i := range out {
		out[i] = x[i+lag] - x[i]
	}
	return out
}

// minRootModulus returns the smallest modulus of the roots of
//
//	1 + sign·(c_1 z + c_2 z² + … + c_p z^p)
//
// (sign −1 for an AR polynomial φ(z) = 1 − Σ φ_i z^i, +1 for an MA
// polynomial θ(z) = 1 + Σ θ_i z^i), or +Inf when it has none. The roots
// are the reciprocals of the eigenvalues of the companion matrix whose
// first row is −sign·c.
func minRootModulus(c []float64, sign float64) float64 {
	p := len(c)
	for p > 0 && c[p-1] == 0 {
		p--
	}
	switch p {
	case 0:
		return math.Inf(1)
	case 1:
		return 1 / math.Abs(c[0])
	}
	a := mat.NewDense(p, p, nil)
	for j := 0; j < p; j++ {
		a.Set(0, j, -sign*c[j])
	}
	for i := 1; i < p; i++ {
		a.Set(i, i-1, 1)
	}
	var e mat.Eigen
	if !e.Factorize(a, mat.EigenNone) {
		return 0 // cannot tell: treat as on the circle
	}
	maxAbs := 0.0
	for _, v := range e.Values(nil) {
		maxAbs = math.Max(maxAbs, cmplx.Abs(v))
	}
	return 1 / maxAbs
}
