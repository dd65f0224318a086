package rankone

import (
	"context"
	"math"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
	"gonum.org/v1/gonum/mat"

	"github.com/segre-lab/segre/internal/accurate"
	"github.com/segre-lab/segre/internal/eigen"
	"github.com/segre-lab/segre/internal/rawstore"
	"github.com/segre-lab/segre/internal/tiled"
	"github.com/segre-lab/segre/internal/verified"
	"github.com/segre-lab/segre/subspace"
)

// FlatteningBounds returns proven upper bounds h1 ≥ λmax(Tr₂ P_W) and
// h2 ≥ λmax(Tr₁ P_W) for the stored subspace (each is an upper bound on
// h*: the flattening bound, see FlatteningBound), or +Inf for a
// side it could not bound: beyond the MemoryLimit, η ≥ 1/2, or ctx done
// first (a cancelled run may also return a valid but looser bound, from
// Gershgorin's theorem). //
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
func FlatteningBounds(ctx context.Context, w *subspace.Subspace) (h1, h2 float64) {
	st := w.Stored()
	q := rawstore.Vectors(w)
	stop := func() bool { return ctx.Err() != nil }
	h1, h2 = math.Inf(1), math.Inf(1)
	if st.OrthogonalityBound() >= 0.5 {
		return h1, h2
	}
	m, n, s, eta := w.Rows(), w.Cols(), st.Count(), st.OrthogonalityBound()
	altRows, altCols := !st.Complement() && s*n < m, !st.Complement() && s*m < n
	sf := st.SumSqUpper()
	etaPart := accurate.MulUp(accurate.Up(eta/accurate.Down(1-eta)), sf)
	bound := func(a *mat.SymDense, extra float64) float64 {
		x := make([]float64, a.SymmetricDim())
		guess, _ := eigen.Top(eigen.SymApply(a), x, 0, 0, 1e-13)
		return accurate.AddUp(verified.MaxEigUpperStop(a, guess, stop), extra)
	}
	switch {
	case altRows && TraceFits(w, s*n):
		// G = [S_1 … S_s]: row a holds row a of every S_t.
		g := make([]float64, m*s*n)
		for t := 0; t < s; t++ {
			for a := 0; a < m; a++ {
				copy(g[a*s*n+t*n:a*s*n+(t+1)*n], q[t*m*n+a*n:t*m*n+(a+1)*n])
			}
		}
		if a, ok := tiled.Sym(blas.Trans, m, s*n, g, stop); ok {
			h1 = bound(a, accurate.AddUp(accurate.MulUp(accurate.Gamma(m+1), sf), etaPart))
		}
	case !altRows:
		if t1, d1 := partialTrace(ctx, w, true); t1 != nil {
			h1 = bound(t1, d1)
		}
	}
	switch {
	case altCols && TraceFits(w, s*m):
		if a, ok := tiled.Sym(blas.NoTrans, s*m, n, q, stop); ok {
			h2 = bound(a, accurate.AddUp(accurate.MulUp(accurate.Gamma(n+1), sf), etaPart))
		}
	case !altCols:
		if t2, d2 := partialTrace(ctx, w, false); t2 != nil {
			h2 = bound(t2, d2)
		}
	}
	return h1, h2
}

// PartialTraces returns symmetric T1 (m×m) and T2 (n×n) and numbers
// δ1, δ2 ≥ 0 such that, in exact arithmetic for the stored subspace,
//
//	Tr₂(P_W) ⪯ T1 + δ1·I   and   Tr₁(P_W) ⪯ T2 + δ2·I,
//
// where Tr₂(P)_ab = Σ_j P[(a,j),(b,j)] and Tr₁(P)_cd = Σ_i P[(i,c),(i,d)] are
// the partial traces (for an orthonormal basis Q_t of W, Tr₂(P_W) = Σ Q_tQ_tᵀ
// and Tr₁(P_W) = Σ Q_tᵀQ_t). The returned matrices are copies.
//
// Derivation (W stored, rows S, Gram SSᵀ = I + E, ‖E‖ ≤ η): P_W =
// Sᵀ(SSᵀ)⁻¹S ⪯ SᵀS/(1−η), and the partial trace is a positive map, so
// Tr₂(P_W) ⪯ Σ_t S_tS_tᵀ/(1−η) ⪯ Σ_t S_tS_tᵀ + (η/(1−η))·‖S‖_F²·I. The float
// sum T1 = fl(Σ_t S_tS_tᵀ) errs entrywise by at most γ_{sn}Σ|S||S|ᵀ, whose
// spectral norm is at most γ_{sn}‖S‖_F² (Cauchy–Schwarz on each entry, then
// the rank-one majorant [‖r_a‖‖r_b‖] has norm Σ_a‖r_a‖² = ‖S‖_F²).
// (W⊥ stored): Tr₂(P_W) = n·I − Tr₂(P_{W⊥}) and P_{W⊥} ⪰ SᵀS/(1+η), so
// Tr₂(P_W) ⪯ n·I − fl(ΣS_tS_tᵀ) + (γ_{sn}‖S‖_F² + (η/(1+η))‖S‖_F²)·I; the
// rounding of the diagonal n − T_ii adds 2u·max|T_ii|. Likewise for Tr₁.
// A side of order p is formed only if TraceFits(p) and η < 1/2; otherwise
// its matrix is nil and its δ is +Inf (the bound Tr ⪯ +Inf·I is true and says nothing).
func PartialTraces(w *subspace.Subspace) (t1 *mat.SymDense, d1 float64, t2 *mat.SymDense, d2 float64) {
	t1, d1 = partialTrace(context.Background(), w, true)
	t2, d2 = partialTrace(context.Background(), w, false)
	return t1, d1, t2, d2
}

// TraceFits reports whether a partial trace of order p and the work of
// bounding its top eigenvalue (four p×p matrices: the cached one, the copy
// returned, the verified Cholesky test's factor and its shifted copy) fit
// in the MemoryLimit.
func TraceFits(w *subspace.Subspace, p int) bool {
	return 32*float64(p)*float64(p) <= float64(w.MemoryLimit())
}

// partialTrace returns T1, δ1 (rows) or T2, δ2 (!rows) of PartialTraces;
// if ctx is done during the computation it returns nil, +Inf.
func partialTrace(ctx context.Context, w *subspace.Subspace, rows bool) (*mat.SymDense, float64) {
	t, d, ok := computePartialTrace(ctx, w, rows)
	if !ok {
		return nil, math.Inf(1)
	}
	return t, d
}

// computePartialTrace forms one side of PartialTraces (see its derivation),
// checking ctx between blocks of the product; ok is false if ctx was done.
func computePartialTrace(ctx context.Context, w *subspace.Subspace, rows bool) (t *mat.SymDense, d float64, ok bool) {
	st, q := w.Stored(), rawstore.Vectors(w)
	m, n, L, s := w.Rows(), w.Cols(), w.Rows()*w.Cols(), st.Count()
	p, other, inner := m, n, s*n // order, the other side, terms per entry
	if !rows {
		p, other, inner = n, m, s*m
	}
	eta := st.OrthogonalityBound()
	if !TraceFits(w, p) || eta >= 0.5 {
		return nil, math.Inf(1), true
	}
	a := blas64.Symmetric{N: p, Stride: p, Data: make([]float64, p*p), Uplo: blas.Upper}
	if rows {
		for t := 0; t < s; t++ {
			if ctx.Err() != nil {
				return nil, 0, false
			}
			blas64.Syrk(blas.NoTrans, 1, blas64.General{Rows: m, Cols: n, Stride: n, Data: q[t*L : (t+1)*L]}, 1, a)
		}
	} else if s > 0 {
		// T2 = FᵀF for F = the stored rows as an (s·m)×n matrix, in tiles.
		f := blas64.General{Rows: s * m, Cols: n, Stride: n, Data: q}
		if !tiled.Gram(blas.Trans, f, a, func() bool { return ctx.Err() != nil }) {
			return nil, 0, false
		}
	}
	for i := 0; i < p; i++ {
		for j := 0; j < i; j++ {
			a.Data[i*p+j] = a.Data[j*p+i]
		}
	}
	sf := st.SumSqUpper()
	d = accurate.MulUp(accurate.Gamma(inner+1), sf)
	if !st.Complement() {
		d = accurate.AddUp(d, accurate.MulUp(accurate.Up(eta/accurate.Down(1-eta)), sf))
	} else {
		d = accurate.AddUp(d, accurate.MulUp(accurate.Up(eta/accurate.Down(1+eta)), sf))
		d = accurate.AddUp(d, tiled.ComplementDiag(a, float64(other)))
	}
	return mat.NewSymDense(p, a.Data), d, true
}
