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

// FromStoredComplex is FromStored for a complex subspace (see NewComplex):
// vectors are the s stored rows of W” (2m×2n real matrices, as Stored
// gives them for a complex Subspace), each of the exact form
// [[a, b], [b, −a]] (rows: real then imaginary parts of x; columns: of y),
// which it checks bit for bit: W” = NᵀW̃_R with W̃_R spanned by the rows
// (a, b), so h = 2h” and the complex residual hold for this subspace as
// for the one NewComplex built (derived in NewComplex). It returns the
// errors of FromStored, and ErrShape naming the first entry that breaks
// the form.
func FromStoredComplex(ctx context.Context, vectors []float64, s, m, n int, opt Options) (*Subspace, error) {
	if m <= 0 || n <= 0 || s < 0 || m > math.MaxInt32 || n > math.MaxInt32 {
		return nil, fmt.Errorf("%w: %d stored vectors of %d×%d complex", ErrShape, s, m, n)
	}
	w, err := FromStored(ctx, vectors, s, 2*m, 2*n, false, opt)
	if err != nil {
		return nil, err
	}
	L := m * n
	qr := make([]float64, s*2*L)
	for t := 0; t < s; t++ {
		src, out := w.q[t*4*L:(t+1)*4*L], qr[t*2*L:(t+1)*2*L]
		for i := 0; i < m; i++ {
			for j := 0; j < n; j++ {
				a, b := src[i*2*n+j], src[i*2*n+n+j]
				if src[(m+i)*2*n+j] != b || src[(m+i)*2*n+n+j] != -a {
					return nil, fmt.Errorf("%w: stored vector %d is not of the form [[a, b], [b, −a]] at (%d, %d)", ErrShape, t, i, j)
				}
				out[i*n+j], out[L+i*n+j] = a, b
			}
		}
	}
	w.cx = &complexPart{m: m, n: n, s: s, q: qr}
	w.k = s
	return w, nil
}
