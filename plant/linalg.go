package plant

import "math"

// maxRows is the largest number of constraint rows: two per foot and one
// per locked knee.
const maxRows = 6

// maxKKT is the largest saddle-point system a solve builds: every
// coordinate (the dense solve of a kneed walker) and every row. The arrow
// solve of a walker without knees uses at most 2 + 2 + 4 of it.
const maxKKT = MaxDOF + maxRows

// kkt is the saddle-point system of constrained dynamics or impacts,
//
//	[ M  −Wᵀ ] [ x ]   [ a ]
//	[ J   0  ] [ λ ] = [ b ]
//
// solved directly rather than through the Schur complement J M⁻¹ Wᵀ: when a
// link is nearly massless (the simplest walking model's legs), M⁻¹ has
// entries of 1/m and the Schur complement loses digits in proportion,
// while the saddle-point matrix stays well conditioned after row scaling.
type kkt struct {
	a [maxKKT][maxKKT]float64
	b [maxKKT]float64
}

// solve solves the N×N system in place by Gaussian elimination with row
// equilibration and partial pivoting; the solution is left in s.b. It
// reports false when the matrix is singular to working precision.
func (s *kkt) solve(N int) bool {
	if N > maxKKT {
		return false
	}
	for i := 0; i < N; i++ {
		row := s.a[i][:N]
		mx := 0.0
		for _, x := range row {
			if x < 0 {
				x = -x
			}
			if x > mx {
				mx = x
			}
		}
		if !(mx > 0) || mx > math.MaxFloat64 {
			return false
		}
		inv := 1 / mx
		for j := range row {
			row[j] *= inv
		}
		s.b[i] *= inv
	}
	for c := 0; c < N; c++ {
		p, best := c, math.Abs(s.a[c][c])
		for r := c + 1; r < N; r++ {
			if x := math.Abs(s.a[r][c]); x > best {
				p, best = r, x
			}
		}
		if !(best > 1e-13) {
			return false
		}
		if p != c {
			s.a[p], s.a[c] = s.a[c], s.a[p]
			s.b[p], s.b[c] = s.b[c], s.b[p]
		}
		pivot := s.a[c][c+1 : N]
		inv := 1 / s.a[c][c]
		bc := s.b[c]
		for r := c + 1; r < N; r++ {
			f := s.a[r][c] * inv
			if f == 0 {
				continue
			}
			row := s.a[r][c+1 : N]
			for j, x := range pivot {
				row[j] -= f * x
			}
			s.b[r] -= f * bc
		}
	}
	for r := N - 1; r >= 0; r-- {
		x := s.b[r]
		row := s.a[r][r+1 : N]
		for j, a := range row {
			x -= a * s.b[r+1+j]
		}
		s.b[r] = x / s.a[r][r]
	}
	return true
}
