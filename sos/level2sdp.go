package sos

import (
	"math"

	"gonum.org/v1/gonum/mat"

	"github.com/segre-lab/segre/internal/eigen"
	"github.com/segre-lab/segre/internal/sdp"
)

// The level-two SDP in moment form, block diagonal under the sign
// symmetries (derivations on extension, at the top of level2.go, and on
// signGroup).
//
// Moment form. The relaxation's variable ρ (order dim = m·n(n+1)/2) is
// constant on every orbit o of entries (the same {i, k} and the same
// multiset {p, q, r, s}): ρ = Σ_o μ_o E_o, E_o the symmetric 0/1 matrix of
// the orbit's entries (both triangles), μ_o the moment ∫ x_i x_k y_p y_q
// y_r y_s. The relaxation is
//
//	max Σ_o μ_o ĉ_o  s.t.  Σ_o μ_o d_o = 1,  Σ_o μ_o E_o ⪰ 0,
//
// with ĉ_o = ⟨Ĉ, E_o⟩ and d_o = ⟨D, E_o⟩ (Frobenius products). Its variables
// are the orbits, about half the number of the equalities ρ_u = ρ_r of the
// entry form (at 6×6: 2646 orbits against 5355 equalities), and the
// interior-point method's cost is the cube of that number. The equality is
// eliminated through the orbit π of the entry ((0,00),(0,00)), alone in its
// orbit with d_π = 1: μ_π = 1 − Σ_{o≠π} d_o μ_o, so
//
//	ρ(μ) = E_π + Σ_{o≠π} μ_o (E_o − d_o E_π),
//
// which is the dual of internal/sdp's form (min bᵀy s.t. Σ y_o A_o − C ⪰ 0)
// with y = μ, A_o = E_o − d_o E_π, C = −E_π and b_o = −(ĉ_o − d_o ĉ_π):
// bᵀy = ĉ_π − ⟨Ĉ, ρ(μ)⟩, so the solver's dual optimum is ĉ_π minus the
// relaxation's value.
//
// The certificate. The solver's primal is X ⪰ 0 with ⟨A_o, X⟩ = b_o, i.e.
// ⟨E_o, X + Ĉ⟩ = d_o⟨E_π, X + Ĉ⟩ for every o ≠ π. With
// t = ⟨E_π, X + Ĉ⟩ (= the relaxation's value at the optimum, by strong
// duality) and K = tD − Ĉ − X, every orbit sum ⟨E_o, K⟩ = t d_o − ⟨E_o, X +
// Ĉ⟩ is minus the residual of constraint o (zero for π), and
// tD − Ĉ − K = X ⪰ 0: the certificate of level2.go. In floats the solver's
// X is feasible only to its tolerance: K's orbit means are subtracted, so
// its orbit sums vanish up to rounding, and tD − Ĉ − K becomes X plus a
// matrix of the size of the residuals; t is raised by the estimated
// amount by which that falls below zero (D ⪰ I, so raising t by τ raises
// every eigenvalue by at least τ). None of this needs to be exact:
// extension.bound proves the bound from (t, K) whatever they are.
//
// Blocks. Under the sign symmetries of P̂ (signGroup) the rows split into
// blocks of equal character; the orbits whose entries lie between blocks
// have a nontrivial character and moment zero at an invariant optimum, so
// they are dropped, and every kept orbit has all its entries inside blocks
// (an entry between rows of characters χ_r ≠ χ_c has the orbit character
// χ_rχ_c, nontrivial). The SDP then has one block per character.
type momentForm struct {
	e      *extension
	blk    []int     // block of each row
	pos    []int     // position of each row in its block
	rows   [][]int   // rows of each block, increasing
	off    []int32   // entries of orbit o: ents[off[o]:off[o+1]]
	ents   []int32   // upper-triangle entries a·dim + b (a ≤ b), grouped by orbit
	dw, cw []float64 // d_o and ĉ_o
	kept   []int     // orbits with all entries inside blocks, π first
}

// newMomentForm builds the moment form of e, block diagonal by the sign
// group g (nil: one block).
func newMomentForm(e *extension, g [][]uint64) *momentForm {
	dim := e.dim
	f := &momentForm{e: e}
	f.blk, f.rows = characterBlocks(g, dim, func(r int, dst []int) []int {
		t := e.pq[r%e.s]
		return append(dst, r/e.s, e.m+t[0], e.m+t[1])
	})
	f.pos = make([]int, dim)
	for _, rs := range f.rows {
		for p, r := range rs {
			f.pos[r] = p
		}
	}
	f.off = make([]int32, e.norbits+1)
	for a := 0; a < dim; a++ {
		for b := a; b < dim; b++ {
			f.off[e.orbit[a*dim+b]+1]++
		}
	}
	for o := 0; o < e.norbits; o++ {
		f.off[o+1] += f.off[o]
	}
	f.ents = make([]int32, f.off[e.norbits])
	fill := append([]int32(nil), f.off[:e.norbits]...)
	f.dw, f.cw = make([]float64, e.norbits), make([]float64, e.norbits)
	for a := 0; a < dim; a++ {
		for b := a; b < dim; b++ {
			o := e.orbit[a*dim+b]
			f.ents[fill[o]] = int32(a*dim + b)
			fill[o]++
			c := e.chat[a*dim+b]
			if a == b {
				f.dw[o] += e.dval(a)
				f.cw[o] += c
			} else {
				f.cw[o] += 2 * c
			}
		}
	}
	pivot := e.orbit[0]
	f.kept = append(f.kept, pivot)
	for o := 0; o < e.norbits; o++ {
		a, b := int(f.ents[f.off[o]])/dim, int(f.ents[f.off[o]])%dim
		if o != pivot && f.blk[a] == f.blk[b] {
			f.kept = append(f.kept, o)
		}
	}
	return f
}

// entry returns the SDP entry of the upper-triangle index ab with value v.
func (f *momentForm) entry(ab int32, v float64) sdp.Entry {
	a, b := int(ab)/f.e.dim, int(ab)%f.e.dim
	return sdp.Entry{Block: f.blk[a], I: f.pos[a], J: f.pos[b], V: v}
}

// problem returns the SDP in internal/sdp's form: variable j is the moment
// of orbit kept[j+1].
func (f *momentForm) problem() sdp.Problem {
	var p sdp.Problem
	for _, rs := range f.rows {
		p.Blocks = append(p.Blocks, len(rs))
	}
	pi := f.kept[0]
	pe := f.ents[f.off[pi]:f.off[pi+1]]
	for _, ab := range pe {
		p.C = append(p.C, f.entry(ab, -1))
	}
	for _, o := range f.kept[1:] {
		var a []sdp.Entry
		for _, ab := range f.ents[f.off[o]:f.off[o+1]] {
			a = append(a, f.entry(ab, 1))
		}
		if d := f.dw[o]; d != 0 {
			for _, ab := range pe {
				a = append(a, f.entry(ab, -d))
			}
		}
		p.A = append(p.A, a)
		p.B = append(p.B, -(f.cw[o] - f.dw[o]*f.cw[pi]))
	}
	return p
}

// full returns the dim×dim row-major matrix with the blocks s in their
// rows and columns (zero between blocks).
func (f *momentForm) full(s []*mat.SymDense) []float64 {
	dim := f.e.dim
	out := make([]float64, dim*dim)
	for bi, rs := range f.rows {
		for p, a := range rs {
			for q, b := range rs {
				out[a*dim+b] = s[bi].At(p, q)
			}
		}
	}
	return out
}

// certificate turns the solver's primal blocks x into (t, K) as derived on
// momentForm.
func (f *momentForm) certificate(x []*mat.SymDense) (float64, []float64) {
	e, dim := f.e, f.e.dim
	k := f.full(x)
	pi := f.kept[0]
	var t float64
	for _, ab := range f.ents[f.off[pi]:f.off[pi+1]] {
		t += k[ab] + e.chat[ab] // π's only entry is on the diagonal
	}
	// K = tD − Ĉ − X.
	for a := 0; a < dim; a++ {
		for b := 0; b < dim; b++ {
			k[a*dim+b] = -e.chat[a*dim+b] - k[a*dim+b]
		}
		k[a*dim+a] += t * e.dval(a)
	}
	f.project(k)
	return raiseT(e, t, k), k
}

// project subtracts from the dim×dim symmetric k every orbit's mean (over
// both triangles), so that its orbit sums vanish up to rounding.
func (f *momentForm) project(k []float64) {
	e, dim := f.e, f.e.dim
	for o := 0; o < e.norbits; o++ {
		var sum, cnt float64
		es := f.ents[f.off[o]:f.off[o+1]]
		for _, ab := range es {
			a, b := int(ab)/dim, int(ab)%dim
			if a == b {
				sum, cnt = sum+k[ab], cnt+1
			} else {
				sum, cnt = sum+k[ab]+k[b*dim+a], cnt+2
			}
		}
		mean := sum / cnt
		for _, ab := range es {
			a, b := int(ab)/dim, int(ab)%dim
			k[ab] -= mean
			if a != b {
				k[b*dim+a] = k[ab]
			}
		}
	}
}

// raiseT returns t raised so that tD − Ĉ − K is, by estimate, positive
// semidefinite with a small margin (see momentForm): the verified test
// then succeeds near the estimate instead of at a shift it has to search
// for. An estimate that fails leaves t as it is (the bound stays valid).
func raiseT(e *extension, t float64, k []float64) float64 {
	dim := e.dim
	a := mat.NewSymDense(dim, nil)
	var big float64
	for i := 0; i < dim; i++ {
		for j := i; j < dim; j++ {
			v := -e.chat[i*dim+j] - k[i*dim+j]
			if i == j {
				v += t * e.dval(i)
			}
			a.SetSym(i, j, v)
			big = math.Max(big, math.Abs(v))
		}
	}
	vals, _, ok := eigen.Sym(a, false)
	if !ok {
		return t
	}
	margin := 64 * float64(dim) * 0x1p-52 * math.Max(big, 1e-300)
	if low := vals[0] - margin; low < 0 {
		t -= low
	}
	return t
}
