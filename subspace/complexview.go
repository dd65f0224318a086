package subspace

import (
	"gonum.org/v1/gonum/blas/cblas128"
)

// ComplexSpan returns ComplexDim() complex m×n matrices spanning the
// complex subspace W that w stores, orthonormal in the Frobenius inner
// product tr(A*B) to working accuracy (not certified: an estimate for
// algebraic methods, whose answers are re-verified), as a new ComplexBasis
// that the caller owns. It panics if w is real.
//
// Derivation. NewComplex keeps s rows (a′_t, b′_t) ∈ R^{2mn} spanning W_R,
// the realification of W, exactly; each is (Re M, Im M) of the complex
// matrix M_t = a′_t + i b′_t ∈ W, and W_R = {(Re M, Im M) : M ∈ W}, so the
// real span of the M_t is W and their complex span is W too (W is closed
// under multiplication by i). The s = 2k matrices are twice too many over
// C (M and iM are independent over R only): modified Gram–Schmidt with
// column pivoting in the Hermitian inner product picks, at each step, the
// candidate with the largest remainder, orthogonalises it once more
// against those already chosen ("twice is enough", common practice) and
// normalises it; the first ComplexDim() chosen are returned. When the rank
// decision split a pair (k odd), the last one is the remainder of the
// unpaired row, still in W.
func (w *Subspace) ComplexSpan() ComplexBasis {
	cx := w.cx
	if cx == nil {
		panic("subspace: ComplexSpan of a real subspace")
	}
	m, n, L := cx.m, cx.n, cx.m*cx.n
	cand := make([][]complex128, cx.s)
	for t := range cand {
		a, b := cx.q[t*2*L:t*2*L+L], cx.q[t*2*L+L:(t+1)*2*L]
		v := make([]complex128, L)
		for l := range v {
			v[l] = complex(a[l], b[l])
		}
		cand[t] = v
	}
	k := min(w.ComplexDim(), len(cand))
	q := pivotedOrthonormal(cand, k)
	out := ComplexBasis{Count: len(q), Rows: m, Cols: n, Data: make([]complex128, 0, len(q)*L)}
	for _, v := range q {
		out.Data = append(out.Data, v...)
	}
	return out
}

// pivotedOrthonormal returns up to k orthonormal vectors spanning the
// leading part of the candidates' span, by modified Gram–Schmidt with
// column pivoting (see ComplexSpan); cand is overwritten. It stops early
// when every remainder is zero. All products are inside cblas128, so no
// multiply-add of this file can be fused.
func pivotedOrthonormal(cand [][]complex128, k int) [][]complex128 {
	vec := func(v []complex128) cblas128.Vector { return cblas128.Vector{N: len(v), Data: v, Inc: 1} }
	used := make([]bool, len(cand))
	var q [][]complex128
	for len(q) < k {
		best, bestNorm := -1, 0.0
		for t, v := range cand {
			if used[t] {
				continue
			}
			if nv := cblas128.Nrm2(vec(v)); nv > bestNorm {
				best, bestNorm = t, nv
			}
		}
		if best < 0 {
			break // the candidates span fewer than k dimensions
		}
		used[best] = true
		v := cand[best]
		for _, u := range q { // second pass against earlier vectors
			cblas128.Axpy(-cblas128.Dotc(vec(u), vec(v)), vec(u), vec(v))
		}
		nv := cblas128.Nrm2(vec(v))
		if nv == 0 {
			continue
		}
		for l, z := range v { // division, not 1/nv: nv may be subnormal
			v[l] = complex(real(z)/nv, imag(z)/nv)
		}
		q = append(q, v)
		for t, c := range cand {
			if !used[t] {
				cblas128.Axpy(-cblas128.Dotc(vec(v), vec(c)), vec(v), vec(c))
			}
		}
	}
	return q
}
