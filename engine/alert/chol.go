package alert

import (
	"fmt"
	"math"
)

// Tolerances of factor, relative to the largest variance on the window.
const (
	// symTol bounds |Σ_ij − Σ_ji| and |Σ_jj − Variance_j|.
	symTol = 1e-6
	// pivotTol: a pivot below pivotTol·scale is a zero direction (the
	// covariance is singular there, e.g. a deterministic component); a pivot
	// below −psdTol·scale means the matrix is not positive semi-definite.
	pivotTol = 1e-12
	psdTol   = 1e-8
)

// factor checks the leading k×k block of the h×h covariance cov and writes
// its lower Cholesky factor L (Σ = L Lᵀ) into e.chol with stride k.
//
// It is the Cholesky–Banachiewicz recursion (Golub & Van Loan 2013, §4.2,
// Algorithm 4.2.1 in row form):
//
//	L_jj = sqrt(Σ_jj − Σ_{i<j} L_ji²)
//	L_ji = (Σ_ji − Σ_{l<i} L_jl L_il) / L_ii,  i < j
//
// extended to positive semi-definite matrices: a pivot within rounding of
// zero gives a zero column, so the corresponding direction carries no noise.
//
// References:
//   - Golub, G. H. & Van Loan, C. F. (2013). Matrix Computations, 4th ed., §4.2.
func (e *Evaluator) factor(cov, variance []float64, h, k int) error {
	scale := 0.0
	for j := 0; j < k; j++ {
		scale = math.Max(scale, variance[j])
	}
	if scale == 0 {
		scale = 1
	}
	for j := 0; j < k; j++ {
		sjj := cov[j*h+j]
		if !finite(sjj) || math.Abs(sjj-variance[j]) > symTol*scale {
			return fmt.Errorf("covariance (%d,%d) = %v, variance %v: %w", j+1, j+1, sjj, variance[j], ErrCovariance)
		}
		for i := 0; i < j; i++ {
			a, b := cov[j*h+i], cov[i*h+j]
			if !finite(a) || !finite(b) || math.Abs(a-b) > symTol*scale {
				return fmt.Errorf("covariance (%d,%d) = %v but (%d,%d) = %v: %w", j+1, i+1, a, i+1, j+1, b, ErrCovariance)
			}
		}
	}
	return cholPSD(e.chol[:k*k], k, cov, h, k, scale)
}

// cholPSD writes the lower Cholesky factor of the leading n×n block of the
// positive semi-definite P (row-major, stride ldp) into L (stride ldl) by
// the recursion of factor; a pivot below pivotTol·scale gives a zero
// column, one below −psdTol·scale is ErrNotPSD. Only the lower triangle of
// P is read.
func cholPSD(L []float64, ldl int, P []float64, ldp, n int, scale float64) error {
	for j := 0; j < n; j++ {
		for i := 0; i < j; i++ {
			s := P[j*ldp+i]
			for l := 0; l < i; l++ {
				s -= L[j*ldl+l] * L[i*ldl+l]
			}
			if d := L[i*ldl+i]; d > 0 {
				L[j*ldl+i] = s / d
			} else {
				L[j*ldl+i] = 0
			}
		}
		s := P[j*ldp+j]
		for l := 0; l < j; l++ {
			s -= L[j*ldl+l] * L[j*ldl+l]
		}
		switch {
		case s < -psdTol*scale:
			return fmt.Errorf("pivot %d is %v: %w", j+1, s, ErrNotPSD)
		case s <= pivotTol*scale:
			L[j*ldl+j] = 0
		default:
			L[j*ldl+j] = math.Sqrt(s)
		}
		for i := j + 1; i < n; i++ {
			L[j*ldl+i] = 0
		}
	}
	return nil
}
