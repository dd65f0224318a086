package sdp

import (
	"context"
	"runtime"
	"sync"
)

// The Schur complement of the HKM direction, M_ij = tr(A_i Z⁻¹ A_j X), from
// the sparse entries of the constraints.
//
// Write a constraint's block as A = Σ_e v_e (E_ab + E_ba) over its stored
// entries e = (a, b) with a ≤ b, where v_e is the stored value for a < b and
// half of it for a = b (E_ab the matrix unit). With W = Z⁻¹ and X
// symmetric, tr(E_ab W E_pq X) = W_bp X_qa, so
//
//	tr((E_ab + E_ba) W (E_pq + E_qp) X) = W_bp X_qa + W_bq X_pa + W_ap X_qb + W_aq X_pb,
//
// and M_ij = Σ_blocks Σ_{e∈A_i} Σ_{f∈A_j} v_e v_f (those four terms): four
// products per pair of entries, read from the rows a and b of W and of X
// (contiguous, as both are stored in full). Its cost is Σ_ij nnz_i·nnz_j
// over the blocks the two constraints share, instead of the n³ of a dense
// product per constraint. M is symmetric positive definite when the A_i
// are linearly independent (tr(A_iWA_jX) = tr(A_jWA_iX) by transposition
// and cyclicity, and ΣΣ u_iu_j M_ij = ‖W^½(Σu_iA_i)X^½‖_F²).

// sparse is the index of the constraints' entries by block: the entries of
// constraint i in block b are those numbered off[b][i] to off[b][i+1]−1 in
// the arrays of block b (row p, column q, value v scaled as v_e above, and
// the constraint own that holds the entry).
type sparse struct {
	off [][]int
	blk []sparseBlock
}

type sparseBlock struct {
	p, q []int32
	v    []float64
	own  []int32
}

// newSparse indexes the constraints a of a problem with nb blocks.
func newSparse(nb int, a [][]Entry) *sparse {
	s := &sparse{off: make([][]int, nb), blk: make([]sparseBlock, nb)}
	for b := range s.off {
		s.off[b] = make([]int, len(a)+1)
	}
	for i, row := range a {
		for b := range s.off {
			s.off[b][i+1] = s.off[b][i]
		}
		for _, e := range row {
			v := e.V
			if e.I == e.J {
				v /= 2
			}
			bl := &s.blk[e.Block]
			bl.p = append(bl.p, int32(e.I))
			bl.q = append(bl.q, int32(e.J))
			bl.v = append(bl.v, v)
			bl.own = append(bl.own, int32(i))
			s.off[e.Block][i+1]++
		}
	}
	return s
}

// rowCost estimates the work of row i of M (entry pairs visited).
func (s *sparse) rowCost(i int) float64 {
	var c float64
	for b := range s.off {
		off := s.off[b]
		c += float64((off[i+1]-off[i]+1)/2) * float64(off[len(off)-1]-off[i])
	}
	return c + 1
}

// schurRows writes rows [lo, hi) of the upper triangle of M (row-major
// k×k, entries j ≥ i) for the blocks' W = Z⁻¹ and X (full storage). It
// stops between rows when done returns true. rec is scratch of at least
// 16n + N values for every block (n its order, N its number of entries).
//
// Row i is accumulated over the entries of A_i two at a time, (a₁, b₁, v₁)
// and (a₂, b₂, v₂) (a lone last one paired with a zero entry), in one pass
// over the entries (p, q, v) of A_i, …, A_{k−1}. The values the pass reads
// at a p are gathered first into one record of eight, rec[p] = (v₁W_a₁p,
// v₁W_b₁p, X_a₁p, X_b₁p, v₂W_a₂p, v₂W_b₂p, X_a₂p, X_b₂p), so each entry
// reads two records (a cache line each) instead of sixteen scattered
// values, and the entry's eight terms are a lane-wise product of rec[p]
// with rec[q] reversed within each half: with the kernels, pairKernel
// computes those sums (entry by entry, into the scratch after the records)
// and the loop below adds them up by constraint.
func (s *sparse) schurRows(m []float64, k, lo, hi int, blocks []*block, rec []float64, done func() bool) {
	for i := lo; i < hi; i++ {
		if (i-lo)%32 == 31 && done() {
			return
		}
		row := m[i*k : (i+1)*k]
		clear(row[i:])
		for bi, bl := range blocks {
			n, w, x := bl.n, bl.w, bl.x
			sb := &s.blk[bi]
			e0, e1 := s.off[bi][i], s.off[bi][i+1]
			if e0 == e1 {
				continue
			}
			end := len(sb.v)
			ps, qs, vs, own := sb.p[e0:end], sb.q[e0:end], sb.v[e0:end], sb.own[e0:end]
			for e := e0; e < e1; e += 2 {
				a1, b1, v1 := int(sb.p[e]), int(sb.q[e]), sb.v[e]
				a2, b2, v2 := a1, b1, 0.0 // a lone last entry pairs with a zero one
				if e+1 < e1 {
					a2, b2, v2 = int(sb.p[e+1]), int(sb.q[e+1]), sb.v[e+1]
				}
				wa1, wb1, xa1, xb1 := w[a1*n:][:n], w[b1*n:][:n], x[a1*n:][:n], x[b1*n:][:n]
				wa2, wb2, xa2, xb2 := w[a2*n:][:n], w[b2*n:][:n], x[a2*n:][:n], x[b2*n:][:n]
				r := rec[:8*n]
				for p := 0; p < n; p++ {
					t := r[8*p:][:8]
					t[0], t[1], t[2], t[3] = v1*wa1[p], v1*wb1[p], xa1[p], xb1[p]
					t[4], t[5], t[6], t[7] = v2*wa2[p], v2*wb2[p], xa2[p], xb2[p]
				}
				acc, cur := 0.0, i
				if useKernels {
					// The records reversed within each half, so that the
					// kernel's lane-wise products are the terms above.
					rv := rec[8*n : 16*n]
					for p := 0; p < n; p++ {
						t, u := r[8*p:][:8], rv[8*p:][:8]
						u[0], u[1], u[2], u[3], u[4], u[5], u[6], u[7] = t[3], t[2], t[1], t[0], t[7], t[6], t[5], t[4]
					}
					tv := rec[16*n:][:len(vs)]
					pairKernel(r, rv, ps, qs, vs, tv)
					for f, t := range tv {
						if o := int(own[f]); o != cur {
							row[cur] += acc
							acc, cur = 0, o
						}
						acc += t
					}
					row[cur] += acc
					continue
				}
				for f := range vs {
					p, q := int(ps[f]), int(qs[f])
					if o := int(own[f]); o != cur {
						row[cur] += acc
						acc, cur = 0, o
					}
					rp, rq := r[8*p:][:8], r[8*q:][:8]
					// v₁(W_b₁p X_qa₁ + W_b₁q X_pa₁ + W_a₁p X_qb₁ + W_a₁q X_pb₁) + (the same for entry 2).
					t := rp[1]*rq[2] + rq[1]*rp[2] + rp[0]*rq[3] + rq[0]*rp[3] +
						rp[5]*rq[6] + rq[5]*rp[6] + rp[4]*rq[7] + rq[4]*rp[7]
					acc += vs[f] * t
				}
				row[cur] += acc
			}
		}
	}
}

// schur assembles the upper triangle of the Schur complement into s.m,
// splitting the rows between up to GOMAXPROCS goroutines in contiguous
// ranges of about equal work (each row is computed by the same operations
// whatever the split). It checks ctx every 32 rows and stops early when it
// is done (the caller notices).
func (s *hkm) schur(ctx context.Context) {
	k := s.k
	if len(s.m) < k*k {
		s.m = make([]float64, k*k)
	}
	done := func() bool { return ctx.Err() != nil }
	workers := min(runtime.GOMAXPROCS(0), max(k/64, 1))
	scratch := 0 // records (16 per row of a block) and one value per entry
	for b, bl := range s.blocks {
		scratch = max(scratch, 16*bl.n+len(s.sp.blk[b].v))
	}
	if workers == 1 {
		s.sp.schurRows(s.m, k, 0, k, s.blocks, make([]float64, scratch), done)
		return
	}
	if s.rowCost == nil {
		s.rowCost = make([]float64, k+1) // prefix sums of the row costs
		for i := 0; i < k; i++ {
			s.rowCost[i+1] = s.rowCost[i] + s.sp.rowCost(i)
		}
	}
	var wg sync.WaitGroup
	lo := 0
	for w := 1; w <= workers; w++ {
		hi := k
		if w < workers {
			target := s.rowCost[k] * float64(w) / float64(workers)
			hi = lo
			for hi < k && s.rowCost[hi] < target {
				hi++
			}
		}
		wg.Add(1)
		go func(lo, hi int) {
			defer wg.Done()
			s.sp.schurRows(s.m, k, lo, hi, s.blocks, make([]float64, scratch), done)
		}(lo, hi)
		lo = hi
	}
	wg.Wait()
}
