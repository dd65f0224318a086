package suite

import (
	"fmt"
	"math"
	"strings"

	"github.com/segre-lab/segre/subspace"
)

// Structured families: larger instances with known answers, built from the
// closed forms by direct sums and Kronecker products, so that bounds can be
// measured at 16×16 to 32×32 on more than Gaussian subspaces.

// DirectSum returns the block-diagonal direct sum of the parts' subspaces:
// W = {diag(B_1, …, B_p) : B_i ∈ W_i} in (Σm_i)×(Σn_i) matrices, spanned by
// each part's basis placed in its diagonal block.
//
// Derived here: write unit x = (x_1, …, x_p), y = (y_1, …, y_p) by blocks,
// a_i = ‖x_i‖², b_i = ‖y_i‖². The off-diagonal blocks of x yᵀ are
// orthogonal to W and P_W acts blockwise, so
// h(x, y) = Σ_i ‖P_{W_i}(x_i y_iᵀ)‖² ≤ Σ_i a_i b_i h_i* ≤ max_i h_i*·Σ_i a_i b_i
// ≤ max_i h_i* (Σ a_i b_i ≤ (Σ a_i)(Σ b_i) = 1 for nonnegative a, b), with
// equality at x = (0, …, x_i*, …, 0), y likewise, for the best part i. So
// h* = max_i h_i* and d* = min_i d_i*. Optimum is NaN unless every part's
// optimum is known.
func DirectSum(parts ...Instance) Instance {
	var m, n, count int
	names := make([]string, len(parts))
	opt, best := math.Inf(1), -1
	for i, p := range parts {
		m += p.Basis.Rows
		n += p.Basis.Cols
		count += p.Basis.Count
		names[i] = p.Name
		if math.IsNaN(p.Optimum) {
			opt = math.NaN()
		} else if p.Optimum < opt {
			opt, best = p.Optimum, i
		}
	}
	L := m * n
	d := make([]float64, count*L)
	var t, r0, c0 int
	for _, p := range parts {
		b := p.Basis
		pl := b.Rows * b.Cols
		for s := 0; s < b.Count; s++ {
			for i := 0; i < b.Rows; i++ {
				for j := 0; j < b.Cols; j++ {
					d[t*L+(r0+i)*n+c0+j] = b.Data[s*pl+i*b.Cols+j]
				}
			}
			t++
		}
		r0 += b.Rows
		c0 += b.Cols
	}
	out := Instance{Family: "direct-sum", Name: "direct-sum(" + strings.Join(names, "+") + ")",
		Basis: subspace.Basis{Count: count, Rows: m, Cols: n, Data: d}, Optimum: opt}
	if math.IsNaN(opt) {
		return out
	}
	if p := parts[best]; p.X0 != nil {
		out.X0, out.Y0 = make([]float64, m), make([]float64, n)
		r0, c0 = 0, 0
		for _, q := range parts[:best] {
			r0 += q.Basis.Rows
			c0 += q.Basis.Cols
		}
		copy(out.X0[r0:], p.X0)
		copy(out.Y0[c0:], p.Y0)
	}
	return out
}

// KroneckerFull returns W ⊗ R^{p×q}: the span of B_t ⊗ E for every basis
// matrix B_t of in (m×n) and every p×q matrix unit E, in (mp)×(nq)
// matrices with rows (i, a) ↦ i·p + a and columns (j, b) ↦ j·q + b.
//
// Derived here: h* (and d*) are those of in. Identify R^{mp×nq} with
// R^{m×n} ⊗ R^{p×q}; then P = P_W ⊗ I. A unit x ∈ R^{mp} is an m×p matrix
// X = Σ_r σ_r a_r b_rᵀ (SVD), y likewise Y = Σ_s τ_s c_s d_sᵀ, and
// x yᵀ = Σ_{r,s} σ_r τ_s (a_r c_sᵀ) ⊗ (b_r d_sᵀ) with the b_r d_sᵀ
// orthonormal. So h(x, y) = Σ_{r,s} σ_r² τ_s² ‖P_W(a_r c_sᵀ)‖² ≤ h*_W,
// with equality at x = x₀ ⊗ e₁, y = y₀ ⊗ e₁. The dimension is k·p·q.
func KroneckerFull(in Instance, p, q int) Instance {
	b := in.Basis
	m, n := b.Rows*p, b.Cols*q
	L, bl := m*n, b.Rows*b.Cols
	count := b.Count * p * q
	d := make([]float64, count*L)
	t := 0
	for s := 0; s < b.Count; s++ {
		for a := 0; a < p; a++ {
			for c := 0; c < q; c++ {
				for i := 0; i < b.Rows; i++ {
					for j := 0; j < b.Cols; j++ {
						d[t*L+(i*p+a)*n+j*q+c] = b.Data[s*bl+i*b.Cols+j]
					}
				}
				t++
			}
		}
	}
	out := Instance{Family: "kronecker-full", Name: fmt.Sprintf("kronecker(%s,%dx%d)", in.Name, p, q),
		Basis: subspace.Basis{Count: count, Rows: m, Cols: n, Data: d}, Optimum: in.Optimum}
	if in.X0 != nil {
		out.X0, out.Y0 = make([]float64, m), make([]float64, n)
		for i, v := range in.X0 {
			out.X0[i*p] = v
		}
		for j, v := range in.Y0 {
			out.Y0[j*q] = v
		}
	}
	return out
}

// Structured returns the structured instances with known answers at 16×16
// and 32×32 (each rotated by Haar-random orthogonal matrices, which hides
// the block structure and keeps d*; see Rotated): direct sums of rotated
// normed-algebra spans and complements (d* = 1/2, the complement of the
// quaternion span, whose biquadratic form is constant), and Kronecker
// products of them with full matrix spaces. With short set it returns the
// 16×16 ones only.
func Structured(short bool) []Instance {
	nac := func(seed uint64) Instance { return Rotated(NormedAlgebraComplement(4, seed), seed) }
	hr := func(seed uint64) Instance { return Rotated(HurwitzRadon(4, 4), seed) }
	named := func(in Instance, name string) Instance { in.Name = name; return in }
	out := []Instance{
		named(Rotated(DirectSum(nac(1), hr(2), nac(3), hr(4)), 5), "direct-sum/16x16/nac-hr"),
		named(Rotated(KroneckerFull(HurwitzRadon(4, 4), 4, 4), 6), "kronecker/16x16/hr4-full4"),
	}
	if !short {
		out = append(out,
			named(Rotated(DirectSum(nac(1), nac(2), hr(3), nac(4), hr(5), nac(6), hr(7), nac(8)), 9), "direct-sum/32x32/nac-hr"),
			named(Rotated(KroneckerFull(HurwitzRadon(4, 4), 8, 8), 10), "kronecker/32x32/hr4-full8"))
	}
	return out
}
