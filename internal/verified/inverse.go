package verified

import (
	"math"

	"gonum.org/v1/gonum/mat"

	"github.com/segre-lab/segre/internal/accurate"
)

// InverseNormUpper returns a proven upper bound on ‖A⁻¹‖₂ for the n×n
// matrix A (row-major, exact as stored), with ok false when it cannot prove
// A nonsingular (A singular or too ill-conditioned for binary64, about
// cond(A) ≥ 1e15, a non-finite entry, or stop reporting true; stop may be
// nil and is checked once per row).
//
// Method (a verified inverse in the manner of Rump's verification methods,
// derived here): take X ≈ A⁻¹ computed in floating point (gonum's LU), and
// bound α ≥ ‖I − XA‖_F with compensated dot products (accurate.Acc: every
// entry within |r| + bound of the exact one). If α < 1, XA = I − E with
// ‖E‖₂ ≤ α < 1 is nonsingular (Neumann series), so A is, and
// A⁻¹ = (XA)⁻¹X gives ‖A⁻¹‖₂ ≤ ‖(XA)⁻¹‖₂‖X‖₂ ≤ ‖X‖_F/(1 − α). All
// operations of the bound are rounded upwards.
func InverseNormUpper(a []float64, n int, stop func() bool) (bound float64, ok bool) {
	if n <= 0 || len(a) < n*n {
		return 0, false
	}
	for _, v := range a[:n*n] {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return 0, false
		}
	}
	var x mat.Dense
	if err := x.Inverse(mat.NewDense(n, n, append([]float64(nil), a[:n*n]...))); err != nil {
		// gonum reports a near-singular matrix as an error but still
		// returns its best inverse; only a failed factorisation is final.
		if _, isCond := err.(mat.Condition); !isCond {
			return 0, false
		}
	}
	xr := x.RawMatrix()
	var sq []float64
	col := make([]float64, n)
	for j := 0; j < n; j++ {
		if stop != nil && stop() {
			return 0, false
		}
		for k := 0; k < n; k++ {
			col[k] = a[k*n+j]
		}
		for i := 0; i < n; i++ {
			var q accurate.Acc
			if i == j {
				q.Add(-1)
			}
			row := xr.Data[i*xr.Stride : i*xr.Stride+n]
			for k, xv := range row {
				q.AddProd(xv, col[k])
			}
			r, b := q.Result()
			sq = append(sq, accurate.AddUp(math.Abs(r), b))
		}
	}
	alpha := accurate.SqrtUp(accurate.SumSqUpper(sq))
	if !(alpha < 1) {
		return 0, false
	}
	xf := accurate.SqrtUp(accurate.SumSqUpper(xr.Data[:len(xr.Data)]))
	den := accurate.Down(1 - alpha)
	if !(den > 0) || math.IsInf(xf, 0) || math.IsNaN(xf) {
		return 0, false
	}
	return accurate.Up(xf / den), true
}
