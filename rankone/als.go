package rankone

import (
	"context"

	"github.com/segre-lab/segre/subspace"
)

// ALS is alternating maximisation (alternating least squares in the
// tensor literature): with y fixed, h(·, y) = xᵀG(y)x is maximised over
// unit x by the top eigenvector of G(y); then y is updated from H(x) in the
// same way. Each half-step maximises exactly, so h never decreases
// (monotone block-coordinate ascent; for the injective norm of a tensor this
// is the alternating scheme of De Lathauwer, De Moor, Vandewalle, SIAM J.
// Matrix Anal. Appl. 21, 2000, with exact block maximisation). The top
// eigenvectors come from Lanczos warm-started at the current vector, never
// from a full decomposition: on the p×p matrix when the side is small
// (p ≤ 32) or the subspace's batches hold their operators formed, on the
// factored operator (2·s·p a step) otherwise.
//
// Many starts are best run together (RefineBatch; MultiStart does): each
// half-step's operators then come from one matrix-matrix product over the
// stored basis for all starts (subspace.SearchGBatch) instead of one
// memory-bound pass per start, with the same iterates for each start as
// alone. An iteration ends, and the stopping rule is tested, after both
// half-steps: converged when the Riemannian gradient (its y part before
// the y update, its x part before the x update) is at most GradTol, or at
// a floating-point floor when its norm has not fallen by 10% in 20
// iterations (converged if it is then below 1e-6).
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

// Refine implements Local: RefineBatch from the one start.
func (a *ALS) Refine(ctx context.Context, w *subspace.Subspace, x, y []float64) (Stats, error) {
	st, err := a.RefineBatch(ctx, w, [][]float64{x}, [][]float64{y})
	return st[0], err
}

func (a *ALS) check() error {
	return CheckSettings("ALS", []Setting{{"MaxIter", float64(a.MaxIter)}, {"GradTol", float64(a.GradTol)}}...)
}
