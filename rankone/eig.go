package rankone

import (
	"gonum.org/v1/gonum/mat"

	"github.com/segre-lab/segre/internal/eigen"
)

// TopEigen approximates the largest eigenvalue of a symmetric operator of
// order len(x) and its unit eigenvector by restarted Lanczos with full
// reorthogonalisation (Golub & Van Loan, "Matrix Computations", 4th ed.,
// 2013, §10.1), without forming a full decomposition. apply(dst, src) must
// set dst = A·src; x holds the start vector (zero: a fixed pseudo-random one)
// and receives the eigenvector estimate. It stops when ‖Ax − θx‖ ≤
// tol·max(|θ|, ‖T‖) or after the restarts (zero steps or restarts mean 24
// and 8). It returns θ and the number of calls of apply. It is exported so
// that users' strategies can share it.
func TopEigen(apply func(dst, src []float64), x []float64, steps, restarts int, tol float64) (theta float64, calls int) {
	return eigen.Top(apply, x, steps, restarts, tol)
}

func dotv(a, b []float64) float64                       { return eigen.Dot(a, b) }
func norm(a []float64) float64                          { return eigen.Norm(a) }
func axpy(alpha float64, x, y []float64)                { eigen.Axpy(alpha, x, y) }
func scale(x []float64, a float64)                      { eigen.Scale(x, a) }
func symApply(a *mat.SymDense) func(dst, src []float64) { return eigen.SymApply(a) }
