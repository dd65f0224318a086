package suite

import (
	"fmt"
	"math"
	"strings"

	"gonum.org/v1/gonum/mat"

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

// UPBComplement is the orthogonal complement in R^{3×3} of the five
// product vectors of the "Tiles" unextendible product basis (C. H.
// Bennett, D. P. DiVincenzo, T. Mor, P. W. Shor, J. A. Smolin,
// B. M. Terhal, "Unextendible product bases and bound entanglement", Phys.
// Rev. Lett. 82, 1999; the vectors recalled from memory):
// e₀⊗(e₀ − e₁), (e₀ − e₁)⊗e₂, e₂⊗(e₁ − e₂), (e₁ − e₂)⊗e₀ and
// (e₀ + e₁ + e₂)⊗(e₀ + e₁ + e₂). W has dimension 4 and contains no
// rank-one matrix (the basis is unextendible), so d* > 0; its value is not
// known in closed form (Optimum NaN). Its projector is invariant under
// the partial transpose (the vectors are real), so the level-one
// relaxation proves nothing here (ρ = P_W/4 is feasible with value 1),
// a known weakness that level two and branch-and-bound overcome. The basis
// is given as the complement computed by gonum's SVD.
func UPBComplement() Instance {
	e := [3][3]float64{{1, 0, 0}, {0, 1, 0}, {0, 0, 1}}
	sub := func(a, b [3]float64) [3]float64 { return [3]float64{a[0] - b[0], a[1] - b[1], a[2] - b[2]} }
	all := [3]float64{1, 1, 1}
	pairs := [][2][3]float64{
		{e[0], sub(e[0], e[1])}, {sub(e[0], e[1]), e[2]}, {e[2], sub(e[1], e[2])}, {sub(e[1], e[2]), e[0]}, {all, all},
	}
	prod := mat.NewDense(5, 9, nil)
	for r, p := range pairs {
		for i := 0; i < 3; i++ {
			for j := 0; j < 3; j++ {
				prod.Set(r, i*3+j, p[0][i]*p[1][j])
			}
		}
	}
	var svd mat.SVD
	if !svd.Factorize(prod, mat.SVDFull) {
		panic("suite: SVD of the UPB failed")
	}
	var v mat.Dense
	svd.VTo(&v)
	d := make([]float64, 0, 4*9)
	for c := 5; c < 9; c++ { // the right singular vectors beyond rank 5 span the complement
		d = append(d, mat.Col(nil, c, &v)...)
	}
	return Instance{Family: "upb-complement", Name: "upb-complement/tiles",
		Basis: subspace.Basis{Count: 4, Rows: 3, Cols: 3, Data: d}, Optimum: math.NaN()}
}

// Embed returns in padded with zeros to m×n matrices (m ≥ in's rows,
// n ≥ its columns): the same subspace in the top-left block. Derived here:
// for unit x = (x₁, x₂), y = (y₁, y₂), P_W(x yᵀ) = P_W(x₁y₁ᵀ), so
// h ≤ ‖x₁‖²‖y₁‖² h* ≤ h*, with equality at (x₀, 0), (y₀, 0): d* is in's.
func Embed(in Instance, m, n int) Instance {
	b := in.Basis
	if m < b.Rows || n < b.Cols {
		panic("suite: Embed needs a larger shape")
	}
	L, bl := m*n, b.Rows*b.Cols
	d := make([]float64, b.Count*L)
	for t := 0; t < b.Count; t++ {
		for i := 0; i < b.Rows; i++ {
			copy(d[t*L+i*n:t*L+i*n+b.Cols], b.Data[t*bl+i*b.Cols:t*bl+(i+1)*b.Cols])
		}
	}
	out := in
	out.Name = fmt.Sprintf("%s/embedded%dx%d", in.Name, m, n)
	out.Basis = subspace.Basis{Count: b.Count, Rows: m, Cols: n, Data: d}
	if in.X0 != nil {
		out.X0, out.Y0 = make([]float64, m), make([]float64, n)
		copy(out.X0, in.X0)
		copy(out.Y0, in.Y0)
	}
	return out
}
