package net

import (
	"math"
	"strconv"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
	"gonum.org/v1/gonum/mat"

	"github.com/segre-lab/segre/internal/accurate"
	"github.com/segre-lab/segre/internal/eigen"
	"github.com/segre-lab/segre/internal/rawstore"
	"github.com/segre-lab/segre/internal/verified"
	"github.com/segre-lab/segre/subspace"
)

// MaxEigH returns an estimate of λmax(H(x)) and a proven upper bound on it,
// for the float vector x exactly as given (not normalised) and the subspace
// the stored vectors define exactly; if vec is non-nil (length n) it receives
// the estimated top eigenvector, the best unit y for this x. λmax(H(x)) is
// max over unit y of ‖P_W(x⊗y)‖², the squared seminorm s(x)² used by global
// searches. It panics on wrong lengths.
//
// Derivation, W stored (rows S, Gram SSᵀ = I + E, ‖E‖₂ ≤ η). With
// Z = [S_tᵀx]_t (s×n, exact), H(x) = (x⊗I)ᵀSᵀ(SSᵀ)⁻¹S(x⊗I) ⪯ ZᵀZ/(1−η), so
// λmax(H) ≤ σmax(Z)²/(1−η). The float Ẑ errs entrywise by at most
// γ_m Σ_i|S_t,ij||x_i| ≤ γ_m‖x‖‖S_t[·, j]‖ (Cauchy–Schwarz), so
// ‖Z − Ẑ‖_F ≤ γ_m‖x‖‖S‖_F =: e and σmax(Z) ≤ σmax(Ẑ) + e. σmax(Ẑ)² is
// λmax of ẐᵀẐ (or of ẐẐᵀ, whichever is smaller), whose float formation errs
// by at most γ_s‖Ẑ‖_F² (γ_n for ẐẐᵀ) in norm, and whose λmax is bounded by
// the verified Cholesky test.
// W⊥ stored: H(x) = ‖x‖²I − (x⊗I)ᵀP_{W⊥}(x⊗I) ⪯ ‖x‖²I − ZᵀZ/(1+η), so
// λmax(H) ≤ ‖x‖² − σ_n(Z)²/(1+η), with σ_n(Z) ≥ σ_n(Ẑ) − e ≥ 0 and σ_n(Ẑ)²
// bounded below by the verified test on ẐᵀẐ (σ_n = 0 when s < n).
func MaxEigH(w *subspace.Subspace, x, vec []float64) (est, upper float64) {
	if len(x) != w.Rows() {
		panic("net: MaxEigH: x has length " + strconv.Itoa(len(x)) + ", want m = " + strconv.Itoa(w.Rows()))
	}
	return maxEig(w, w.HOperator(x), x, vec)
}

// MaxEigG is MaxEigH for the other side: an estimate and a proven upper
// bound of λmax(G(y)) = max over unit x of ‖P_W(x⊗y)‖², for y exactly as
// given; vec (length m, optional) receives the estimated best unit x.
func MaxEigG(w *subspace.Subspace, y, vec []float64) (est, upper float64) {
	if len(y) != w.Cols() {
		panic("net: MaxEigG: y has length " + strconv.Itoa(len(y)) + ", want n = " + strconv.Itoa(w.Cols()))
	}
	return maxEig(w, w.GOperator(y), y, vec)
}

// maxEig is MaxEigH and MaxEigG for the operator op = H(u) or G(u): the
// estimate by Lanczos (eigen.Top), then maxEigUpper from that estimate.
func maxEig(w *subspace.Subspace, op *subspace.Operator, u, vec []float64) (est, upper float64) {
	p := rawstore.FactorOf(op).P
	v := make([]float64, p)
	if vec != nil {
		if len(vec) != p {
			panic("net: eigenvector buffer has the wrong length")
		}
		copy(v, vec)
	}
	est, _ = eigen.Top(op.Apply, v, 0, 0, 1e-10)
	if vec != nil {
		copy(vec, v)
	}
	return est, maxEigUpper(w, op, u, est)
}

// maxEigUpper is the proven part of maxEig: the upper bound of λmax(op)
// derived on MaxEigH, with est (an estimate of λmax(op)) only as the
// verified test's starting point. Any est, even NaN or ±Inf, gives a valid
// bound; a poor one gives a weaker bound. It runs no eigensolver, so a
// bound recorded with its estimate can be recomputed bit for bit.
func maxEigUpper(w *subspace.Subspace, op *subspace.Operator, u []float64, est float64) float64 {
	fc := rawstore.FactorOf(op)
	p, s, z := fc.P, fc.S, fc.Z
	st := w.Stored()
	comp, eta := st.Complement(), st.OrthogonalityBound()
	for _, a := range u {
		if math.IsNaN(a) || math.IsInf(a, 0) {
			return math.Inf(1)
		}
	}
	if eta >= 0.5 {
		return math.Inf(1)
	}
	uu := accurate.SumSqUpper(u)
	if s == 0 {
		if comp {
			return uu // H = ‖x‖²I exactly
		}
		return 0
	}
	other := w.Rows() * w.Cols() / p // the length of u
	sf := accurate.SqrtUp(st.SumSqUpper())
	e := accurate.MulUp(accurate.MulUp(accurate.Gamma(other), accurate.SqrtUp(uu)), sf)
	zf := accurate.SumSqUpper(z)
	var raw blas64.Symmetric
	var form float64
	useSmall := !comp && s < p
	if useSmall {
		raw = blas64.Symmetric{N: s, Stride: s, Data: make([]float64, s*s), Uplo: blas.Upper}
		blas64.Syrk(blas.NoTrans, 1, blas64.General{Rows: s, Cols: p, Stride: p, Data: z}, 0, raw)
		form = accurate.MulUp(accurate.Gamma(p), zf)
	} else {
		zt := make([]float64, p*s)
		for t := 0; t < s; t++ {
			for a := 0; a < p; a++ {
				zt[a*s+t] = z[t*p+a]
			}
		}
		raw = blas64.Symmetric{N: p, Stride: p, Data: make([]float64, p*p), Uplo: blas.Upper}
		blas64.Syrk(blas.NoTrans, 1, blas64.General{Rows: p, Cols: s, Stride: s, Data: zt}, 0, raw)
		form = accurate.MulUp(accurate.Gamma(s), zf)
	}
	mhat := mat.NewSymDense(raw.N, raw.Data)
	if !comp {
		lam := accurate.AddUp(verified.MaxEigUpper(mhat, est), form)
		sig := accurate.AddUp(accurate.SqrtUp(math.Max(lam, 0)), e)
		b := accurate.MulUp(sig, sig)
		return accurate.Up(b / accurate.Down(1-eta))
	}
	var sigLow float64
	if s >= p {
		lmin := accurate.Down(verified.MinEigLower(mhat, uu-est) - form)
		if lmin > 0 {
			sigLow = math.Max(0, accurate.Down(accurate.SqrtDown(lmin)-e))
		}
	}
	sub := accurate.Down(accurate.Down(sigLow*sigLow) / accurate.Up(1+eta))
	return math.Max(0, accurate.Up(uu-math.Max(sub, 0)))
}
