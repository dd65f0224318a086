package sos

import (
	"math"
	"runtime"
	"sort"
	"sync"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
	"gonum.org/v1/gonum/lapack"
	"gonum.org/v1/gonum/lapack/gonum"

	"github.com/segre-lab/segre/internal/sdp"
)

// splitter computes the negative part V₋ = (−V)₊ of symmetric matrices
// (the projection step of the first-order methods) from the eigenpairs of
// one sign only, whichever sign has fewer eigenvalues: V₋ = Σ_{λ<0} |λ|vvᵀ
// directly, or V₋ = V₊ − V with V₊ = Σ_{λ>0} λvvᵀ (Moreau's decomposition
// V = V₊ − V₋). The method is the one LAPACK's selected-eigenvector drivers
// use (B. N. Parlett, "The Symmetric Eigenvalue Problem", 1998, ch. 7 and
// §4.3; J. W. Demmel, "Applied Numerical Linear Algebra", 1997, §5.3.4):
//
//  1. reduce V to tridiagonal form T = QᵀVQ by Householder reflections
//     (reduce: LAPACK's blocked dsytrd, 4n³/3 flops);
//  2. split T where an off-diagonal entry is at most ε‖T‖ (setting it to
//     zero perturbs T by that much) and compute each unreduced block's
//     eigenvalues by the root-free QR iteration (gonum's Dsterf, O(n²));
//  3. for the eigenvalues of the chosen sign, the eigenvectors of T by
//     inverse iteration with the eigenvalue as shift, reorthogonalised by
//     modified Gram–Schmidt against the earlier vectors of its cluster,
//     as LAPACK's dstein does; dstein's clusters are eigenvalues closer
//     than 10⁻³‖T‖, ours closer than 10⁻⁵‖T‖: vectors of eigenvalues a
//     gap g apart come out orthogonal to about ε‖T‖/g (Parlett 1998, §4.3),
//     2·10⁻¹¹ at our threshold, far below what the first-order methods
//     resolve, and the Gram–Schmidt work, which grows with the square of
//     the clusters, drops fourfold at order 1024;
//  4. back-transform them by Q (applyQ: blocks of reflectors in the
//     compact WY form, 2n²r flops for r vectors) and form the rank-r sum
//     (a symmetric rank-k update, n²r flops).
//
// Against a full decomposition by the QR iteration with accumulated
// rotations (about 9n³ flops, most of them in scalar rotations), this is
// at most about 2.8n³, and much less when one sign has few eigenvalues.
//
// Nothing here is certified: the first-order methods only need V₋ to the
// accuracy of a backward-stable decomposition (V ↦ V₋ is the projection
// onto a convex cone, so it is 1-Lipschitz in the Frobenius norm), and
// every bound they return is proven afterwards by the verifiers. When a
// step fails (a non-finite entry, no convergence) negPart and values
// report false, and the caller falls back on the full decomposition of
// internal/eigen.
type splitter struct {
	n          int
	a          []float64 // Dsytrd's matrix: the scaled V, then the reflectors
	d, e, tau  []float64
	vals       []float64 // the eigenvalues of the scaled V (by block, then sorted)
	z          []float64 // n×r eigenvectors, row-major
	u0, u1, u2 []float64 // the pivoted LU factors of T − λI (one block): U's diagonals
	lm         []float64 // and L's multipliers
	piv        []bool
	x          []float64 // inverse-iteration vector
	seed       uint64
	wp         []float64 // reduce's panel W (tridiagBlock rows of n)
	vb, tb, wb []float64 // applyQ's block of reflectors, its T and its product
	acc        []float64 // symvLower's two accumulators
}

func newSplitter(n int) *splitter {
	s := &splitter{n: n, a: make([]float64, n*n), d: make([]float64, n), e: make([]float64, n),
		tau: make([]float64, n), vals: make([]float64, n), u0: make([]float64, n), u1: make([]float64, n),
		u2: make([]float64, n), lm: make([]float64, n), piv: make([]bool, n), x: make([]float64, n)}
	s.wp = make([]float64, tridiagBlock*n)
	s.vb = make([]float64, tridiagBlock*n)
	s.tb = make([]float64, tridiagBlock*tridiagBlock)
	return s
}

// eigpair is an eigenvalue of T with the unreduced block [lo, hi) it
// belongs to.
type eigpair struct {
	val    float64
	lo, hi int
}

// scaleInto copies the n×n symmetric v into s.a scaled by a power of two
// that brings its largest entry into [1, 2) (exact), with entries below
// 2^-500 of that set to zero (as internal/eigen.Sym does, to keep gonum's
// routines away from underflow). It returns the scale (v = scale·a) and
// false for a non-finite entry; a zero matrix has scale 0.
func (s *splitter) scaleInto(v []float64) (float64, bool) {
	var big float64
	for _, x := range v {
		if math.IsNaN(x) || math.IsInf(x, 0) {
			return 0, false
		}
		big = math.Max(big, math.Abs(x))
	}
	if big == 0 {
		return 0, true
	}
	_, ex := math.Frexp(big)
	for i, x := range v {
		y := math.Ldexp(x, 1-ex)
		if math.Abs(y) < 0x1p-500 {
			y = 0
		}
		s.a[i] = y
	}
	return math.Ldexp(1, ex-1), true
}

// tridiagonal reduces s.a to tridiagonal form and computes the eigenvalues
// of T block by block; it returns them (unsorted, with their blocks) and
// ‖T‖ (a bound: the largest absolute row sum), or false on a failure.
func (s *splitter) tridiagonal(pairs []eigpair) ([]eigpair, float64, bool) {
	n := s.n
	var impl gonum.Implementation
	s.reduce()
	var tn float64
	for i := 0; i < n; i++ {
		r := math.Abs(s.d[i])
		if i > 0 {
			r += math.Abs(s.e[i-1])
		}
		if i < n-1 {
			r += math.Abs(s.e[i])
		}
		tn = math.Max(tn, r)
	}
	if math.IsNaN(tn) || math.IsInf(tn, 0) {
		return nil, 0, false
	}
	split := 0x1p-52 * tn
	for i := 0; i < n-1; i++ {
		if math.Abs(s.e[i]) <= split {
			s.e[i] = 0
		}
	}
	pairs = pairs[:0]
	dd, ee := s.vals, s.x // scratch for Dsterf (x is free until inverse iteration)
	for lo := 0; lo < n; {
		hi := lo + 1
		for hi < n && s.e[hi-1] != 0 {
			hi++
		}
		copy(dd[lo:hi], s.d[lo:hi])
		copy(ee[lo:hi-1], s.e[lo:hi-1])
		if !impl.Dsterf(hi-lo, dd[lo:hi], ee[lo:hi-1]) {
			return nil, 0, false
		}
		for _, v := range dd[lo:hi] {
			pairs = append(pairs, eigpair{v, lo, hi})
		}
		lo = hi
	}
	return pairs, tn, true
}

// values returns the eigenvalues of the symmetric n×n v in ascending order
// (estimates), or false.
func (s *splitter) values(v []float64) ([]float64, bool) {
	sc, ok := s.scaleInto(v)
	if !ok {
		return nil, false
	}
	out := make([]float64, s.n)
	if sc == 0 {
		return out, true
	}
	pairs, _, ok := s.tridiagonal(nil)
	if !ok {
		return nil, false
	}
	for i, p := range pairs {
		out[i] = p.val * sc
	}
	sort.Float64s(out)
	return out, true
}

// negPart sets dst = (−V)₊ for the symmetric n×n v (full, row-major; not
// modified) and returns the number of negative eigenvalues found, or false
// on a failure (dst is then undefined).
func (s *splitter) negPart(v, dst []float64) (int, bool) {
	n := s.n
	sc, ok := s.scaleInto(v)
	if !ok {
		return 0, false
	}
	if sc == 0 {
		clear(dst)
		return 0, true
	}
	pairs, tn, ok := s.tridiagonal(nil)
	if !ok {
		return 0, false
	}
	var neg, pos int
	for _, p := range pairs {
		if p.val < 0 {
			neg++
		} else if p.val > 0 {
			pos++
		}
	}
	wantNeg := neg <= pos
	sel := pairs[:0:0]
	for _, p := range pairs {
		if (wantNeg && p.val < 0) || (!wantNeg && p.val > 0) {
			sel = append(sel, p)
		}
	}
	// Group by block, ascending inside each (the order inverse iteration
	// needs for its clusters).
	sort.Slice(sel, func(i, j int) bool {
		if sel[i].lo != sel[j].lo {
			return sel[i].lo < sel[j].lo
		}
		return sel[i].val < sel[j].val
	})
	r := len(sel)
	if r == 0 {
		if wantNeg {
			clear(dst)
		} else {
			for i, x := range v {
				dst[i] = -x
			}
		}
		return neg, true
	}
	if cap(s.z) < n*r {
		s.z = make([]float64, n*n)
	}
	z := s.z[:n*r]
	clear(z)
	if !s.vectors(sel, tn, z, r) {
		return 0, false
	}
	s.applyQ(z, r)
	// dst = Σ |λ| z zᵀ (scaled back), as BBᵀ with B = z·diag(√|λ|).
	for j, p := range sel {
		f := math.Sqrt(math.Abs(p.val) * sc)
		for i := 0; i < n; i++ {
			z[i*r+j] *= f
		}
	}
	clear(dst)
	sdp.Gemm(false, true, n, n, r, 1, z, r, z, r, dst, n)
	for i := 0; i < n; i++ { // exactly symmetric
		for j := 0; j < i; j++ {
			dst[i*n+j] = dst[j*n+i]
		}
	}
	if !wantNeg { // V₋ = V₊ − V
		for i, x := range v {
			dst[i] -= x
		}
	}
	for _, x := range dst {
		if math.IsNaN(x) || math.IsInf(x, 0) {
			return 0, false
		}
	}
	return neg, true
}

// vectors computes by inverse iteration the unit eigenvectors of T (in
// s.d, s.e, split) for the eigenvalues sel (grouped by block, ascending in
// each), into the columns of the n×r row-major z (zero outside the
// vector's block). tn bounds ‖T‖. It follows LAPACK's dstein (with the
// smaller clusters of the type's doc): the shift
// is nudged up by 10ε‖T‖ when it would repeat the previous one; each
// solve starts from the previous iterate scaled to a small norm;
// reorthogonalisation against the earlier vectors of the cluster; the
// iteration stops two solves after the iterate's largest entry reaches
// √(0.1/size), at most five solves.
func (s *splitter) vectors(sel []eigpair, tn float64, z []float64, r int) bool {
	const eps = 0x1p-52
	pertol := 10 * eps * tn
	ortol := 1e-5 * tn
	for j0 := 0; j0 < len(sel); {
		lo, hi := sel[j0].lo, sel[j0].hi
		j1 := j0
		for j1 < len(sel) && sel[j1].lo == lo {
			j1++
		}
		bs := hi - lo
		if bs == 1 {
			z[lo*r+j0] = 1
			j0 = j1
			continue
		}
		d, e := s.d[lo:hi], s.e[lo:hi-1]
		var onenrm float64
		for i := 0; i < bs; i++ {
			t := math.Abs(d[i])
			if i > 0 {
				t += math.Abs(e[i-1])
			}
			if i < bs-1 {
				t += math.Abs(e[i])
			}
			onenrm = math.Max(onenrm, t)
		}
		dtpcrt := math.Sqrt(0.1 / float64(bs))
		x := s.x[:bs]
		gp := j0 // first vector of the current cluster
		xjm := math.Inf(-1)
		for j := j0; j < j1; j++ {
			xj := sel[j].val
			if j > j0 {
				if xj-xjm < pertol {
					xj = xjm + pertol
				}
				if xj-xjm > ortol {
					gp = j
				}
			}
			xjm = xj
			s.factor(d, e, xj, eps*onenrm)
			s.seed = s.seed*6364136223846793005 + 1442695040888963407
			st := s.seed
			for i := range x {
				st = st*6364136223846793005 + 1442695040888963407
				x[i] = float64(int64(st>>11)-(1<<52)) / (1 << 52) // uniform in [−1, 1)
			}
			nrmchk := 0
			for its := 0; its < 5; its++ {
				jmax := 0
				for i := range x {
					if math.Abs(x[i]) > math.Abs(x[jmax]) {
						jmax = i
					}
				}
				if x[jmax] == 0 {
					return false
				}
				scl := float64(bs) * onenrm * math.Max(eps, math.Abs(s.u0[bs-1])) / math.Abs(x[jmax])
				for i := range x {
					x[i] *= scl
				}
				s.solve(x)
				for q := gp; q < j; q++ {
					var dot float64
					for i := range x {
						dot += x[i] * z[(lo+i)*r+q]
					}
					for i := range x {
						x[i] -= dot * z[(lo+i)*r+q]
					}
				}
				var nrm float64
				for _, v := range x {
					if math.IsNaN(v) || math.IsInf(v, 0) {
						return false
					}
					nrm = math.Max(nrm, math.Abs(v))
				}
				if nrm < dtpcrt {
					continue
				}
				nrmchk++
				if nrmchk >= 3 {
					break
				}
			}
			// As dstein, a vector that did not converge is still used.
			var nrm float64
			for _, v := range x {
				nrm += v * v
			}
			nrm = math.Sqrt(nrm)
			if !(nrm > 0) || math.IsInf(nrm, 0) {
				return false
			}
			for i, v := range x {
				z[(lo+i)*r+j] = v / nrm
			}
		}
		j0 = j1
	}
	return true
}

// factor computes the LU factorisation with partial pivoting of T − λI
// for the unreduced tridiagonal block (d, e), by the scheme of LAPACK's
// dgttrf (rows i and i+1 exchanged when the subdiagonal entry is the
// larger): U's diagonal in u0, its two superdiagonals in u1 and u2, the
// multipliers in lm and the exchanges in piv. Pivots smaller than tiny in
// magnitude are replaced by ±tiny (dstein's perturbation, which keeps the
// solves finite: inverse iteration wants a nearly singular system).
func (s *splitter) factor(d, e []float64, lambda, tiny float64) {
	bs := len(d)
	u0, u1, u2, lm := s.u0[:bs], s.u1[:bs], s.u2[:bs], s.lm[:bs]
	for i := 0; i < bs; i++ {
		u0[i] = d[i] - lambda
		u2[i] = 0
		u1[i] = 0
		if i < bs-1 {
			u1[i] = e[i]
		}
	}
	for i := 0; i < bs-1; i++ {
		sub := e[i]
		if math.Abs(u0[i]) >= math.Abs(sub) {
			s.piv[i] = false
			if u0[i] == 0 {
				u0[i] = tiny
			}
			f := sub / u0[i]
			lm[i] = f
			u0[i+1] -= f * u1[i]
		} else {
			s.piv[i] = true
			f := u0[i] / sub
			lm[i] = f
			u0[i] = sub
			tmp := u1[i]
			u1[i] = u0[i+1]
			u0[i+1] = tmp - f*u0[i+1]
			if i < bs-2 {
				u2[i] = u1[i+1]
				u1[i+1] = -f * u1[i+1]
			}
		}
	}
	for i := 0; i < bs; i++ {
		if math.Abs(u0[i]) < tiny {
			u0[i] = math.Copysign(tiny, u0[i])
		}
	}
}

// solve overwrites b with (T − λI)⁻¹b from the factors of factor (the
// forward and back substitutions of LAPACK's dgtts2).
func (s *splitter) solve(b []float64) {
	bs := len(b)
	u0, u1, u2, lm := s.u0[:bs], s.u1[:bs], s.u2[:bs], s.lm[:bs]
	for i := 0; i < bs-1; i++ {
		if !s.piv[i] {
			b[i+1] -= lm[i] * b[i]
		} else {
			tmp := b[i]
			b[i] = b[i+1]
			b[i+1] = tmp - lm[i]*b[i]
		}
	}
	b[bs-1] /= u0[bs-1]
	if bs > 1 {
		b[bs-2] = (b[bs-2] - u1[bs-2]*b[bs-1]) / u0[bs-2]
	}
	for i := bs - 3; i >= 0; i-- {
		b[i] = (b[i] - u1[i]*b[i+1] - u2[i]*b[i+2]) / u0[i]
	}
}

// tridiagBlock is the panel width of reduce.
const tridiagBlock = 32

// reduce reduces the symmetric matrix in s.a (full storage on entry) to
// tridiagonal form T = QᵀAQ: diagonal s.d, off-diagonal s.e,
// Q = diag(1, H₀H₁⋯H_{n−2}) with H_c = I − τ_c u_c u_cᵀ, u_c = (1, v_c)
// stored in row c from column c+1 on (the unit in the position of the
// superdiagonal, which reduce leaves holding 1), τ_c in s.tau.
//
// Algorithm: LAPACK's blocked dsytrd with its panel dlatrd (G. H. Golub,
// C. F. Van Loan, "Matrix Computations", 4th ed., 2013, §8.3.1; the block
// form is Dongarra, Hammarling, Sorensen, "Block reduction of matrices to
// condensed forms for eigenvalue computations", J. Comput. Appl. Math. 27,
// 1989), transposed to rows: a panel of tridiagBlock rows is reduced with
// the trailing matrix left as it is, each row's reflector correcting for
// the panel's earlier ones through W (A's symmetric product with the
// reflector, minus the panel's corrections); then the trailing matrix's
// lower triangle is updated at once, A₂₂ −= VᵀW + WᵀV (matrix products by
// internal/sdp's Gemm, in row blocks). The trailing matrix is kept in its
// lower triangle only; each panel first copies its columns into its rows,
// so that its row updates and reflectors read contiguous memory.
func (s *splitter) reduce() {
	n := s.n
	a, d, e, tau := s.a, s.d, s.e, s.tau
	var impl gonum.Implementation
	for i0 := 0; i0 < n; i0 += tridiagBlock {
		nb := min(tridiagBlock, n-i0)
		if i0 > 0 { // the panel's rows from the lower triangle
			for c := i0; c < i0+nb; c++ {
				for q := c + 1; q < n; q++ {
					a[c*n+q] = a[q*n+c]
				}
			}
		}
		wp := s.wp[:nb*n] // row i: W's column for panel row i0+i
		for i := 0; i < nb; i++ {
			c := i0 + i
			row := a[c*n : (c+1)*n]
			// Row c of A updated by the panel's earlier reflectors:
			// A[c, c:] −= Σ_j (v_j[c]·w_j[c:] + w_j[c]·v_j[c:]).
			for j := 0; j < i; j++ {
				vj, wj := a[(i0+j)*n:(i0+j+1)*n], wp[j*n:(j+1)*n]
				f, g := vj[c], wj[c]
				for q := c; q < n; q++ {
					row[q] -= f*wj[q] + g*vj[q]
				}
			}
			d[c] = row[c]
			if c == n-1 {
				break
			}
			// The reflector of A[c, c+1:].
			beta, t := impl.Dlarfg(n-c-1, row[c+1], row[min(c+2, n-1):], 1)
			e[c], tau[c] = beta, t
			row[c+1] = 1
			u := row[c+1:]
			w := wp[i*n+c+1 : (i+1)*n]
			// w = A₂₂u with A₂₂ = A[c+1:, c+1:] (not yet updated by the
			// panel), then the panel's corrections.
			s.symvLower(c+1, u, w)
			for j := 0; j < i; j++ {
				vj, wj := a[(i0+j)*n+c+1:(i0+j+1)*n], wp[j*n+c+1:(j+1)*n]
				var p, q float64
				for k, x := range u {
					p += wj[k] * x
					q += vj[k] * x
				}
				for k := range w {
					w[k] -= vj[k]*p + wj[k]*q
				}
			}
			var wu float64
			for k := range w {
				w[k] *= t
				wu += w[k] * u[k]
			}
			alpha := -0.5 * t * wu
			for k := range w {
				w[k] += alpha * u[k]
			}
		}
		if i0+nb >= n {
			break
		}
		// The lower triangle of A₂₂ −= VᵀW + WᵀV, in row blocks (each
		// also writes a few entries above the diagonal, never read).
		lo := i0 + nb
		k := n - lo
		const rb = 64
		for r0 := 0; r0 < k; r0 += rb {
			r1 := min(r0+rb, k)
			dst := a[(lo+r0)*n+lo:]
			sdp.Gemm(true, false, r1-r0, r1, nb, -1, a[i0*n+lo+r0:], n, wp[lo:], n, dst, n)
			sdp.Gemm(true, false, r1-r0, r1, nb, -1, wp[lo+r0:], n, a[i0*n+lo:], n, dst, n)
		}
	}
}

// symvLower sets w = A[c:, c:]·u from the lower triangle of the n×n s.a
// (row r contributes a dot product to w_r and an axpy to w before r: one
// read of each entry). The rows are split in two parts of about equal
// work, each with its own accumulator, added at the end; the parts run on
// two goroutines when the block is large, and the operations are the same
// either way.
func (s *splitter) symvLower(c int, u, w []float64) {
	n, a := s.n, s.a
	k := n - c
	if cap(s.acc) < 2*n {
		s.acc = make([]float64, 2*n)
	}
	split := int(float64(k) / math.Sqrt2)
	part := func(lo, hi int, acc []float64) {
		clear(acc)
		for j := lo; j < hi; j++ {
			r := c + j
			row := a[r*n+c : r*n+r]
			acc[j] += blas64.Dot(blas64.Vector{N: j, Inc: 1, Data: row}, blas64.Vector{N: j, Inc: 1, Data: u}) + a[r*n+r]*u[j]
			if j > 0 {
				blas64.Axpy(u[j], blas64.Vector{N: j, Inc: 1, Data: row}, blas64.Vector{N: j, Inc: 1, Data: acc})
			}
		}
	}
	a0, a1 := s.acc[:k], s.acc[n:n+k]
	if k >= 256 && runtime.GOMAXPROCS(0) >= 2 {
		var wg sync.WaitGroup
		wg.Add(1)
		go func() { defer wg.Done(); part(0, split, a0) }()
		part(split, k, a1)
		wg.Wait()
	} else {
		part(0, split, a0)
		part(split, k, a1)
	}
	for j := range w {
		w[j] = a0[j] + a1[j]
	}
}

// applyQ sets z = Qz for the n×r row-major z and the Q of reduce:
// Qz = H₀(H₁(⋯(H_{n−2}z))), applied tridiagBlock reflectors at a time,
// the last block first, each block H_{j0}⋯H_{j1−1} = I − VᵀTV in the
// compact WY form (R. Schreiber, C. Van Loan, "A storage-efficient WY
// representation for products of Householder transformations", SIAM J.
// Sci. Stat. Comput. 10, 1989; T from gonum's Dlarft, forward, rowwise)
// with V the block's reflectors as rows (zero before their unit entry):
// z₂ −= Vᵀ(T(Vz₂)) on the rows z₂ the block acts on, two matrix products.
func (s *splitter) applyQ(z []float64, r int) {
	n := s.n
	if n < 3 {
		if n == 2 && s.tau[0] != 0 { // one reflector of order 1: −1 or 1
			for q := 0; q < r; q++ {
				z[r+q] *= 1 - s.tau[0]
			}
		}
		return
	}
	var impl gonum.Implementation
	if cap(s.wb) < tridiagBlock*r {
		s.wb = make([]float64, tridiagBlock*r)
	}
	for j0 := ((n - 2) / tridiagBlock) * tridiagBlock; j0 >= 0; j0 -= tridiagBlock {
		j1 := min(j0+tridiagBlock, n-1)
		k, m := j1-j0, n-1-j0
		v := s.vb[:k*m]
		for i := 0; i < k; i++ {
			c := j0 + i
			row := v[i*m : (i+1)*m]
			clear(row[:i])
			row[i] = 1
			copy(row[i+1:], s.a[c*n+c+2:(c+1)*n])
		}
		impl.Dlarft(lapack.Forward, lapack.RowWise, m, k, v, m, s.tau[j0:j1], s.tb, k)
		zs, wb := z[(j0+1)*r:], s.wb[:k*r]
		clear(wb)
		sdp.Gemm(false, false, k, r, m, 1, v, m, zs, r, wb, r)
		blas64.Trmm(blas.Left, blas.NoTrans, 1, blas64.Triangular{Uplo: blas.Upper, Diag: blas.NonUnit, N: k, Stride: k, Data: s.tb},
			blas64.General{Rows: k, Cols: r, Stride: r, Data: wb})
		sdp.Gemm(true, false, m, r, k, -1, v, m, wb, r, zs, r)
	}
}
