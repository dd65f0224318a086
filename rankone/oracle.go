package rankone

import (
	"gonum.org/v1/gonum/mat"

	"github.com/segre-lab/segre/subspace"
)

// oracle is the package's short name for Counter: every contraction a
// strategy calls goes through it, so that no strategy counts by hand. Each
// call of a method below is one evaluation (about one or two passes over
// the stored basis).
type oracle = Counter

func (o *oracle) G(dst *mat.SymDense, y []float64) { o.evals++; o.w.G(dst, y) }
func (o *oracle) H(dst *mat.SymDense, x []float64) { o.evals++; o.w.H(dst, x) }

// The operators a search uses are the subspace's search operators: W”'s
// own for a real subspace, built from the complex basis (half the data)
// for a complex one; strategies never certify with them.
func (o *oracle) GOperator(y []float64) *subspace.Operator {
	o.evals++
	return o.w.SearchGOperator(y)
}
func (o *oracle) HOperator(x []float64) *subspace.Operator {
	o.evals++
	return o.w.SearchHOperator(x)
}
func (o *oracle) ApplyG(dst, y, x []float64)      { o.evals++; o.w.SearchApplyG(dst, y, x) }
func (o *oracle) ApplyH(dst, x, y []float64)      { o.evals++; o.w.SearchApplyH(dst, x, y) }
func (o *oracle) Project(dst, a []float64)        { o.evals++; o.w.SearchProject(dst, a) }
func (o *oracle) Residual(x, y []float64) float64 { o.evals++; return o.w.Residual(x, y) }
func (o *oracle) Value(x, y []float64) float64    { o.evals++; return o.w.Value(x, y) }
func (o *oracle) Gradient(gx, gy, x, y, buf []float64) float64 {
	o.evals++
	return o.w.SearchGradient(gx, gy, x, y, buf)
}
func (o *oracle) ApplyPartialTrace1(dst, x []float64) { o.evals++; o.w.SearchPartialTrace1(dst, x) }
func (o *oracle) ApplyPartialTrace2(dst, y []float64) { o.evals++; o.w.SearchPartialTrace2(dst, y) }
