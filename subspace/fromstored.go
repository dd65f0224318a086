package subspace

import (
	"context"
	"fmt"
	"math"

	"github.com/segre-lab/segre/internal/accurate"
)

// FromStored rebuilds a Subspace from stored vectors exactly as given (s
// rows of length m·n, spanning W, or W⊥ when complement is set), without
// orthonormalising them again: the subspace is the span of these floats
// (or its complement), and every certified bound holds for it. It proves
// the orthogonality defect η ≥ ‖SSᵀ − I‖₂ and ‖S‖_F² anew; vectors far from
// orthonormal give an error (η ≥ 1/2 makes every bound trivial). This is
// how a proof file's stored basis is re-checked without trusting the
// program that wrote it. vectors are copied. It returns ErrShape for sizes
// that disagree, ErrNotFinite for NaN or infinite entries, ErrOption with
// a message for η ≥ 1/2, ErrTooLarge beyond opt.MaxBytes.
func FromStored(ctx context.Context, vectors []float64, s, m, n int, complement bool, opt Options) (*Subspace, error) {
	if m <= 0 || n <= 0 || s < 0 {
		return nil, fmt.Errorf("%w: %d stored vectors of %d×%d", ErrShape, s, m, n)
	}
	L, ok := mulOK(m, n)
	total, ok2 := mulOK(L, s)
	if !ok || !ok2 || len(vectors) != total || s > L {
		return nil, fmt.Errorf("%w: %d stored vectors of %d×%d need %d entries, have %d", ErrShape, s, m, n, total, len(vectors))
	}
	limit := opt.MaxBytes
	if limit == 0 {
		limit = DefaultMaxBytes
	}
	if need := 8 * (int64(total) + int64(s)*int64(s)); need > limit || need < 0 {
		return nil, fmt.Errorf("%w: %d stored vectors of %d×%d need about %d bytes, limit %d", ErrTooLarge, s, m, n, need, limit)
	}
	for i, v := range vectors {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return nil, fmt.Errorf("%w: stored vector %d, entry %d is %v", ErrNotFinite, i/L, i%L, v)
		}
	}
	k := s
	if complement {
		k = L - s
	}
	w := &Subspace{m: m, n: n, k: k, comp: complement, s: s, q: append([]float64(nil), vectors...), limit: limit, inputs: s}
	stop := func() bool { return ctx.Err() != nil }
	w.sumSq = accurate.SumSqUpper(w.q)
	w.orthFl, w.eta = orthogonality(w.q, w.s, L, w.sumSq, stop)
	if stop() {
		return nil, fmt.Errorf("subspace: %w", ctx.Err())
	}
	if !(w.eta < 0.5) {
		return nil, fmt.Errorf("%w: the stored vectors are not orthonormal (proven defect %g ≥ 1/2)", ErrOption, w.eta)
	}
	return w, nil
}
