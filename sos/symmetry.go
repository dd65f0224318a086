package sos

import (
	"math/bits"

	"gonum.org/v1/gonum/mat"
)

// Sign symmetry of a relaxation (a special case of the symmetry reduction
// of K. Gatermann, P. A. Parrilo, "Symmetry groups, semidefinite programs,
// and sums of squares", J. Pure Appl. Algebra 192, 2004, for the abelian
// group of coordinate sign changes, whose isotypic components are sets of
// coordinates, so no change of basis is needed).
//
// The group. A pair of diagonal sign matrices (S, T) = (diag s, diag t),
// s ∈ {±1}^m, t ∈ {±1}^n, is a symmetry of the float matrix P̂ of order m·n
// when (S⊗T)P̂(S⊗T) = P̂ exactly, i.e. s_i s_k t_j t_l = 1 wherever
// P̂[(i,j),(k,l)] ≠ 0. Writing s_i = (−1)^{g_i}, t_j = (−1)^{g_{m+j}} with
// g ∈ GF(2)^{m+n}, the symmetries are the solutions of the linear system
// g_i + g_k + g_{m+j} + g_{m+l} = 0 over GF(2), one equation per nonzero
// entry: a subgroup G, found as the null space of that system (Gaussian
// elimination over GF(2)). It always contains the two elements that flip
// all of x or all of y.
//
// The split. G acts on a moment matrix indexed by monomials (row (i, j) of
// level one stands for x_i y_j, row (i, pq) of level two for x_i y_p y_q)
// by ρ ↦ ΣρΣ with Σ diagonal, Σ_rr = χ_r(g), the row's character (−1 to the
// sum of g over the row's indices). Every ingredient of the relaxations is
// invariant under this action: P̂ by the choice of G, P̂⊗I and so Ĉ (the
// identity factor contributes t_b² = 1), the diagonal D and I, the partial
// transposes and the orbit equalities (the action multiplies every entry
// of an orbit by the same sign, the character of the orbit's monomial).
// Hence the group average ρ̄ = |G|⁻¹ Σ_g Σ_g ρ Σ_g of a feasible ρ is
// feasible with the same objective (the feasible set is convex and
// invariant, the objective linear and invariant): the optimum is attained
// at an invariant ρ. An invariant ρ has ρ_rc = χ_r(g)χ_c(g)ρ_rc for all g,
// so ρ_rc = 0 unless rows r and c have the same character on all of G:
// grouping the rows by character makes ρ block diagonal, and an SDP over
// the blocks has exactly the value of the unreduced one. Dually, a
// certificate built on the blocks (zero between them) is a certificate of
// the full problem as it stands: the verifiers never need the group.

// signGroup returns a basis of the group G of sign symmetries of p (order
// m·n; see the comment above), each element a bit set of m+n bits
// (bit i flips x_i, bit m+j flips y_j) in words of 64 bits.
func signGroup(p *mat.SymDense, m, n int) [][]uint64 {
	nv := m + n
	words := (nv + 63) / 64
	raw := p.RawSymmetric()
	L := m * n
	// Row-reduced echelon rows, each with its pivot (lowest set bit).
	var rows [][]uint64
	var piv []int
	seen := map[[4]int]bool{}
	eq := make([]uint64, words)
	flip := func(v []uint64, b int) { v[b/64] ^= 1 << (b % 64) }
	has := func(v []uint64, b int) bool { return v[b/64]>>(b%64)&1 == 1 }
	for a := 0; a < L && len(rows) < nv-2; a++ {
		i, j := a/n, a%n
		for b := a; b < L; b++ {
			if raw.Data[a*raw.Stride+b] == 0 {
				continue
			}
			k, l := b/n, b%n
			key := [4]int{min(i, k), max(i, k), min(j, l), max(j, l)}
			if seen[key] {
				continue
			}
			seen[key] = true
			clear(eq)
			flip(eq, i)
			flip(eq, k)
			flip(eq, m+j)
			flip(eq, m+l)
			for r, row := range rows {
				if has(eq, piv[r]) {
					for w := range eq {
						eq[w] ^= row[w]
					}
				}
			}
			lead := -1
			for w, x := range eq {
				if x != 0 {
					lead = 64*w + bits.TrailingZeros64(x)
					break
				}
			}
			if lead < 0 {
				continue
			}
			for _, row := range rows { // keep the rows reduced
				if has(row, lead) {
					for w := range row {
						row[w] ^= eq[w]
					}
				}
			}
			rows = append(rows, append([]uint64(nil), eq...))
			piv = append(piv, lead)
		}
	}
	isPivot := make([]int, nv)
	for i := range isPivot {
		isPivot[i] = -1
	}
	for r, p := range piv {
		isPivot[p] = r
	}
	var basis [][]uint64
	for f := 0; f < nv; f++ {
		if isPivot[f] >= 0 {
			continue
		}
		// The free variable f set to 1, the others free set to 0: each pivot
		// variable equals the sum of the free ones in its row.
		g := make([]uint64, words)
		flip(g, f)
		for r, row := range rows {
			if has(row, f) {
				flip(g, piv[r])
			}
		}
		basis = append(basis, g)
	}
	return basis
}

// characterBlocks groups the rows of a moment matrix by their characters on
// the group with basis g: row r stands for the monomial with index list
// idx(r) (indices into the m+n bits), and its character on a basis element
// is the parity of that element's bits over the list. It returns the block
// of every row and each block's rows in increasing order, blocks numbered
// by their first row.
func characterBlocks(g [][]uint64, rows int, idx func(r int, dst []int) []int) (blk []int, members [][]int) {
	blk = make([]int, rows)
	ids := map[string]int{}
	key := make([]byte, (len(g)+7)/8)
	var buf []int
	for r := 0; r < rows; r++ {
		clear(key)
		buf = idx(r, buf[:0])
		for e, v := range g {
			par := 0
			for _, b := range buf {
				par ^= int(v[b/64] >> (b % 64) & 1)
			}
			key[e/8] |= byte(par << (e % 8))
		}
		id, ok := ids[string(key)]
		if !ok {
			id = len(members)
			ids[string(key)] = id
			members = append(members, nil)
		}
		blk[r] = id
		members[id] = append(members[id], r)
	}
	return blk, members
}
