package rankone

import (
	"context"
	"math"

	"github.com/segre-lab/segre/subspace"
)

// ALS is alternating maximisation (alternating least squares in the
// tensor literature): with y fixed, h(·, y) = xᵀG(y)x is maximised over
// unit x by the top eigenvector of G(y); then y is updated from H(x) in the
// same way. Each half-step maximises exactly, so h never decreases
// (monotone block-coordinate ascent; for the injective norm of a tensor this
// is the alternating scheme of De Lathauwer, De Moor, Vandewalle, SIAM J.
// Matrix Anal. Appl. 21, 2000, with exact block maximisation). The top
// eigenvectors come from warm-started Lanczos (TopEigen) on the factored
// operators (subspace.GOperator), never from a full decomposition.
//
// The zero value is ready to use.
type ALS struct {
	// MaxIter bounds the iterations (one x and one y update each); zero means 500.
	MaxIter int
	// GradTol stops the method when the Riemannian gradient norm of h falls to
	// GradTol; zero means 1e-12.
	GradTol float64
	// Progress, if set, is called at most every 200 ms.
	Progress func(Progress)
}

var _ Searcher = (*ALS)(nil)
var _ Local = (*ALS)(nil)

// Name returns "als".
func (a *ALS) Name() string { return "als" }

// Search runs the method once from the spectral start.
func (a *ALS) Search(ctx context.Context, w *subspace.Subspace) (Result, error) {
	return searchLocal(ctx, w, a)
}

// Refine implements Local.
func (a *ALS) Refine(ctx context.Context, w *subspace.Subspace, x, y []float64) (Stats, error) {
	if err := a.check(); err != nil {
		return Stats{}, err
	}
	o := &oracle{w: w}
	maxIter := orDefault(a.MaxIter, 500)
	tol := orDefaultF(a.GradTol, 1e-12)
	gate := NewThrottle(a.Progress)
	gx, hy := make([]float64, len(x)), make([]float64, len(y))
	st := Stats{Status: LimitReached}
	sl := stall{patience: 20}
	var h float64
	for it := 0; it < maxIter; it++ {
		if err := ctx.Err(); err != nil {
			return st.cancelled(o, x, y, err)
		}
		st.Iterations = it + 1
		hop := o.HOperator(x)
		hop.Apply(hy, y)
		ggy := 2 * tangentNorm(hy, y)
		TopEigen(hop.Apply, y, 0, 0, 1e-14)
		gop := o.GOperator(y)
		gop.Apply(gx, x)
		ggx := 2 * tangentNorm(gx, x)
		h, _ = TopEigen(gop.Apply, x, 0, 0, 1e-14)
		gate.Report(Progress{Searcher: a.Name(), Iteration: it + 1, Value: h, Upper: 1})
		if st.settle(math.Hypot(ggx, ggy), tol, &sl) {
			break
		}
	}
	st.Value = h
	st.Evaluations = o.evals
	return st, nil
}

func (a *ALS) check() error {
	return CheckSettings("ALS", []Setting{{"MaxIter", float64(a.MaxIter)}, {"GradTol", float64(a.GradTol)}}...)
}
