package plant

import (
	"errors"
	"math"

	"gonum.org/v1/gonum/mat"
)

// errNoValue is what a function under centralDiff returns where it has no
// value at the perturbed point; the caller then says why in its own words.
var errNoValue = errors.New("plant: no value at the perturbed point")

// centralDiff fills J with the Jacobian of f at x by central differences:
// column j is (f(x + h_j e_j) − f(x − h_j e_j)) / 2h_j with the relative
// step h_j = rel·max(1, |x_j|), so small and large coordinates are both
// perturbed by a sensible amount. f writes its value (J's row count of
// numbers) to out. It is the one difference formula behind the map and
// field Jacobians and the gait finder's Newton matrix. If an evaluation
// fails, centralDiff stops and returns the column and f's error, so the
// caller can say which coordinate could not be perturbed.
func centralDiff(J *mat.Dense, x []float64, rel float64, f func(x, out []float64) error) (int, error) {
	rows, cols := J.Dims()
	xp := make([]float64, cols)
	xm := make([]float64, cols)
	fp := make([]float64, rows)
	fm := make([]float64, rows)
	for j := 0; j < cols; j++ {
		h := rel * math.Max(1, math.Abs(x[j]))
		copy(xp, x)
		copy(xm, x)
		xp[j] += h
		xm[j] -= h
		if err := f(xp, fp); err != nil {
			return j, err
		}
		if err := f(xm, fm); err != nil {
			return j, err
		}
		for i := 0; i < rows; i++ {
			J.Set(i, j, (fp[i]-fm[i])/(2*h))
		}
	}
	return 0, nil
}
