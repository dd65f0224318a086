package subspace

import "math"

// Batched search operators: G(y_b) or H(x_b) of many points at once.
//
// A local search run from B starts needs, at every step, the factors
// Z_b = [S_t y_b]_t (or [S_tᵀ x_b]_t) of all its points. Built one point at
// a time (SearchGOperator) that is B passes over the stored basis, each a
// matrix-vector product limited by memory bandwidth. Here the B points are
// stacked into a B×n (or B×m) matrix V and the factors come from one
// matrix-matrix product with the basis, through the packed tiles of gemm.go:
//
//	G side: Z_b[t, i] = Σ_j S_t[i, j]·y_b[j], so row b of V·R (R the
//	        n×(m·s) matrix whose column (i, t) is row i of S_t) is Z_bᵀ,
//	        row by row;
//	H side: Z_b[t, j] = Σ_i x_b[i]·S_t[i, j], so row b of V·R (R the
//	        m×(n·s) matrix whose column (j, t) is column j of S_t) is Z_bᵀ.
//
// For a real subspace R is never formed nor copied: the G side runs the
// product the other way round, the basis's rows read where they are
// (realG), the H side packs R's strips as it goes from runs of the stored
// rows (realH), and the results are moved to their places in the points'
// factors. (The pair form and a complex subspace pack their right factor
// once, when it fits; see packedBasis.) Each point's factor is kept
// transposed, p×s, so that applying it runs along rows of length s.
//
// What a point's numbers depend on. Entry (b, c) of such a product is, for
// each slice of the inner dimension in order, the sum of v_bl·p_lc over the
// slice in order of l, then added to the entry (gemm.go, "What an entry of
// C is"): it reads row b of V and column c of the other factor only. So
// the factors of point b, and everything computed from them here, are the
// same bit for bit whatever the other points of the batch are, how many
// there are and where b sits among them. That is what lets a batched search
// promise the same iterates for any batch size. (The tile is the one the
// machine runs, fused or not; a build for another GOARCH or GOAMD64 level
// may round differently, as every product here may.)
//
// For a complex subspace the factors are those of SearchGOperator and
// SearchHOperator (the complex basis, half the data of W”): the G side
// multiplies the stacked real and imaginary parts of the y_b (2B rows) by
// the rows of the blocks [A_t; B_t], the H side the stacked (x_r, x_i) and
// (x_i, −x_r) by the blocks side by side, and the parts are combined as in
// complexops.go.

// OperatorBatch holds the search operators G(y_b) or H(x_b) of a batch of
// points: each A_b = Z_bᵀZ_b, or ‖v_b‖²·I − Z_bᵀZ_b when the complement is
// stored, kept either in factored form (the s×p factor Z_b, stored
// transposed) or formed (its upper triangle, through the pair form, when
// that is cheaper; see Formed). Its
// zero value is ready to be filled by SearchGBatch or SearchHBatch, which
// reuse its storage; one OperatorBatch may serve both sides in turn, and
// keeps what it packs of the basis for each (see packedBasis). It is not
// safe for concurrent use: it keeps work space.
type OperatorBatch struct {
	count, s, p int
	comp        bool
	formed      bool      // z holds the upper triangles of the matrices, not factors
	shift       []float64 // ‖y_b‖² (or ‖x_b‖²) of each point
	z           []float64 // count blocks of s×p (or of p(p+1)/2), block b at b·len
	v           []float64 // the stacked points (rows), or their pair coefficients
	raw         []float64 // a complex subspace's product before combining
	tmp         []float64 // the one-point path's sums in column order
	c           []float64 // Apply's coefficients (length s)
	buf         packBuf
	basis       [2]packedBasis // the right factor packed for each side, when it fits
	pair        pairForm       // the pair form, when in use
	free        *Subspace      // the operators are held free of their factors (see freeSide)
	gSide       bool           // … and are G(y_b)
	k           int            // the length of a point, when free
}

// The sides a batch's product packs the basis for.
const (
	sideG = iota
	sideH
)

// packedBasis is the right factor of one side's products (the stored
// basis, or the pair form) packed once: the strips the product's packing
// function writes, for every column block and inner slice, in the order
// the product reads them. Without it every product would pack (copy, or
// for the G side gather) the whole basis again, which costs about as much
// as its multiply-adds when the batch has a few dozen points. The strips
// are the same numbers in the same places whether packed once or each
// time, so the cache changes no result. It is kept when it takes at most a
// sixteenth of the subspace's memory limit.
type packedBasis struct {
	w    *Subspace
	pair bool // packed from the pair form rather than the basis
	nr   int
	data []float64 // the strips, once packed (nil before)
	uses int       // the products made for this side so far
	full bool      // data holds every strip
}

// pairForm is h as a bilinear form in the pair products of x and of y
// (derived here). With T(i,i′; j,j′) = Σ_t S_t[i,j]·S_t[i′,j′],
// xᵀG(y)x = Σ T(i,i′; j,j′) x_i x_i′ y_j y_j′ = yᵀH(x)y. Summing each
// orbit of the index swaps i↔i′, j↔j′ once: for i ≤ i′, j ≤ j′ let
// P(i,i′; j,j′) = T(i,i′; j,j′) + T(i,i′; j′,j) (T(i′,i; j,j′) = T(i,i′; j′,j)
// by the t-sum's symmetry), and c(v)_ab = v_a·v_b for a < b, v_a²/2 for
// a = b. Then G(y)_ii′ = Σ_{j≤j′} c(y)_jj′·P(i,i′; j,j′) and
// H(x)_jj′ = Σ_{i≤i′} c(x)_ii′·P(i,i′; j,j′) (checked term by term: each
// (j, j′) with j ≠ j′ appears in G once through P's two terms, each j = j′
// twice, halved by c; likewise i, i′ in H). So with P the M×N matrix
// (M = m(m+1)/2, N = n(n+1)/2) the upper triangles of all the G(y_b) are
// one product C_y·Pᵀ and of all the H(x_b) one product C_x·P, M·N
// multiply-adds a point, no pass over the basis. Building P costs
// s·M·n² once. It pays when 2·M·N < s·(m+n)², what the factors and both
// formed matrices cost a point and iteration (a real subspace only; a
// complex one keeps its factors).
type pairForm struct {
	w    *Subspace
	M, N int
	p    []float64 // M×N; rows (i, i′) and columns (j, j′) in the order of pairCoefficients
}

// Len returns the number of points of the batch.
func (ob *OperatorBatch) Len() int { return ob.count }

// Order returns p, the order of each operator (m for G, n for H).
func (ob *OperatorBatch) Order() int { return ob.p }

// Shift returns ‖y_b‖² (or ‖x_b‖²) of point b: the identity's coefficient
// of its operator when the complement is stored.
func (ob *OperatorBatch) Shift(b int) float64 { return ob.shift[b] }

// BatchBytes returns the bytes an OperatorBatch of count points of w holds
// (its factors or formed matrices and work space, the larger side), so
// that callers can size their batches under w.MemoryLimit(). Besides, a
// batch of the pair form or of a complex subspace keeps each side's right
// factor packed when that takes at most a sixteenth of the limit (see
// packedBasis); a real subspace's factors keep no copy of the basis.
func (w *Subspace) BatchBytes(count int) int64 {
	k := int64(count)
	if w.cx != nil {
		// 2k_c factor rows of order 2·max(m, n), and the 2·count products
		// of k_c·max(2m, n) entries before they are combined.
		kc, p := int64(w.ComplexDim()), int64(2*max(w.cx.m, w.cx.n))
		return 8 * (k*2*kc*p + 2*k*kc*p + 2*k*p + 2*kc)
	}
	s, p := int64(w.s), int64(max(w.m, w.n))
	if w.freeSide(w.n, w.m) || w.freeSide(w.m, w.n) {
		// One side free (its points only), the other with factors of
		// order at most freeMaxSide·… : bounded by the formed side.
		p = int64(min(w.m, w.n))
	}
	if M, N, ok := w.pairSizes(); ok {
		return 8 * (3*int64(M)*int64(N) + k*int64(max(M, N)) + k*p)
	}
	// The factors, the stacked points, and realG's and realH's work:
	// realG the points packed (np ≤ count+23 columns) and a tileM×np
	// block; realH a result block and a packed strip block, each at most
	// hBlockEntries or one matrix wide (n+23 columns).
	m, n, np := int64(w.m), int64(w.n), k+23
	g := np*max(m, n) + tileM*np
	h := 2*hBlockEntries + (n+23)*(min(k, tileM)+min(tileK, m))
	return 8 * (k*s*p + k*p + s + max(g, h))
}

// PointBytes returns the bytes of one point's operator in an
// OperatorBatch of w (its factor, or its formed triangle in the pair form;
// the larger side's): what a batch's memory grows by per point, apart
// from vectors of the points' lengths.
func (w *Subspace) PointBytes() int64 {
	if w.cx != nil {
		kc, p := int64(w.ComplexDim()), int64(2*max(w.cx.m, w.cx.n))
		return 8 * 2 * kc * p
	}
	if M, N, ok := w.pairSizes(); ok {
		return 8 * int64(max(M, N))
	}
	p := int64(max(w.m, w.n))
	if w.freeSide(w.n, w.m) || w.freeSide(w.m, w.n) {
		p = int64(min(w.m, w.n))
	}
	return 8 * int64(w.s) * p
}

// pairMaxSide is the largest side for which the pair form is used: it
// gives the operators as formed p×p matrices, whose products cost p² each,
// which only pays for small sides (at 2×1000 with a few stored vectors the
// formed 1000×1000 matrices made ALS 30× slower than the factors).
const pairMaxSide = 32

// pairSizes returns M = m(m+1)/2 and N = n(n+1)/2 and whether the batches
// of w use the pair form (see pairForm): real, both sides at most
// pairMaxSide, cheaper, and the form and its two packed copies within a
// sixteenth of the memory limit.
func (w *Subspace) pairSizes() (M, N int, ok bool) {
	m, n := int64(w.m), int64(w.n)
	M64, N64 := m*(m+1)/2, n*(n+1)/2
	if w.cx != nil || w.s == 0 || max(m, n) > pairMaxSide || 2*M64*N64 >= int64(w.s)*(m+n)*(m+n) || 3*8*M64*N64 > w.limit/16 {
		return 0, 0, false
	}
	return int(M64), int(N64), true
}

// Formed reports whether the operators are held as matrices (the pair
// form was cheaper to use than the factors): then Matrix is a copy and
// Apply costs p² operations.
func (ob *OperatorBatch) Formed() bool { return ob.formed }

// SearchGBatch sets ob to the search operators G(y_b) (order m) of the
// points ys[b] (each of length n), as SearchGOperator would build each,
// with one product over the stored basis for all of them. Point b's
// operator depends on ys[b] alone, bit for bit (see the notes above).
// It panics if some ys[b] has the wrong length.
func (w *Subspace) SearchGBatch(ob *OperatorBatch, ys [][]float64) {
	for _, y := range ys {
		w.checkY(y, "y")
	}
	if w.cx != nil {
		w.complexGBatch(ob, ys)
		return
	}
	if M, N, ok := w.pairSizes(); ok {
		ob.pairBatch(w, sideG, ys, w.m, M, N)
		return
	}
	ob.realSide(w, ys, true, stored{src: w.q, byRows: true, perm: w.m, s: w.s})
}

// SearchHBatch sets ob to the search operators H(x_b) (order n) of the
// points xs[b] (each of length m), as SearchHOperator would build each,
// with one product over the stored basis for all of them. Point b's
// operator depends on xs[b] alone, bit for bit.
// It panics if some xs[b] has the wrong length.
func (w *Subspace) SearchHBatch(ob *OperatorBatch, xs [][]float64) {
	for _, x := range xs {
		w.checkX(x, "x")
	}
	if w.cx != nil {
		w.complexHBatch(ob, xs)
		return
	}
	if M, N, ok := w.pairSizes(); ok {
		ob.pairBatch(w, sideH, xs, w.n, N, M)
		return
	}
	ob.realSide(w, xs, false, stored{src: w.q, C: w.n, perm: w.n, s: w.s})
}

// realSide sets ob to the operators G(y_b) (gSide; order m, points of
// length n) or H(x_b) of the points pts of a real subspace, whose factors'
// stored layout is st: free of their factors when freeSide says so, by
// the one-point path (productFew) for fewer than four points, else by
// tiles (realG or realH).
func (ob *OperatorBatch) realSide(w *Subspace, pts [][]float64, gSide bool, st stored) {
	p, K, tiles := w.n, w.m, ob.realH
	if gSide {
		p, K, tiles = w.m, w.n, ob.realG
	}
	B := len(pts)
	if w.freeSide(p, K) {
		// Free of their factors: the points alone, each Apply a pass
		// over the basis (ApplyG or ApplyH).
		ob.count, ob.s, ob.p, ob.comp, ob.formed = B, w.s, p, w.comp, false
		ob.shift = grow(&ob.shift, B)
		ob.stack(pts, K)
		ob.free, ob.gSide, ob.k = w, gSide, K
		return
	}
	ob.reset(B, w.s, p, w.comp)
	ob.stack(pts, K)
	switch {
	case w.s == 0 || B == 0:
	case B < 4:
		ob.tmp = grow(&ob.tmp, w.s*p)
		productFew(B, w.s*p, K, ob.v, st, ob.tmp, ob.z, w.s*p)
	default:
		tiles(w, B)
	}
}

// complexGBatch is SearchGBatch for a complex subspace: the products
// S·y_r and S·y_i of SearchGOperator for every point, as one product of
// the 2B stacked parts with the rows of the blocks [A_t; B_t], combined
// into the 2k×2m factors as there.
func (w *Subspace) complexGBatch(ob *OperatorBatch, ys [][]float64) {
	o := w.cx.ops(w)
	m, n, k, B := o.m, o.n, o.k, len(ys)
	ob.reset(B, 2*k, 2*m, false)
	ob.v = grow(&ob.v, 2*B*n)
	for b, y := range ys {
		copy(ob.v[b*n:(b+1)*n], y[:n])
		copy(ob.v[(B+b)*n:(B+b+1)*n], y[n:])
		ob.shift[b] = dot(y, y)
	}
	if k == 0 || B == 0 {
		return
	}
	L := k * 2 * m
	ob.raw = grow(&ob.raw, 2*B*L)
	st := operand{o.v, n, true}
	ob.product(w, sideG, false, 2*B, L, n, ob.raw, L, func(dst []float64, j0, nt, p0, kc, nr int) {
		packB(dst, st, j0, nt, p0, kc, nr)
	}, stored{src: o.v, byRows: true})
	const r2 = 0x1.6a09e667f3bcdp-01 // 1/√2
	for b := 0; b < B; b++ {
		pr, pi := ob.raw[b*L:(b+1)*L], ob.raw[(B+b)*L:(B+b+1)*L]
		// Factor rows g = (c_r, −c_i)/√2 (row 2t) and g′ = (c_i, c_r)/√2
		// (row 2t+1), stored transposed: entry (row, i) at zt[i·2k + row].
		zt := ob.z[b*2*k*2*m : (b+1)*2*k*2*m]
		S := 2 * k
		for t := 0; t < k; t++ {
			ay, by := pr[t*2*m:t*2*m+m], pr[t*2*m+m:(t+1)*2*m] // A y_r, B y_r
			ai, bi := pi[t*2*m:t*2*m+m], pi[t*2*m+m:(t+1)*2*m] // A y_i, B y_i
			for i := 0; i < m; i++ {
				cr, ci := ay[i]+bi[i], ai[i]-by[i]
				zt[i*S+2*t], zt[(m+i)*S+2*t] = r2*cr, -r2*ci
				zt[i*S+2*t+1], zt[(m+i)*S+2*t+1] = r2*ci, r2*cr
			}
		}
	}
}

// complexHBatch is SearchHBatch for a complex subspace: [A_t; B_t]ᵀu for
// u = (x_r, x_i) and (x_i, −x_r) of every point (xPair), as one product of
// the 2B stacked u with the blocks side by side, combined as in
// SearchHOperator.
func (w *Subspace) complexHBatch(ob *OperatorBatch, xs [][]float64) {
	o := w.cx.ops(w)
	m, n, k, B := o.m, o.n, o.k, len(xs)
	ob.reset(B, 2*k, 2*n, false)
	ob.v = grow(&ob.v, 2*B*2*m)
	for b, x := range xs {
		u1, u2 := ob.v[b*2*m:(b+1)*2*m], ob.v[(B+b)*2*m:(B+b+1)*2*m]
		for i := 0; i < m; i++ {
			u1[i], u1[m+i] = x[i], x[m+i]
			u2[i], u2[m+i] = x[m+i], -x[i]
		}
		ob.shift[b] = dot(x, x)
	}
	if k == 0 || B == 0 {
		return
	}
	L := k * n
	ob.raw = grow(&ob.raw, 2*B*L)
	v := o.v
	ob.product(w, sideH, false, 2*B, L, 2*m, ob.raw, L, func(dst []float64, j0, nt, p0, kc, nr int) {
		packSideBySide(dst, v, 2*m, n, j0, nt, p0, kc, nr)
	}, stored{src: v, C: n})
	const r2 = 0x1.6a09e667f3bcdp-01
	for b := 0; b < B; b++ {
		er, ei := ob.raw[b*L:(b+1)*L], ob.raw[(B+b)*L:(B+b+1)*L]
		zt := ob.z[b*2*k*2*n : (b+1)*2*k*2*n] // transposed, as in complexGBatch
		S := 2 * k
		for t := 0; t < k; t++ {
			r, i := er[t*n:(t+1)*n], ei[t*n:(t+1)*n]
			for j := 0; j < n; j++ {
				zt[j*S+2*t], zt[(n+j)*S+2*t] = r2*r[j], -r2*i[j]
				zt[j*S+2*t+1], zt[(n+j)*S+2*t+1] = r2*i[j], r2*r[j]
			}
		}
	}
}

// reset sizes ob for count operators of s factor rows and order p.
func (ob *OperatorBatch) reset(count, s, p int, comp bool) {
	ob.count, ob.s, ob.p, ob.comp, ob.formed, ob.free = count, s, p, comp, false, nil
	ob.z = grow(&ob.z, count*s*p)
	ob.shift = grow(&ob.shift, count)
	ob.c = grow(&ob.c, s)
}

// stack copies the points into the rows of ob.v (count×length) and sets
// their shifts.
func (ob *OperatorBatch) stack(pts [][]float64, length int) {
	ob.v = grow(&ob.v, len(pts)*length)
	for b, u := range pts {
		copy(ob.v[b*length:(b+1)*length], u)
		ob.shift[b] = dot(u, u)
	}
}

// product sets the rows×N matrix c (row stride ldc) to V·P, where V is
// ob.v (rows×K, row-major) and P is the K×N matrix whose strips pack
// writes (as packB: columns [j0, j0+nt), rows [p0, p0+kc), in strips of nr
// columns). It runs on the calling goroutine only, in column blocks of
// tileN and inner slices of tileK (the order mulCols uses, so each entry
// is the sum that gemm.go describes).
//
// Fewer than four rows (a tile's height) take the one-point path
// (productFew: the same sums in the same order, read where they are
// stored) until the side has made fewUses products; then, as for more
// rows, the tiles run on the basis packed once (when it fits).
func (ob *OperatorBatch) product(w *Subspace, side int, pair bool, rows, N, K int, c []float64, ldc int, pack packFunc, p stored) {
	pb := &ob.basis[side]
	if pb.w != w || pb.pair != pair || pb.nr != stripN() {
		*pb = packedBasis{w: w, pair: pair, nr: stripN(), data: pb.data[:0]}
	}
	pb.uses++
	var packed []float64
	if rows >= 4 || pb.uses > fewUses {
		packed = ob.packed(w, side, pair, N, K, pack)
	}
	if rows < 4 && packed == nil {
		ob.tmp = grow(&ob.tmp, N)
		productFew(rows, N, K, ob.v, p, ob.tmp, c, ldc)
		return
	}
	a := operand{ob.v, K, false}
	for i := 0; i < rows; i++ {
		clear(c[i*ldc : i*ldc+N])
	}
	ob.mulInto(rows, N, K, a, pack, packed, c, ldc)
}

// realG sets the factors of ob (B ≥ 4 points stacked in ob.v, B×n) for
// the G side of a real subspace without copying the basis. For each row
// index i, the s×n matrix Q_i whose row t is row i of S_t (read where it
// is stored: rows m·n apart) gives D_i = Q_i·Vᵀ with D_i[t, b] =
// Σ_j S_t[i, j]·y_b[j] = entry (i, t) of Z_bᵀ. The tiles read Q_i's rows
// in place (the direct tiles; the portable tile packs four rows at a
// time) and Vᵀ packed (small: the points), in row blocks of tileM and
// inner slices of tileK, into a tileM×np block whose columns are then
// runs of consecutive entries of the points' factors. Each entry of D_i
// is the sum gemm.go describes, with the factors of each product in the
// other order: the same bits as V·Q_iᵀ (a·b = b·a, and a fused
// multiply-add is the same for either order of its factors), so the same
// as the one-point path's and any batch's.
func (ob *OperatorBatch) realG(w *Subspace, B int) {
	q, s, m, n := w.q, w.s, w.m, w.n
	nr := stripN()
	np := (B + nr - 1) / nr * nr
	kc0 := min(tileK, n)
	ob.ensure((min(s, tileM)+3)/4*4*kc0, np*kc0)
	ob.tmp = grow(&ob.tmp, min(s, tileM)*np)
	ob.raw = grow(&ob.raw, n*np)
	buf, d, vt := &ob.buf, ob.tmp, ob.raw
	for p0 := 0; p0 < n; p0 += tileK {
		kc := min(tileK, n-p0)
		packB(vt[p0*np:(p0+kc)*np], operand{ob.v, n, true}, 0, B, p0, kc, nr)
	}
	for i := 0; i < m; i++ {
		a := operand{q[i*n:], m * n, false}
		direct := readsInPlace(a, false)
		for t0 := 0; t0 < s; t0 += tileM {
			mt := min(tileM, s-t0)
			clear(d[:mt*np])
			for p0 := 0; p0 < n; p0 += tileK {
				kc := min(tileK, n-p0)
				if !direct {
					packA(buf.pa[:(mt+3)/4*4*kc], a, t0, mt, p0, kc, false)
				}
				panel := packBuf{pa: buf.pa, pb: vt[p0*np : (p0+kc)*np], scratch: buf.scratch}
				block(mt, np, kc, a, t0, p0, direct, false, &panel, d, np, true)
			}
			transposeInto(ob.z[i*s+t0:], s*m, d, np, mt, B)
		}
	}
}

// realH sets the factors of ob (B ≥ 4 points stacked in ob.v, B×m) for
// the H side of a real subspace without keeping a copy of the basis:
// E = V·[S_0 | S_1 | … ] (the stored matrices side by side, m×(s·n)) has
// E[b, t·n + j] = Σ_i x_b[i]·S_t[i, j] = entry (j, t) of Z_bᵀ. Its right
// factor's strips are packed as the product runs (runs of consecutive
// entries of the stored rows: a copy that streams through the cache), in
// column blocks of T whole matrices (T ≤ 8, so that a block's results
// are runs of T consecutive entries of a factor), inner slices of tileK
// and row blocks of tileM. Each entry is the sum gemm.go describes, the
// same as the one-point path's.
func (ob *OperatorBatch) realH(w *Subspace, B int) {
	q, s, m, n := w.q, w.s, w.m, w.n
	nr := stripN()
	kc0, mt0 := min(tileK, m), min(B, tileM)
	T := max(1, min(8, s, hBlockEntries/(n*kc0), hBlockEntries/(n*mt0)))
	width := (T*n + nr - 1) / nr * nr
	ob.ensure((mt0+3)/4*4*kc0, width*kc0)
	ob.tmp = grow(&ob.tmp, mt0*width)
	buf, e := &ob.buf, ob.tmp
	a := operand{ob.v, m, false}
	direct := readsInPlace(a, false)
	for i0 := 0; i0 < B; i0 += tileM {
		mt := min(tileM, B-i0)
		for t0 := 0; t0 < s; t0 += T {
			tb := min(T, s-t0)
			nt := tb * n
			np := (nt + nr - 1) / nr * nr
			clear(e[:mt*np])
			for p0 := 0; p0 < m; p0 += tileK {
				kc := min(tileK, m-p0)
				packStrips(buf.pb[:np*kc], q, m, n, t0*n, nt, p0, kc, nr)
				if !direct {
					packA(buf.pa[:(mt+3)/4*4*kc], a, i0, mt, p0, kc, false)
				}
				block(mt, np, kc, a, i0, p0, direct, false, buf, e, np, true)
			}
			for r := 0; r < mt; r++ {
				// Row r holds tb×n (matrix t0+tt, column j); its factor
				// wants entry (j, t0+tt) at j·s + t0 + tt.
				transposeInto(ob.z[(i0+r)*s*n+t0:], s, e[r*np:r*np+nt], n, tb, n)
			}
		}
	}
}

// packStrips is packSideBySide for realH: a strip within one matrix (the
// common case) is copied a whole row of the strip at a time.
func packStrips(dst, q []float64, R, C, j0, nt, p0, kc, nr int) {
	for st := 0; st < nt; st += nr {
		c := j0 + st
		t, j := c/C, c%C
		if st+nr > nt || j+nr > C || (nr != 12 && nr != 24) {
			packSideBySide(dst[st*kc:(st+nr)*kc], q, R, C, c, min(nr, nt-st), p0, kc, nr)
			continue
		}
		strip := dst[st*kc : (st+nr)*kc]
		at := t*R*C + p0*C + j
		if nr == 24 {
			for l := 0; l < kc; l++ {
				*(*[24]float64)(strip[24*l:]) = *(*[24]float64)(q[at+l*C:])
			}
			continue
		}
		for l := 0; l < kc; l++ {
			*(*[12]float64)(strip[12*l:]) = *(*[12]float64)(q[at+l*C:])
		}
	}
}

// transposeInto writes the rows×cols block src (row stride lds) transposed
// into dst: src[r·lds + c] goes to dst[c·ldd + r]. It moves eight rows at
// a time, so that each write fills a run of eight consecutive entries
// (whole cache lines, where a row at a time would write cols scattered
// entries, often in the same cache set when ldd is a power of two).
func transposeInto(dst []float64, ldd int, src []float64, lds, rows, cols int) {
	r := 0
	for ; r+8 <= rows; r += 8 {
		s0, s1 := src[r*lds:r*lds+cols], src[(r+1)*lds:(r+1)*lds+cols]
		s2, s3 := src[(r+2)*lds:(r+2)*lds+cols], src[(r+3)*lds:(r+3)*lds+cols]
		s4, s5 := src[(r+4)*lds:(r+4)*lds+cols], src[(r+5)*lds:(r+5)*lds+cols]
		s6, s7 := src[(r+6)*lds:(r+6)*lds+cols], src[(r+7)*lds:(r+7)*lds+cols]
		_, _, _, _, _, _, _ = s1[cols-1], s2[cols-1], s3[cols-1], s4[cols-1], s5[cols-1], s6[cols-1], s7[cols-1]
		_ = dst[(cols-1)*ldd+r+7]
		for c := range s0 {
			d := dst[c*ldd+r : c*ldd+r+8 : c*ldd+r+8]
			d[0], d[1], d[2], d[3] = s0[c], s1[c], s2[c], s3[c]
			d[4], d[5], d[6], d[7] = s4[c], s5[c], s6[c], s7[c]
		}
	}
	for ; r < rows; r++ {
		for c, x := range src[r*lds : r*lds+cols] {
			dst[c*ldd+r] = x
		}
	}
}

// hBlockEntries bounds the packed right factor (width·kc) and the result
// block (rows·width) of realH's column blocks: 512 KiB each, so that they
// stay in the second-level cache.
const hBlockEntries = 1 << 16

// fewUses is how many products of fewer than four rows a side makes by
// the one-point path before it packs its right factor (packedBasis) and
// uses the tiles: packing costs a few such products, the tiles then take
// about half the time of one (measured on this project's machine), so
// short runs (a local search from a good start: a handful of iterations)
// never pack. The choice changes no result, only the speed.
const fewUses = 16

// stored says where a product's right factor P (K×N) is stored, for the
// one-point path, column k in one of two layouts: byRows, column k is the
// k-th run of K consecutive numbers of src (entry (l, k) at src[k·K + l]);
// otherwise src holds blocks of K×C row-major matrices side by side and
// column k is column k mod C of block ⌊k/C⌋ (entry (l, k) at
// src[⌊k/C⌋·K·C + l·C + k mod C]). Column k's entry of the product goes
// to index k of the output, or, when each is the transposed factor of a
// point (perm > 0), to (k mod perm)·s + ⌊k/perm⌋.
type stored struct {
	src     []float64
	byRows  bool
	C       int
	perm, s int
}

// productFew adds V·P to the rows×N matrix c for a few rows of V (rows×K,
// row-major in v), reading P where it is stored: one pass over P, as a
// matrix-vector product. Each entry gets the sum a tile gives it (gemm.go,
// "What an entry of C is"): for each slice of tileK inner indices in
// order, the products v_l·p_lk summed in order of l from zero, fused into
// each addition (math.FMA: the exact product rounded once with the sum, as
// the assembly tiles' VFMADD231PD) or, for the portable tile, rounded and
// then added; then added to the entry. So a point's entries are the same
// bits whichever path computes them. Eight columns are summed side by side
// (neighbours in memory), so that the sums do not wait on each other; the
// sums go to tmp (length N) in column order, then to their places in c.
func productFew(rows, N, K int, v []float64, p stored, tmp, c []float64, ldc int) {
	fused := tileKind != tileGo
	src := p.src
	step := 1
	if !p.byRows {
		step = p.C
	}
	for r := 0; r < rows; r++ {
		vr := v[r*K : (r+1)*K]
		clear(tmp)
		for k0 := 0; k0 < N; k0 += 8 {
			g := min(8, N-k0)
			var base int
			if p.byRows {
				base = k0 * K
			} else {
				base = k0/p.C*K*p.C + k0%p.C
			}
			// Eight columns side by side need eight neighbours: rows of
			// one run, or columns of one block.
			whole := g == 8 && (p.byRows || k0%p.C+8 <= p.C)
			for p0 := 0; p0 < K; p0 += tileK {
				p1 := min(K, p0+tileK)
				if whole && fused {
					var s0, s1, s2, s3, s4, s5, s6, s7 float64
					if p.byRows {
						vs := vr[p0:p1]
						n := len(vs)
						at := base + p0
						r0, r1 := src[at:at+n], src[at+K:at+K+n]
						r2, r3 := src[at+2*K:at+2*K+n], src[at+3*K:at+3*K+n]
						r4, r5 := src[at+4*K:at+4*K+n], src[at+5*K:at+5*K+n]
						r6, r7 := src[at+6*K:at+6*K+n], src[at+7*K:at+7*K+n]
						for l, a := range vs {
							s0 = math.FMA(a, r0[l], s0)
							s1 = math.FMA(a, r1[l], s1)
							s2 = math.FMA(a, r2[l], s2)
							s3 = math.FMA(a, r3[l], s3)
							s4 = math.FMA(a, r4[l], s4)
							s5 = math.FMA(a, r5[l], s5)
							s6 = math.FMA(a, r6[l], s6)
							s7 = math.FMA(a, r7[l], s7)
						}
					} else {
						o := base + p0*step
						for _, a := range vr[p0:p1] {
							e := src[o : o+8 : o+8]
							s0 = math.FMA(a, e[0], s0)
							s1 = math.FMA(a, e[1], s1)
							s2 = math.FMA(a, e[2], s2)
							s3 = math.FMA(a, e[3], s3)
							s4 = math.FMA(a, e[4], s4)
							s5 = math.FMA(a, e[5], s5)
							s6 = math.FMA(a, e[6], s6)
							s7 = math.FMA(a, e[7], s7)
							o += step
						}
					}
					t := tmp[k0 : k0+8 : k0+8]
					t[0], t[1], t[2], t[3] = t[0]+s0, t[1]+s1, t[2]+s2, t[3]+s3
					t[4], t[5], t[6], t[7] = t[4]+s4, t[5]+s5, t[6]+s6, t[7]+s7
					continue
				}
				for k := k0; k < k0+g; k++ {
					o, st := k*K, 1
					if !p.byRows {
						o, st = k/p.C*K*p.C+k%p.C, p.C
					}
					o += p0 * st
					var acc float64
					for _, a := range vr[p0:p1] {
						if fused {
							acc = math.FMA(a, src[o], acc)
						} else {
							acc += float64(a * src[o])
						}
						o += st
					}
					tmp[k] += acc
				}
			}
		}
		out := c[r*ldc : r*ldc+N]
		if p.perm == 0 {
			copy(out, tmp)
			continue
		}
		for k, x := range tmp {
			out[k%p.perm*p.s+k/p.perm] = x
		}
	}
}

// packFunc writes, as packB does, the strips of nr columns of columns
// [j0, j0+nt) and rows [p0, p0+kc) of a product's right factor into dst.
type packFunc func(dst []float64, j0, nt, p0, kc, nr int)

// packedLen returns the length of all the strips of an N-column, K-row
// right factor, in the blocks and slices mulInto cuts it into.
func packedLen(N, K, nr int) int {
	total := 0
	for j0 := 0; j0 < N; j0 += tileN {
		total += (min(tileN, N-j0) + nr - 1) / nr * nr * K
	}
	return total
}

// packed returns the right factor of side packed (see packedBasis),
// packing it now if it is not yet and fits; nil when it does not fit.
func (ob *OperatorBatch) packed(w *Subspace, side int, pair bool, N, K int, pack packFunc) []float64 {
	nr := stripN()
	pb := &ob.basis[side] // product has checked that it is w's, pair's and nr's
	if pb.full {
		return pb.data
	}
	size := packedLen(N, K, nr)
	if int64(size)*8 > w.limit/16 {
		return nil
	}
	if cap(pb.data) < size {
		pb.data = make([]float64, size)
	}
	pb.data, pb.full = pb.data[:size], true
	off := 0
	for j0 := 0; j0 < N; j0 += tileN {
		nt := min(tileN, N-j0)
		np := (nt + nr - 1) / nr * nr
		for p0 := 0; p0 < K; p0 += tileK {
			kc := min(tileK, K-p0)
			pack(pb.data[off:off+np*kc], j0, nt, p0, kc, nr)
			off += np * kc
		}
	}
	return pb.data
}

// mulInto adds op(A)·P to the rows×N matrix c (row stride ldc), op(A)
// rows×K, P given by its packing function (see product) or, when packed
// is not nil, by its strips packed beforehand (packedBasis).
func (ob *OperatorBatch) mulInto(rows, N, K int, a operand, pack packFunc, packed []float64, c []float64, ldc int) {
	nr := stripN()
	kc0 := min(tileK, K)
	ob.ensure((min(rows, tileM)+3)/4*4*kc0, (min(N, tileN)+nr-1)/nr*nr*kc0)
	buf := &ob.buf
	direct := readsInPlace(a, false)
	off := 0
	for j0 := 0; j0 < N; j0 += tileN {
		nt := min(tileN, N-j0)
		np := (nt + nr - 1) / nr * nr
		for p0 := 0; p0 < K; p0 += tileK {
			kc := min(tileK, K-p0)
			pb := buf.pb
			if packed != nil {
				pb = packed[off : off+np*kc]
				off += np * kc
			} else {
				pack(pb[:np*kc], j0, nt, p0, kc, nr)
			}
			panel := packBuf{pa: buf.pa, pb: pb, scratch: buf.scratch}
			for i0 := 0; i0 < rows; i0 += tileM {
				mt := min(tileM, rows-i0)
				if !direct {
					packA(buf.pa[:(mt+3)/4*4*kc], a, i0, mt, p0, kc, false)
				}
				block(mt, nt, kc, a, i0, p0, direct, false, &panel, c[i0*ldc+j0:], ldc, true)
			}
		}
	}
}

// ensure grows the packing buffers to at least pa and pb entries.
func (ob *OperatorBatch) ensure(pa, pb int) {
	pa = max(pa, 4*tileK) // a last strip of A read in place is packed alone
	if len(ob.buf.pa) < pa {
		ob.buf.pa = make([]float64, pa)
	}
	if len(ob.buf.pb) < pb {
		ob.buf.pb = make([]float64, pb)
	}
	if ob.buf.scratch == nil {
		ob.buf.scratch = make([]float64, 4*24)
	}
}

// packSideBySide packs, as packB does, columns [j0, j0+nt) and rows
// [p0, p0+kc) of the R×(count·C) matrix [M_0 | M_1 | …] of the R×C
// row-major matrices stored one after another in q: column c is column
// c mod C of matrix ⌊c/C⌋.
func packSideBySide(dst, q []float64, R, C, j0, nt, p0, kc, nr int) {
	for s := 0; s < nt; s += nr {
		strip := dst[s*kc : (s+nr)*kc]
		cols := min(nr, nt-s)
		if cols < nr {
			clear(strip)
		}
		for l := 0; l < kc; l++ {
			out := strip[nr*l : nr*l+cols]
			col := j0 + s
			for done := 0; done < cols; {
				t, j := col/C, col%C
				run := min(C-j, cols-done)
				at := t*R*C + (p0+l)*C + j
				copy(out[done:done+run], q[at:at+run])
				done += run
				col += run
			}
		}
	}
}

// Apply sets dst = A_b·src for the operator of point b, without forming
// it: 2·s·p operations. It panics on wrong lengths or b out of range.
func (ob *OperatorBatch) Apply(b int, dst, src []float64) {
	p, s := ob.p, ob.s
	if len(dst) != p || len(src) != p {
		panic("subspace: OperatorBatch.Apply needs vectors of length " + itoa(p))
	}
	if b < 0 || b >= ob.count {
		panic("subspace: OperatorBatch.Apply: point out of range")
	}
	if ob.formed {
		ob.applyFormed(b, dst, src)
		return
	}
	if ob.free != nil {
		ob.free.applyOne(ob.gSide, dst, ob.v[b*ob.k:(b+1)*ob.k], src)
		return
	}
	zt := ob.z[b*s*p : (b+1)*s*p] // Z_bᵀ, p×s
	c := ob.c[:s]
	// c = Z_b·src = Σ_i src_i·(row i of Z_bᵀ), then dst_i = (row i)·c.
	clear(c)
	if s > 0 {
		for i, v := range src {
			rowAxpy(v, zt[i*s:(i+1)*s], c)
		}
	}
	for i := range dst {
		var d float64
		if s > 0 {
			d = rowDot(zt[i*s:(i+1)*s], c)
		}
		if ob.comp {
			d = ob.shift[b]*src[i] - d
		}
		dst[i] = d
	}
}

// Matrix writes the p×p matrix A_b of point b into dst (row-major, both
// triangles, the same float in (i, j) and (j, i)). Formed, it is a copy;
// factored, it costs s·p² multiply-adds through the packed tiles, each
// entry Σ_t z_ti·z_tj in order of t (so symmetric: the factors commute).
// It panics if len(dst) < p² or b is out of range.
func (ob *OperatorBatch) Matrix(b int, dst []float64) {
	p := ob.p
	if len(dst) < p*p {
		panic("subspace: OperatorBatch.Matrix needs p² entries")
	}
	if b < 0 || b >= ob.count {
		panic("subspace: OperatorBatch.Matrix: point out of range")
	}
	dst = dst[:p*p]
	if ob.free != nil {
		// Column j is A_b e_j; the upper triangle is mirrored.
		e, col := make([]float64, p), make([]float64, p)
		for j := 0; j < p; j++ {
			e[j] = 1
			ob.Apply(b, col, e)
			e[j] = 0
			for i := 0; i <= j; i++ {
				dst[i*p+j], dst[j*p+i] = col[i], col[i]
			}
		}
		return
	}
	if ob.formed {
		u := ob.z[b*p*(p+1)/2 : (b+1)*p*(p+1)/2]
		for i, at := 0, 0; i < p; i++ {
			for j := i; j < p; j, at = j+1, at+1 {
				dst[i*p+j], dst[j*p+i] = u[at], u[at]
			}
		}
	} else {
		ob.gram(b, dst)
	}
	if ob.comp {
		for i := range dst {
			dst[i] = -dst[i]
		}
		for i := 0; i < p; i++ {
			dst[i*p+i] += ob.shift[b]
		}
	}
}

// gram writes Z_bᵀZ_b into dst (p×p) for a factored batch: A = Z_bᵀ read
// in place, B = (Z_bᵀ)ᵀ packed; entry (i, j) is Σ_t zt_it·zt_jt in order
// of t.
func (ob *OperatorBatch) gram(b int, dst []float64) {
	p, s := ob.p, ob.s
	clear(dst)
	if s > 0 {
		zt := ob.z[b*s*p : (b+1)*s*p]
		z := operand{zt, s, true}
		ob.mulInto(p, p, s, operand{zt, s, false}, func(d []float64, j0, nt, p0, kc, nr int) {
			packB(d, z, j0, nt, p0, kc, nr)
		}, nil, dst, p)
	}
}

// applyFormed sets dst = A_b·src from the upper triangle of a formed
// operator.
func (ob *OperatorBatch) applyFormed(b int, dst, src []float64) {
	p := ob.p
	u := ob.z[b*p*(p+1)/2 : (b+1)*p*(p+1)/2]
	clear(dst)
	for i, at := 0, 0; i < p; i++ {
		row := u[at : at+p-i]
		at += p - i
		si := src[i]
		acc := row[0] * si
		for k, v := range row[1:] {
			j := i + 1 + k
			acc += v * src[j]
			dst[j] += v * si
		}
		dst[i] += acc
	}
	if ob.comp {
		for i := range dst {
			dst[i] = ob.shift[b]*src[i] - dst[i]
		}
	}
}

// pairBatch sets ob to the operators of side (G: order p = m, from the
// points' pair coefficients of length K = N; H: order n, K = M) through
// the pair form (see pairForm): one product of the stacked coefficients
// c(v_b) with P (H side) or Pᵀ (G side), whose row b is the upper
// triangle of point b's matrix.
func (ob *OperatorBatch) pairBatch(w *Subspace, side int, pts [][]float64, p, P, K int) {
	B := len(pts)
	ob.count, ob.s, ob.p, ob.comp, ob.formed, ob.free = B, w.s, p, w.comp, true, nil
	ob.z = grow(&ob.z, B*P)
	ob.shift = grow(&ob.shift, B)
	ob.v = grow(&ob.v, B*K)
	for b, v := range pts {
		pairCoefficients(ob.v[b*K:(b+1)*K], v)
		ob.shift[b] = dot(v, v)
	}
	if B == 0 {
		return
	}
	pf := ob.pairOf(w)
	op := operand{pf.p, pf.N, side == sideG} // Pᵀ (N×M) for G, P (M×N) for H
	// Column c of Pᵀ (G) is row c of P; column c of P (H) is its column c.
	ob.product(w, side, true, B, P, K, ob.z, P, func(dst []float64, j0, nt, p0, kc, nr int) {
		packB(dst, op, j0, nt, p0, kc, nr)
	}, stored{src: pf.p, byRows: side == sideG, C: pf.N})
}

// pairCoefficients writes c(v) (see pairForm) into c, pairs (a, b) with
// a ≤ b in row order.
func pairCoefficients(c, v []float64) {
	at := 0
	for a, va := range v {
		c[at] = va * va / 2
		at++
		for _, vb := range v[a+1:] {
			c[at] = va * vb
			at++
		}
	}
}

// pairOf returns the pair form of w, building it on first use.
func (ob *OperatorBatch) pairOf(w *Subspace) *pairForm {
	pf := &ob.pair
	if pf.w == w && pf.p != nil {
		return pf
	}
	m, n, s, L := w.m, w.n, w.s, w.m*w.n
	M, N := m*(m+1)/2, n*(n+1)/2
	pf.w, pf.M, pf.N = w, M, N
	pf.p = grow(&pf.p, M*N)
	k := make([]float64, n*n)
	row := 0
	for i := 0; i < m; i++ {
		ri := operand{w.q[i*n:], L, true} // R_iᵀ: (j, t) ↦ S_t[i, j]
		for i2 := i; i2 < m; i2++ {
			// K = R_iᵀR_i′, K[j, j′] = Σ_t S_t[i, j]·S_t[i′, j′] = T(i,i′; j,j′).
			r2 := operand{w.q[i2*n:], L, false}
			clear(k)
			ob.mulInto(n, n, s, ri, func(dst []float64, j0, nt, p0, kc, nr int) {
				packB(dst, r2, j0, nt, p0, kc, nr)
			}, nil, k, n)
			out := pf.p[row*N : (row+1)*N]
			at := 0
			for j := 0; j < n; j++ {
				for j2 := j; j2 < n; j2++ {
					out[at] = k[j*n+j2] + k[j2*n+j]
					at++
				}
			}
			row++
		}
	}
	return pf
}
