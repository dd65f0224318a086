package subspace

import (
	"math"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"

	"github.com/segre-lab/segre/internal/accurate"
)

// ResidualBound returns a proven upper bound on dist_F(x yᵀ, W) for the
// vectors x, y exactly as given (not normalised), W being the subspace the
// stored vectors define exactly. It never underestimates, whatever the
// rounding; it returns +Inf when it cannot prove anything finite.
//
// Derivation, W stored (rows S, not assumed orthonormal). For every float
// coefficient vector c, Sᵀc ∈ W exactly, so dist(x⊗y, W) ≤ ‖x⊗y − Sᵀc‖.
// We take c = fl(S v) refined once by c += fl(S fl(v − Sᵀc)), and evaluate
// each entry ρ_ℓ = x_i y_j − Σ_t c_t S_tℓ of the residual with the
// compensated dot product accurate.Acc, which returns ρ̃_ℓ and a proven
// b_ℓ ≥ |ρ̃_ℓ − ρ_ℓ|. Then ‖ρ‖² ≤ Σ_ℓ (|ρ̃_ℓ| + b_ℓ)², evaluated with upward
// rounding.
//
// Derivation, W⊥ stored (rows S spanning W⊥ exactly, Gram matrix
// SSᵀ = I + E with ‖E‖₂ ≤ η). The projector onto span(S) is
// Sᵀ(SSᵀ)⁻¹S ⪯ SᵀS/(1−η), so dist(v, W)² = vᵀ Sᵀ(SSᵀ)⁻¹S v ≤ ‖Sv‖²/(1−η).
// Each v_ℓ = x_i y_j is split exactly as p_ℓ + e_ℓ (TwoProd), and each
// (Sv)_t = Σ_ℓ S_tℓ(p_ℓ + e_ℓ) is evaluated by the compensated dot product
// with its proven error bound.
//
// It panics if len(x) ≠ m or len(y) ≠ n.
func (w *Subspace) ResidualBound(x, y []float64) float64 {
	w.checkX(x, "x")
	w.checkY(y, "y")
	m, n, L := w.m, w.n, w.m*w.n
	for _, v := range x {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return math.Inf(1)
		}
	}
	for _, v := range y {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return math.Inf(1)
		}
	}
	if w.comp {
		if w.eta >= 0.5 {
			return math.Inf(1)
		}
		p := make([]float64, L)
		e := make([]float64, L)
		for i := 0; i < m; i++ {
			for j := 0; j < n; j++ {
				p[i*n+j], e[i*n+j] = accurate.TwoProd(x[i], y[j])
			}
		}
		var ss float64
		for t := 0; t < w.s; t++ {
			row := w.q[t*L : (t+1)*L]
			var acc accurate.Acc
			for l, st := range row {
				acc.AddProd(st, p[l])
				acc.AddProd(st, e[l])
			}
			r, b := acc.Result()
			f := accurate.AddUp(math.Abs(r), b)
			ss += float64(f * f)
		}
		ss = accurate.UpperRel(ss, w.s+1)
		inv := accurate.Up(1 / accurate.Down(1-w.eta))
		return accurate.SqrtUp(accurate.MulUp(ss, inv))
	}
	v := make([]float64, L)
	kron(v, x, y)
	c := make([]float64, w.s)
	if w.s > 0 {
		w.coeffs(c, v)
		r := append([]float64(nil), v...)
		blas64.Gemv(blas.Trans, -1, w.stored(), blas64.Vector{N: w.s, Data: c, Inc: 1}, 1, blas64.Vector{N: L, Data: r, Inc: 1})
		dc := make([]float64, w.s)
		w.coeffs(dc, r)
		for t := range c {
			c[t] += dc[t]
		}
	}
	acc := make([]accurate.Acc, L)
	for i := 0; i < m; i++ {
		for j := 0; j < n; j++ {
			acc[i*n+j].AddProd(x[i], y[j])
		}
	}
	// Blocks of 512 entries keep their accumulators in the L1 cache while
	// every stored row passes over them (each accumulator still sees its
	// terms in the order t = 0, 1, …: the same result as row by row).
	const block = 512
	for l0 := 0; l0 < L; l0 += block {
		l1 := min(L, l0+block)
		ab := acc[l0:l1]
		for t := 0; t < w.s; t++ {
			ct := -c[t]
			if ct == 0 {
				continue
			}
			accurate.AddProds(ab, ct, w.q[t*L+l0:t*L+l1])
		}
	}
	var ss float64
	var rc accurate.ResultConsts // shared: every entry has the same number of terms
	for l := range acc {
		if l == 0 || acc[l].K != acc[l-1].K {
			rc = accurate.NewResultConsts(acc[l].K)
		}
		r, b := acc[l].ResultWith(&rc)
		f := accurate.AddUp(math.Abs(r), b)
		ss += float64(f * f)
	}
	return accurate.SqrtUp(accurate.UpperRel(ss, L+1)) // L squares and L−1 additions: within γ_{L+1}
}
