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
	L := e.chol[:k*k]
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
			s := a
			for l := 0; l < i; l++ {
				s -= L[j*k+l] * L[i*k+l]
			}
			if d := L[i*k+i]; d > 0 {
				L[j*k+i] = s / d
			} else {
				L[j*k+i] = 0
			}
		}
		s := sjj
		for l := 0; l < j; l++ {
			s -= L[j*k+l] * L[j*k+l]
		}
		switch {
		case s < -psdTol*scale:
			return fmt.Errorf("pivot %d is %v: %w", j+1, s, ErrNotPSD)
		case s <= pivotTol*scale:
			L[j*k+j] = 0
		default:
			L[j*k+j] = math.Sqrt(s)
		}
		for i := j + 1; i < k; i++ {
			L[j*k+i] = 0
		}
	}
	return nil
}
