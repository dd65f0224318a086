package rankone

import (
	"context"
	"math"

	"gonum.org/v1/gonum/mat"

	"github.com/segre-lab/segre/internal/accurate"
	"github.com/segre-lab/segre/subspace"
)

// oneMatrixWork is the largest m·n·min(m, n) for which the one-matrix bound
// is computed (its compensated residual costs about that many products).
const oneMatrixWork = 1 << 26

// oneMatrixLower returns a certified lower bound on d*² when the stored
// basis is one vector A spanning W (dim W = 1), computed without forming
// 1 − h, so that it resolves distances far below √u ≈ 1e-8; ok is false when
// it does not apply (W⊥ stored, dim W ≠ 1, too large, cancelled, or a
// factorisation that failed).
//
// Derivation (Eckart–Young for one matrix). gonum's SVD returns the
// singular values sorted in decreasing order, so s₁ is the top one and the
// tail is s₂, s₃, … (the bound below relies on that order). W = span{A} exactly, so
// h(x, y) = (xᵀAy)²/‖A‖_F² and d*² = 1 − σ₁(A)²/‖A‖_F² =
// Σ_{i≥2} σᵢ(A)² / ‖A‖_F²: the tail of the singular values, with no
// cancellation. To bound the tail from below, take a computed thin SVD
// A ≈ U diag(s) Vᵀ (p = min(m, n) columns) and the float matrix
// F = fl(U diag(s)) (F_il = U_il s_l (1 + ε), |ε| ≤ u). Then, with
// ηU ≥ ‖UᵀU − I‖₂ and ηV ≥ ‖VᵀV − I‖₂ (so σ_min(U) ≥ √(1 − ηU), as
// ‖Uz‖² = zᵀUᵀUz ≥ (1 − ηU)‖z‖²):
//   - σᵢ(A) ≥ σᵢ(F Vᵀ) − δ, δ ≥ ‖A − F Vᵀ‖_F (Weyl's inequality for
//     singular values, Horn and Johnson, Matrix Analysis, Cor. 7.3.5);
//   - σᵢ(F Vᵀ) = σᵢ(V Fᵀ) ≥ σ_min(V) σᵢ(Fᵀ) = σ_min(V) σᵢ(F), by the
//     min–max characterisation: σᵢ(XY) ≥ σ_min(X) σᵢ(Y) when X has full
//     column rank, since ‖XYz‖ ≥ σ_min(X)‖Yz‖ for every z;
//   - σᵢ(F) ≥ σᵢ(U diag(s)) − ‖F − U diag(s)‖_F ≥ √(1 − ηU)·sᵢ − 2u‖F‖_F
//     (Weyl again, min–max for U of full column rank, and
//     |F − U diag(s)| ≤ u/(1−u)·|F| entrywise).
//
// So σᵢ(A) ≥ ℓᵢ := √(1−ηV)(√(1−ηU)·sᵢ − 2u‖F‖_F) − δ, and
// d*² ≥ Σ_{i≥2} max(ℓᵢ, 0)² / ‖A‖_F². Each ingredient is proven with
// directed rounding: ηU, ηV and δ from compensated dot products
// (accurate.Acc, whose bound covers their rounding), sums of squares with
// accurate.SumSqUpper/SumSqLower, products and quotients of nonnegative
// numbers rounded down (the float below a rounded-to-nearest result is
// below the exact one), and Tiny for underflow.
func oneMatrixLower(ctx context.Context, w *subspace.Subspace) (d2Lower float64, ok bool) {
	st := w.Stored()
	m, n := w.Rows(), w.Cols()
	p := min(m, n)
	if st.Complement() || st.Count() != 1 || m*n*p > oneMatrixWork {
		return 0, false
	}
	a := st.Vector(0, nil)
	var svd mat.SVD
	if !svd.Factorize(mat.NewDense(m, n, append([]float64(nil), a...)), mat.SVDThin) {
		return 0, false
	}
	var um, vm mat.Dense
	svd.UTo(&um)
	svd.VTo(&vm)
	s := svd.Values(nil)
	u, v := um.RawMatrix(), vm.RawMatrix() // m×p and n×p, row-major
	if ctx.Err() != nil {
		return 0, false
	}
	etaU := gramDefectUpper(u.Data, m, p, u.Stride)
	etaV := gramDefectUpper(v.Data, n, p, v.Stride)
	if !(etaU < 0.5 && etaV < 0.5) {
		return 0, false
	}
	f := make([]float64, m*p)
	for i := 0; i < m; i++ {
		for l := 0; l < p; l++ {
			f[i*p+l] = float64(u.Data[i*u.Stride+l] * s[l])
		}
	}
	fNorm := accurate.SqrtUp(accurate.SumSqUpper(f))
	// δ ≥ ‖A − F Vᵀ‖_F, entry by entry with compensated sums.
	e := make([]float64, 0, m*n)
	for i := 0; i < m; i++ {
		if i%64 == 63 && ctx.Err() != nil {
			return 0, false
		}
		for j := 0; j < n; j++ {
			var q accurate.Acc
			q.Add(a[i*n+j])
			for l := 0; l < p; l++ {
				q.AddProd(-f[i*p+l], v.Data[j*v.Stride+l])
			}
			r, b := q.Result()
			e = append(e, accurate.AddUp(math.Abs(r), b))
		}
	}
	delta := accurate.SqrtUp(accurate.SumSqUpper(e))
	cU := accurate.SqrtDown(accurate.Down(1 - etaU))
	cV := accurate.SqrtDown(accurate.Down(1 - etaV))
	slack := accurate.AddUp(accurate.MulUp(2*accurate.U, fNorm), accurate.Tiny)
	tail := make([]float64, 0, p)
	for i := 1; i < p; i++ {
		li := accurate.Down(mulDown(cU, s[i]) - slack)
		li = accurate.Down(mulDown(cV, math.Max(li, 0)) - accurate.AddUp(delta, accurate.Tiny))
		if li > 0 {
			tail = append(tail, li)
		}
	}
	num := accurate.SumSqLower(tail)
	den := accurate.SumSqUpper(a)
	if !(den > 0) || math.IsInf(den, 0) {
		return 0, false
	}
	d2 := accurate.Down(float64(num/den) - accurate.Tiny)
	return math.Max(d2, 0), true
}

// mulDown returns a lower bound on a·b for a, b ≥ 0 (the float below the
// rounded product; Tiny is subtracted by the caller for underflow).
func mulDown(a, b float64) float64 { return accurate.Down(float64(a * b)) }

// gramDefectUpper returns a proven upper bound on ‖MᵀM − I‖_F (≥ ‖·‖₂) for
// the rows×cols matrix M stored row-major with the given stride, by
// compensated dot products (each entry within |r| + bound of the exact one).
func gramDefectUpper(data []float64, rows, cols, stride int) float64 {
	var sq []float64
	for a := 0; a < cols; a++ {
		for b := a; b < cols; b++ {
			var q accurate.Acc
			if a == b {
				q.Add(-1)
			}
			for i := 0; i < rows; i++ {
				q.AddProd(data[i*stride+a], data[i*stride+b])
			}
			r, bd := q.Result()
			e := accurate.AddUp(math.Abs(r), bd)
			sq = append(sq, e)
			if a != b {
				sq = append(sq, e) // the symmetric entry
			}
		}
	}
	return accurate.SqrtUp(accurate.SumSqUpper(sq))
}
