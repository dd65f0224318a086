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
	sf := accurate.SumSqUpper(w.q)
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
		h1 = bound(gram(blas.Trans, m, s*n, g), accurate.AddUp(accurate.MulUp(accurate.Gamma(m+1), sf), etaPart))
	case !altRows:
		if t1, d1 := w.partialTrace(ctx, true); t1 != nil {
			h1 = bound(t1, d1)
		}
	}
	switch {
	case altCols && w.TraceFits(s*m):
		h2 = bound(gram(blas.NoTrans, s*m, n, w.q), accurate.AddUp(accurate.MulUp(accurate.Gamma(n+1), sf), etaPart))
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
// row-major A, as a full symmetric matrix.
func gram(tr blas.Transpose, rows, cols int, a []float64) *mat.SymDense {
	p := rows
	if tr == blas.Trans {
		p = cols
	}
	out := blas64.Symmetric{N: p, Stride: p, Data: make([]float64, p*p), Uplo: blas.Upper}
	if rows > 0 && cols > 0 {
		blas64.Syrk(tr, 1, blas64.General{Rows: rows, Cols: cols, Stride: cols, Data: a}, 0, out)
	}
	return mat.NewSymDense(p, out.Data)
}
