package plant

import "math"

// cholesky factors the leading n×n block of the symmetric positive-definite
// A into L (lower triangle). It reports false if A is not positive definite.
// Hand-written for fixed arrays: the hot loop must not allocate.
func cholesky(A *[MaxDOF][MaxDOF]float64, n int, L *[MaxDOF][MaxDOF]float64) bool {
	for j := 0; j < n; j++ {
		d := A[j][j]
		for k := 0; k < j; k++ {
			d -= L[j][k] * L[j][k]
		}
		if !(d > 0) {
			return false
		}
		d = math.Sqrt(d)
		L[j][j] = d
		for i := j + 1; i < n; i++ {
			s := A[i][j]
			for k := 0; k < j; k++ {
				s -= L[i][k] * L[j][k]
			}
			L[i][j] = s / d
		}
	}
	return true
}

// cholSolve solves L Lᵀ x = b in place.
func cholSolve(L *[MaxDOF][MaxDOF]float64, n int, b *[MaxDOF]float64) {
	for i := 0; i < n; i++ {
		s := b[i]
		for k := 0; k < i; k++ {
			s -= L[i][k] * b[k]
		}
		b[i] = s / L[i][i]
	}
	for i := n - 1; i >= 0; i-- {
		s := b[i]
		for k := i + 1; k < n; k++ {
			s -= L[k][i] * b[k]
		}
		b[i] = s / L[i][i]
	}
}

// maxRows is the largest number of contact constraint rows (two per foot).
const maxRows = 4

// solveSmall solves the k×k system A x = b by Gaussian elimination with
// partial pivoting, in place (b becomes x). It reports false when A is
// singular to working precision.
func solveSmall(A *[maxRows][maxRows]float64, b *[maxRows]float64, k int) bool {
	scale := 0.0
	for i := 0; i < k; i++ {
		for j := 0; j < k; j++ {
			scale = math.Max(scale, math.Abs(A[i][j]))
		}
	}
	for c := 0; c < k; c++ {
		p := c
		for r := c + 1; r < k; r++ {
			if math.Abs(A[r][c]) > math.Abs(A[p][c]) {
				p = r
			}
		}
		if !(math.Abs(A[p][c]) > 1e-14*scale) {
			return false
		}
		if p != c {
			A[p], A[c] = A[c], A[p]
			b[p], b[c] = b[c], b[p]
		}
		for r := c + 1; r < k; r++ {
			f := A[r][c] / A[c][c]
			for j := c; j < k; j++ {
				A[r][j] -= f * A[c][j]
			}
			b[r] -= f * b[c]
		}
	}
	for r := k - 1; r >= 0; r-- {
		s := b[r]
		for j := r + 1; j < k; j++ {
			s -= A[r][j] * b[j]
		}
		b[r] = s / A[r][r]
	}
	return true
}
