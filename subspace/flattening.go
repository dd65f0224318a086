package subspace

import (
	"context"
	"math"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
	"gonum.org/v1/gonum/mat"

	"github.com/segre-lab/segre/internal/accurate"
	"github.com/segre-lab/segre/internal/eigen"
	"github.com/segre-lab/segre/internal/verified"
)

// FlatteningBounds returns proven upper bounds h1 ≥ λmax(Tr₂ P_W) and
// h2 ≥ λmax(Tr₁ P_W) for the stored subspace (each is an upper bound on
// h*: the flattening bound, see rankone.FlatteningBound), or +Inf for a
// side it could not bound: beyond the MemoryLimit, η ≥ 1/2, or ctx done
// first (a cancelled run may also return a valid but looser bound, from
// Gershgorin's theorem). Complete results are cached.
//
// Each side is bounded through the smaller of two Gram matrices with the
// same nonzero spectrum. W stored, rows S_t (m×n): Tr₂(P_W) ⪯ GGᵀ/(1−η)
// for G = [S_1 … S_s] (m × s·n), and λmax(GGᵀ) = λmax(GᵀG) exactly; so when
// s·n < m the s·n-order GᵀG (entries Σ_a S_t[a,j]S_u[a,l], m terms each) is
// used: its float formation errs in norm by at most γ_{m+1}‖S‖_F² (the
// entrywise dot-product bound of Higham 2002, §3.1, and Cauchy–Schwarz as in
// PartialTraces), and λmax(GGᵀ)/(1−η) ≤ λmax(GGᵀ) + (η/(1−η))‖S‖_F². Likewise
// Tr₁(P_W) ⪯ FᵀF/(1−η) for F = [S_1; …; S_s] (s·m × n), through FFᵀ of order
// s·m (n terms per entry) when s·m < n. Otherwise (and always when W⊥ is
// stored) the p×p matrices of PartialTraces are used. λmax of the chosen
// matrix is bounded by the verified Cholesky test, which ctx can cut short.
func (w *Subspace) FlatteningBounds(ctx context.Context) (h1, h2 float64) {
	w.flatMu.Lock()
	if w.flatDone {
		h1, h2 = w.flatH1, w.flatH2
		w.flatMu.Unlock()
		return h1, h2
	}
	w.flatMu.Unlock()
	stop := func() bool { return ctx.Err() != nil }
	h1, h2 = math.Inf(1), math.Inf(1)
	if w.eta >= 0.5 {
		return h1, h2
	}
	m, n, s := w.m, w.n, w.s
	altRows, altCols := !w.comp && s*n < m, !w.comp && s*m < n
	sf := w.sumSq
	etaPart := accurate.MulUp(accurate.Up(w.eta/accurate.Down(1-w.eta)), sf)
	bound := func(a *mat.SymDense, extra float64) float64 {
		x := make([]float64, a.SymmetricDim())
		guess, _ := eigen.Top(eigen.SymApply(a), x, 0, 0, 1e-13)
		return accurate.AddUp(verified.MaxEigUpperStop(a, guess, stop), extra)
	}
	switch {
	case altRows && w.TraceFits(s*n):
		// G = [S_1 … S_s]: row a holds row a of every S_t.
		g := make([]float64, m*s*n)
		for t := 0; t < s; t++ {
			for a := 0; a < m; a++ {
				copy(g[a*s*n+t*n:a*s*n+(t+1)*n], w.q[t*m*n+a*n:t*m*n+(a+1)*n])
			}
		}
		if a, ok := gram(blas.Trans, m, s*n, g, stop); ok {
			h1 = bound(a, accurate.AddUp(accurate.MulUp(accurate.Gamma(m+1), sf), etaPart))
		}
	case !altRows:
		if t1, d1 := w.partialTrace(ctx, true); t1 != nil {
			h1 = bound(t1, d1)
		}
	}
	switch {
	case altCols && w.TraceFits(s*m):
		if a, ok := gram(blas.NoTrans, s*m, n, w.q, stop); ok {
			h2 = bound(a, accurate.AddUp(accurate.MulUp(accurate.Gamma(n+1), sf), etaPart))
		}
	case !altCols:
		if t2, d2 := w.partialTrace(ctx, false); t2 != nil {
			h2 = bound(t2, d2)
		}
	}
	if ctx.Err() == nil {
		w.flatMu.Lock()
		w.flatH1, w.flatH2, w.flatDone = h1, h2, true
		w.flatMu.Unlock()
	}
	return h1, h2
}

// gram returns fl(AAᵀ) (NoTrans) or fl(AᵀA) (Trans) for the rows×cols
// row-major A, as a symmetric matrix (upper triangle), or ok = false if
// stop reported true first.
func gram(tr blas.Transpose, rows, cols int, a []float64, stop func() bool) (*mat.SymDense, bool) {
	p := rows
	if tr == blas.Trans {
		p = cols
	}
	out := blas64.Symmetric{N: p, Stride: p, Data: make([]float64, p*p), Uplo: blas.Upper}
	if rows > 0 && cols > 0 && !gramTiles(tr, blas64.General{Rows: rows, Cols: cols, Stride: cols, Data: a}, out, stop) {
		return nil, false
	}
	return mat.NewSymDense(p, out.Data), true
}

// gramTiles sets the upper triangle of c to fl(AAᵀ) (NoTrans) or fl(AᵀA)
// (Trans) in column tiles of 32, calling stop between tiles; it returns
// false, leaving c incomplete, if stop reported true. Every entry is one
// dot product of the inner dimension, summed in some order, so the
// rounding bounds of a single Syrk apply unchanged.
func gramTiles(tr blas.Transpose, a blas64.General, c blas64.Symmetric, stop func() bool) bool {
	p := c.N
	// part(i0, i1) is the slice of A whose Gram block gives rows/columns
	// [i0, i1) of C: rows of A (NoTrans) or columns of A (Trans).
	part := func(i0, i1 int) blas64.General {
		if tr == blas.NoTrans {
			return blas64.General{Rows: i1 - i0, Cols: a.Cols, Stride: a.Stride, Data: a.Data[i0*a.Stride:]}
		}
		return blas64.General{Rows: a.Rows, Cols: i1 - i0, Stride: a.Stride, Data: a.Data[i0:]}
	}
	const tile = 32
	for c0 := 0; c0 < p; c0 += tile {
		if stop != nil && stop() {
			return false
		}
		c1 := min(p, c0+tile)
		// C[0:c0, c0:c1] = part(0, c0)·part(c0, c1)ᵀ (NoTrans) or
		// part(0, c0)ᵀ·part(c0, c1) (Trans), in row blocks of 256 so that
		// no single product is long.
		ta, tb := blas.NoTrans, blas.Trans
		if tr == blas.Trans {
			ta, tb = blas.Trans, blas.NoTrans
		}
		for r0 := 0; r0 < c0; r0 += 256 {
			if r0 > 0 && stop != nil && stop() {
				return false
			}
			r1 := min(c0, r0+256)
			blas64.Gemm(ta, tb, 1, part(r0, r1), part(c0, c1), 0,
				blas64.General{Rows: r1 - r0, Cols: c1 - c0, Stride: c.Stride, Data: c.Data[r0*c.Stride+c0:]})
		}
		blas64.Syrk(tr, 1, part(c0, c1), 0,
			blas64.Symmetric{N: c1 - c0, Stride: c.Stride, Data: c.Data[c0*c.Stride+c0:], Uplo: blas.Upper})
	}
	return true
}
