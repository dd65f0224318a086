package rankone

import (
	"context"
	"math"
	"time"

	"github.com/segre-lab/segre/internal/accurate"
	"github.com/segre-lab/segre/internal/eigen"
	"github.com/segre-lab/segre/subspace"
)

// FlatteningBound returns a certified upper bound on h* and the matching
// certified lower bound on d*, from the two flattenings of the basis tensor.
//
// Derivation. Let Q_1..Q_k be an orthonormal basis of W. For unit x, y,
// h(x, y) = Σ_t (xᵀQ_t y)² ≤ Σ_t ‖Q_tᵀx‖²‖y‖² = xᵀ(Σ_t Q_tQ_tᵀ)x
// ≤ λmax(Σ_t Q_tQ_tᵀ) (Cauchy–Schwarz in each term), and symmetrically
// h ≤ λmax(Σ_t Q_tᵀQ_t); also h ≤ 1. Σ_t Q_tQ_tᵀ is the partial trace
// Tr₂(P_W), so the argument holds for any PSD operator below it.
// subspace.FlatteningBounds proves upper bounds h1 ≥ λmax(Tr₂ P_W) and
// h2 ≥ λmax(Tr₁ P_W) for the stored basis (rounding and the loss of
// orthogonality accounted, λmax by the verified Cholesky test), so
// h* ≤ min(1, h1, h2) =: hUpper and d* = √(1 − h*) ≥ √(1 − hUpper),
// evaluated with downward rounding.
//
// The bound is exact for one matrix (k = 1: λmax(QQᵀ) = σ₁², Eckart–Young)
// and useless (hUpper = 1) when W is large. For one matrix the lower bound
// on d* is also computed from the tail of the singular values, without
// forming 1 − h (see oneMatrixLower), so that it stays positive for
// distances down to about 1e-15 instead of 1e-8.
//
// When ctx is done first it returns whatever it has proven (at worst
// hUpper = 1, lower = 0), within one block of 16 rows of a Cholesky test.
func FlatteningBound(ctx context.Context, w *subspace.Subspace) (hUpper, lower float64) {
	h1, h2 := FlatteningBounds(ctx, w)
	hUpper = math.Min(1, math.Min(h1, h2))
	if w.Field() == subspace.Complex {
		// W'' ⊂ range(Nᵀ) exactly (every stored vector has the exact
		// block form [[a, b], [b, −a]]), so h'' ≤ ‖N(X⊗Y)‖² = 1/2 for unit
		// X, Y (derived in package subspace): the complex h ≤ 1.
		hUpper = math.Min(hUpper, 0.5)
	}
	if hUpper < 0 {
		hUpper = 0
	}
	lower = DistanceLower(hUpper)
	if d2, ok := oneMatrixLower(ctx, w); ok {
		lower = math.Max(lower, accurate.SqrtDown(d2))
	}
	return hUpper, lower
}

// Flattening is a Searcher that returns the flattening lower bound together
// with the witness suggested by the flattenings: the top eigenvector of each
// partial trace, completed by the best vector on the other side. It has no
// settings; its zero value is ready to use.
type Flattening struct{}

// Name returns "flattening".
func (Flattening) Name() string { return "flattening" }

// Search implements Searcher.
func (f Flattening) Search(ctx context.Context, w *subspace.Subspace) (Result, error) {
	start := time.Now()
	o := &oracle{w: w}
	res := Result{FoundBy: f.Name(), Starts: 1}
	hu, lo := FlatteningBound(ctx, w)
	_ = hu
	if lo > 0 {
		res.Lower, res.LowerBy = lo, "flattening"
	}
	if ctx.Err() != nil { // cut short: the trivial witness, no more search
		res.X, res.Y, res.Upper = TrivialWitness(w)
		res.Status, res.Elapsed = Cancelled, time.Since(start)
		return res, ctx.Err()
	}
	x, y := make([]float64, w.Rows()), make([]float64, w.Cols())
	spectralStart(ctx, o, x, y)
	res.X, res.Y = x, y
	res.Value = o.Value(x, y)
	res.Status = Converged
	res.Evaluations = o.evals
	finish(w, &res, start)
	if st, err := ctxStatus(ctx); err != nil {
		res.Status = st
		return res, err
	}
	return res, nil
}

// spectralStart writes a deterministic start point: x is the top eigenvector
// of Tr₂(P_W) (a few Lanczos steps, matrix-free), y the top eigenvector of
// H(x) (the best y for that x); the roles swap when n < m.
//
// Each Lanczos run stops at the next product once ctx is done (its best
// Ritz vector so far, or the pseudo-random start, is still a start point):
// at sizes such as 2×4000 with 4000 matrices the two runs take seconds.
func spectralStart(ctx context.Context, o *oracle, x, y []float64) {
	stop := func() bool { return ctx.Err() != nil }
	if len(x) <= len(y) {
		clear(x)
		eigen.TopStop(o.ApplyPartialTrace1, x, 12, 1, 1e-3, stop)
		clear(y)
		if ctx.Err() == nil {
			eigen.TopStop(o.HOperator(x).Apply, y, 0, 0, 1e-12, stop)
		}
	} else {
		clear(y)
		eigen.TopStop(o.ApplyPartialTrace2, y, 12, 1, 1e-3, stop)
		clear(x)
		if ctx.Err() == nil {
			eigen.TopStop(o.GOperator(y).Apply, x, 0, 0, 1e-12, stop)
		}
	}
	unitOrFirst(x)
	unitOrFirst(y)
}

// unitOrFirst leaves a unit vector as it is and replaces a zero one (or one
// that is not finite) by e₁.
func unitOrFirst(v []float64) {
	if n := norm(v); n > 0 && !math.IsInf(n, 0) && !math.IsNaN(n) {
		return
	}
	clear(v)
	if len(v) > 0 {
		v[0] = 1
	}
}
