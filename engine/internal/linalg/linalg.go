// Package linalg holds the small dense Cholesky routines the engine's
// regression solves share: matrices are row-major k×k slices, the caller
// owns every buffer, and nothing allocates.
//
// The factor is the Cholesky–Banachiewicz recursion in column order
// (Golub & Van Loan 2013, §4.2):
//
//	L_jj = sqrt(A_jj − Σ_{p<j} L_jp²),  L_ij = (A_ij − Σ_{p<j} L_ip L_jp) / L_jj,  i > j
//
// and the solve of L Lᵀ x = b is a forward then a backward substitution.
//
// References:
//   - Golub, G. H. & Van Loan, C. F. (2013). Matrix Computations, 4th ed., §4.2.
package linalg

import "math"

// Cholesky sets l to the lower Cholesky factor of the symmetric k×k matrix
// a (its lower triangle is read) and reports whether a is numerically
// positive definite: a pivot at or below 1e-12·max(1, a_jj) fails.
func Cholesky(l, a []float64, k int) bool {
	for i := range l[:k*k] {
		l[i] = 0
	}
	for j := 0; j < k; j++ {
		s := a[j*k+j]
		for p := 0; p < j; p++ {
			s -= l[j*k+p] * l[j*k+p]
		}
		if !(s > 1e-12*math.Max(1, a[j*k+j])) {
			return false
		}
		l[j*k+j] = math.Sqrt(s)
		for i := j + 1; i < k; i++ {
			v := a[i*k+j]
			for p := 0; p < j; p++ {
				v -= l[i*k+p] * l[j*k+p]
			}
			l[i*k+j] = v / l[j*k+j]
		}
	}
	return true
}

// CholSolve solves L Lᵀ x = b for the lower factor l (x and b may not
// alias).
func CholSolve(x, l, b []float64, k int) {
	for i := 0; i < k; i++ {
		v := b[i]
		for p := 0; p < i; p++ {
			v -= l[i*k+p] * x[p]
		}
		x[i] = v / l[i*k+i]
	}
	for i := k - 1; i >= 0; i-- {
		v := x[i]
		for p := i + 1; p < k; p++ {
			v -= l[p*k+i] * x[p]
		}
		x[i] = v / l[i*k+i]
	}
}
