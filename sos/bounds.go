package sos

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
	"github.com/segre-lab/segre/rankone"
	"github.com/segre-lab/segre/subspace"
)

// ProjectorBound returns a float matrix P̂ (mn×mn) and δ ≥ 0 with
// P_W ⪯ P̂ + δI in exact arithmetic for the stored subspace, for
// certificates that need the whole projector (sum-of-squares bounds). It
// panics if mn > 8192 (the matrix would not be small).
//
// Derivation. W stored (rows S, Gram I + E, ‖E‖ ≤ η): P_W = Sᵀ(SSᵀ)⁻¹S ⪯
// SᵀS/(1−η) = SᵀS + (η/(1−η))SᵀS, and ‖SᵀS‖ = ‖SSᵀ‖ ≤ 1 + η; the float
// P̂ = fl(SᵀS) errs entrywise by γ_s|S|ᵀ|S|, of norm ≤ γ_s‖S‖_F². W⊥ stored:
// P_W = I − P_{W⊥} ⪯ I − SᵀS/(1+η) ⪯ I − SᵀS + ηI (as ‖SᵀS‖ ≤ 1 + η), with
// P̂ = I − fl(SᵀS), whose diagonal rounding adds 2u·max|P̂_ii|.
func ProjectorBound(w *subspace.Subspace) (*mat.SymDense, float64) {
	st, q := w.Stored(), rawstore.Vectors(w)
	L, s, eta := w.Rows()*w.Cols(), st.Count(), st.OrthogonalityBound()
	if L > 8192 {
		panic("sos: ProjectorBound needs m·n ≤ 8192")
	}
	raw := blas64.Symmetric{N: L, Stride: L, Data: make([]float64, L*L), Uplo: blas.Upper}
	if s > 0 {
		blas64.Syrk(blas.Trans, 1, blas64.General{Rows: s, Cols: L, Stride: L, Data: q}, 0, raw)
	}
	if eta >= 0.5 {
		return mat.NewSymDense(L, raw.Data), math.Inf(1)
	}
	sf := st.SumSqUpper()
	delta := accurate.MulUp(accurate.Gamma(max(s, 1)), sf)
	if !st.Complement() {
		f := accurate.Up(eta / accurate.Down(1-eta))
		delta = accurate.AddUp(delta, accurate.MulUp(f, accurate.AddUp(1, eta)))
		return mat.NewSymDense(L, raw.Data), delta
	}
	delta = accurate.AddUp(delta, eta)
	delta = accurate.AddUp(delta, tiled.ComplementDiag(raw, 1))
	return mat.NewSymDense(L, raw.Data), delta
}

// ExtensionBound returns a proven upper bound on λmax(Π(P_W⊗I_n)Π), where Π
// projects R^m⊗R^n⊗R^n onto R^m⊗Sym²(R^n) (the two-copy symmetric extension
// of the column side), and ok = false when the stored basis is W⊥ or k·n
// exceeds maxOrder (then the caller needs another method). Since
// h(x, y) = vᵀ(P_W⊗I)v for the unit v = x⊗y⊗y in the range of Π, the result
// bounds h*.
//
// Derivation (W stored, rows S_t as m×n matrices, Gram SSᵀ = G, ‖G − I‖ ≤ η):
// P_W ⪯ SᵀS/(1−η), so P_W⊗I ⪯ FFᵀ/(1−η) with F = [s_t⊗e_j]_{t,j}, and
// λmax(ΠFFᵀΠ) = λmax(FᵀΠF). With Π = I⊗(I + SWAP)/2 on the last two factors,
// FᵀΠF = ½(G⊗I + N), N[(t,j),(t',j')] = Σ_i S_t[i][j']·S_t'[i][j] (derived
// by expanding the swap). The float N errs entrywise by at most
// γ_m·Σ_i|S_t[i][j']||S_t'[i][j]| (Frobenius norm bounded alongside), the
// float G by γ_L‖S‖_F² in norm (as in the orthogonality bound), and forming
// ½(G⊗I + N) rounds each entry at most twice.
//
// ok is also false when the order-k·n matrix does not fit in the
// MemoryLimit (rankone.TraceFits). The top eigenvalue is estimated by
// Lanczos and proven by the verified Cholesky test. When ctx is done first
// it returns ok = false (nothing proven) after at most one row block of its
// work.
func ExtensionBound(ctx context.Context, w *subspace.Subspace, maxOrder int) (upper float64, ok bool) {
	st, q := w.Stored(), rawstore.Vectors(w)
	if st.Complement() || st.Count() == 0 {
		return 1, false
	}
	m, n, s, L, eta := w.Rows(), w.Cols(), st.Count(), w.Rows()*w.Cols(), st.OrthogonalityBound()
	dim := s * n
	if dim > maxOrder || !rankone.TraceFits(w, dim) {
		return 1, false
	}
	stop := func() bool { return ctx.Err() != nil }
	if eta >= 0.5 {
		return math.Inf(1), true
	}
	g := blas64.Symmetric{N: s, Stride: s, Data: make([]float64, s*s), Uplo: blas.Upper}
	if !tiled.Gram(blas.NoTrans, blas64.General{Rows: s, Cols: L, Stride: L, Data: q}, g, stop) {
		return 1, false
	}
	a := mat.NewSymDense(dim, nil)
	var absF, fro float64
	for t := 0; t < s; t++ {
		if stop() {
			return 1, false
		}
		sv := q[t*L : (t+1)*L]
		for j := 0; j < n; j++ {
			for t2 := t; t2 < s; t2++ {
				su := q[t2*L : (t2+1)*L]
				j0 := 0
				if t2 == t {
					j0 = j
				}
				for j2 := j0; j2 < n; j2++ {
					var v, ab float64
					for i := 0; i < m; i++ {
						p := float64(sv[i*n+j2] * su[i*n+j])
						v += p
						ab += math.Abs(p)
					}
					if j == j2 {
						v += g.Data[t*s+t2]
					}
					v /= 2
					a.SetSym(t*n+j, t2*n+j2, v)
					mult := 2.0
					if t == t2 && j == j2 {
						mult = 1
					}
					absF += float64(mult * ab * ab)
					fro += float64(mult * v * v)
				}
			}
		}
	}
	errN := accurate.MulUp(accurate.Gamma(m+1), accurate.SqrtUp(accurate.UpperRel(absF, dim*dim+1)))
	errG := accurate.MulUp(accurate.Gamma(L), st.SumSqUpper())
	errR := accurate.MulUp(4*accurate.U, accurate.SqrtUp(accurate.UpperRel(fro, dim*dim+1)))
	x := make([]float64, dim)
	guess, _ := eigen.Top(eigen.SymApply(a), x, 0, 0, 1e-13)
	lam := verified.MaxEigUpperStop(a, guess, stop)
	if stop() {
		return 1, false // the test may have fallen back to Gershgorin: valid, but say nothing
	}
	lam = accurate.AddUp(lam, accurate.MulUp(0.5, accurate.AddUp(errN, errG)))
	lam = accurate.AddUp(lam, errR)
	return accurate.Up(math.Max(lam, 0) / accurate.Down(1-eta)), true
}
