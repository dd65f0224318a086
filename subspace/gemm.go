package subspace

import (
	"runtime"
	"sync"
	"sync/atomic"

	"gonum.org/v1/gonum/blas/blas64"
)

// Blocked matrix products, for the factorisation (qrcp.go) and for the
// Gram matrix of the stored vectors (orthogonality, gramCols).
//
// The scheme is the usual one of packed products (K. Goto and R. van de
// Geijn, "Anatomy of high-performance matrix multiplication", ACM Trans.
// Math. Softw. 34(3), 2008): C is cut into units of whole columns (or
// whole rows) of C; a unit runs over the inner dimension in slices of
// tileK, copies ("packs") its slice of B into strips of stripN columns
// once and, block of tileM rows by block, its slice of A into strips of 4
// rows, and a 4×stripN register tile (kernel_amd64.s, or mulTileGo) adds
// each strip product to C. Units go to the workers through an atomic
// counter.
//
// What an entry of C is. Entry (i, j) of a product is the sum over the
// slices of the inner dimension, in order, of each slice's sum of
// products a_il·b_lj accumulated in order of l from zero (one register
// lane) and then added to the entry. That depends on tileK and on the
// kernel (fused or not), never on the units, blocks or strips that cut C,
// nor on the worker that computes it: the result is the same, bit for
// bit, for any number of workers and any sizes of the units.
//
// Rounding. The factorisation's products (mul) may fuse each product with
// its addition: nothing certified is computed from them directly (see
// factor). The Gram matrix (gramCols) never does (tile4x12Sep, tile4x24Sep,
// and mulTileGo, which writes float64(a*b)), so its error bound is the one
// orthogonality derives for separately rounded products.
const (
	tileK = 256 // inner-dimension slice: a strip of B (24 or 48 KiB) stays in L1
	tileM = 192 // rows of a block: its packed A slice (384 KiB) stays in L2
	tileN = 384 // columns of a unit at most: its packed B slice (768 KiB) stays in L2
)

// The tiles: the portable one (mulTileGo) and the assembly ones of
// kernel_amd64.s. Every tile has 4 rows; stripN is its width.
const (
	tileGo = iota
	tileAVX2
	tileAVX512
)

// stripN returns the width of the tile in use: 24 for AVX-512, else 12.
func stripN() int {
	if tileKind == tileAVX512 {
		return 24
	}
	return 12
}

// maxWorkers caps the goroutines of one product, so that the bound on the
// packing buffers (gemmBytes) does not depend on the machine.
const maxWorkers = 8

// operand is a matrix operand of gemm: element (i, l) is d[i·ld + l], or
// d[l·ld + i] when trans is set.
type operand struct {
	d     []float64
	ld    int
	trans bool
}

// gemmPool holds the packing buffers of the workers of a factorisation,
// allocated on first use at the size that the largest product whose
// dimensions are at most dim needs (gemmBytes in all). It is used by one
// goroutine at a time (the products themselves fan out).
type gemmPool struct {
	workers int
	dim     int
	bufs    []packBuf
}

// packBuf is one worker's packed slice of A (4-row strips), of B (strips
// of stripN columns) and a scratch tile.
type packBuf struct{ pa, pb, scratch []float64 }

// newGemmPool returns a pool for min(GOMAXPROCS, maxWorkers) workers and
// products of dimensions at most dim.
func newGemmPool(dim int) *gemmPool {
	return newGemmPoolN(min(runtime.GOMAXPROCS(0), maxWorkers), dim)
}

func newGemmPoolN(w, dim int) *gemmPool {
	return &gemmPool{workers: w, dim: dim, bufs: make([]packBuf, w)}
}

// packSizes returns the lengths of the packed slices of A and B for
// products of dimensions at most d.
func packSizes(d int) (pa, pb int) {
	kc := min(tileK, d)
	return min(tileM, (d+3)/4*4) * kc, kc * min(tileN, (d+23)/24*24)
}

// gemmBytes bounds the packing buffers of a pool for dimensions at most d.
func gemmBytes(d int) int64 {
	pa, pb := packSizes(d)
	return 8 * maxWorkers * (int64(pa) + int64(pb) + 4*24)
}

// buf returns worker w's buffers. It panics if a product's dimensions
// exceed the pool's (a programming error).
func (g *gemmPool) buf(w, mp, np, kc int) *packBuf {
	b := &g.bufs[w]
	if b.pa == nil {
		pa, pb := packSizes(g.dim)
		b.pa, b.pb, b.scratch = make([]float64, pa), make([]float64, pb), make([]float64, 4*24)
	}
	if len(b.pa) < mp*kc || len(b.pb) < np*kc {
		panic("subspace: product larger than its pool")
	}
	return b
}

// mul adds op(A)·op(B) to C (or subtracts it, when neg is set): C is m×n
// with element (i, j) at c[i·ldc + j], A is m×k, B is k×n. stop is checked
// before every block of work; when it reports true mul returns false and C
// is left partly updated. m, n or k may be zero. The tile may fuse.
//
// The work is cut into units along the longer side of C: column blocks
// (at most tileN wide) when n ≥ m, each packing its slices of B once and
// running down all the rows of C; row blocks (at most tileM high)
// otherwise, each packing its slices of A once and running along all the
// columns.
func (g *gemmPool) mul(m, n, k int, neg bool, a, b operand, c []float64, ldc int, stop func() bool) bool {
	if m == 0 || n == 0 || k == 0 {
		return true
	}
	byCols := n >= m
	nr := stripN()
	kc := min(tileK, k)
	mp, np := (min(m, tileM)+3)/4*4, (min(n, tileN)+nr-1)/nr*nr
	if byCols {
		width := g.unitSize(n, tileN, nr)
		return g.fan((n+width-1)/width, mp, np, kc, stop, func(u int, buf *packBuf, halt func() bool) {
			j0 := u * width
			mulCols(m, min(n, j0+width)-j0, k, neg, a, b, j0, c, ldc, buf, halt, true)
		})
	}
	height := g.unitSize(m, tileM, 4)
	return g.fan((m+height-1)/height, mp, np, kc, stop, func(u int, buf *packBuf, halt func() bool) {
		i0 := u * height
		mulRows(min(m, i0+height)-i0, n, k, neg, a, b, i0, c, ldc, buf, halt)
	})
}

// unitSize returns the extent of a unit of work along a side of n: full
// (a multiple of the strip q) blocks of at most most, made smaller, down
// to 8 strips, when that gives each worker at least two units. The result
// does not depend on the size of the units (each entry of C is the same
// sums in the same order whatever block computes it), only the speed.
func (g *gemmPool) unitSize(n, most, q int) int {
	size := most
	if want := 2 * g.workers; (n+size-1)/size < want {
		size = max(8*q, ((n+want-1)/want+q-1)/q*q)
	}
	return min(size, most)
}

// gramCols sets the columns [j0, j1) of the lower triangle of fl(SSᵀ), for
// the s rows of length L of S (row stride L), into the buffer c: entry
// (i, j), j0 ≤ j < j1, j ≤ i < s, goes to c[(i−j0)·ldc + (j−j0)] (some
// entries above the diagonal near it are set too; the others of the
// (s−j0)×(j1−j0) region are zero). It uses the unfused tile: every entry
// is Σ_ℓ S_iℓ·S_jℓ with each product rounded, then added, in slices of
// tileK as every product here (the same for any number of workers and
// any units). Since S_iℓ·S_jℓ and S_jℓ·S_iℓ are the same rounded product,
// entry (i, j) has the bits of entry (j, i) of the whole product too.
// The work is cut into units of at most tileN columns and, when that
// gives fewer than two units a worker, row blocks. It returns false, with
// c incomplete, when stop reported true first.
func (g *gemmPool) gramCols(s, L int, S []float64, j0, j1 int, c []float64, ldc int, stop func() bool) bool {
	nt, rows := j1-j0, s-j0
	if nt <= 0 {
		return true
	}
	clear(c[:(rows-1)*ldc+nt])
	if L == 0 {
		return true
	}
	nr := stripN()
	width := g.unitSize(nt, tileN, nr)
	cu := (nt + width - 1) / width
	blocks := 1
	if want := 2 * g.workers; cu < want {
		blocks = (want + cu - 1) / cu
	}
	height := max(tileM, ((rows+blocks-1)/blocks+3)/4*4)
	ru := (rows + height - 1) / height
	kc := min(tileK, L)
	mp, np := (min(rows, tileM)+3)/4*4, (min(nt, width)+nr-1)/nr*nr
	return g.fan(cu*ru, mp, np, kc, stop, func(u int, buf *packBuf, halt func() bool) {
		u0 := u / ru * width
		u1 := min(nt, u0+width)
		r0, r1 := max(u%ru*height, u0), min(rows, (u%ru+1)*height) // rows above u0 are the upper triangle's
		if r0 >= r1 {
			return
		}
		mulCols(r1-r0, u1-u0, L, false, operand{S[(j0+r0)*L:], L, false}, operand{S[j0*L:], L, true}, u0, c[r0*ldc:], ldc, buf, halt, false)
	})
}

// fan runs unit(u) for u in [0, units) on up to g.workers goroutines,
// each with its own buffers; it returns false when stop reported true.
func (g *gemmPool) fan(units, mp, np, kc int, stop func() bool, unit func(u int, buf *packBuf, halt func() bool)) bool {
	var next atomic.Int64
	var halted atomic.Bool
	halt := func() bool {
		if halted.Load() {
			return true
		}
		if stop != nil && stop() {
			halted.Store(true)
			return true
		}
		return false
	}
	run := func(w int) {
		buf := g.buf(w, mp, np, kc)
		for {
			u := int(next.Add(1) - 1)
			if u >= units || halt() {
				return
			}
			unit(u, buf, halt)
		}
	}
	workers := min(g.workers, units)
	if workers <= 1 {
		run(0)
		return !halted.Load()
	}
	var wg sync.WaitGroup
	for w := 1; w < workers; w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			run(w)
		}()
	}
	run(0)
	wg.Wait()
	return !halted.Load()
}

// mulCols does the columns [j0, j0+nt) of C, all m rows: for each slice of
// the inner dimension it packs B's slice once and runs down the rows in
// blocks of tileM. It returns early when halt reports true.
func mulCols(m, nt, k int, neg bool, a, b operand, j0 int, c []float64, ldc int, buf *packBuf, halt func() bool, fused bool) {
	nr := stripN()
	np := (nt + nr - 1) / nr * nr
	direct := readsInPlace(a, neg)
	for p0 := 0; p0 < k; p0 += tileK {
		kc := min(tileK, k-p0)
		packB(buf.pb[:np*kc], b, j0, nt, p0, kc, nr)
		for i0 := 0; i0 < m; i0 += tileM {
			if halt() {
				return
			}
			mt := min(tileM, m-i0)
			if !direct {
				packA(buf.pa[:(mt+3)/4*4*kc], a, i0, mt, p0, kc, neg)
			}
			block(mt, nt, kc, a, i0, p0, direct, neg, buf, c[i0*ldc+j0:], ldc, fused)
		}
	}
}

// mulRows does the rows [i0, i0+mt) of C, all n columns: for each slice
// of the inner dimension it packs A's slice once (unless the tile reads it
// in place) and runs along the columns in blocks of tileN. It returns
// early when halt reports true.
func mulRows(mt, n, k int, neg bool, a, b operand, i0 int, c []float64, ldc int, buf *packBuf, halt func() bool) {
	mp, nr := (mt+3)/4*4, stripN()
	direct := readsInPlace(a, neg)
	for p0 := 0; p0 < k; p0 += tileK {
		kc := min(tileK, k-p0)
		if !direct {
			packA(buf.pa[:mp*kc], a, i0, mt, p0, kc, neg)
		}
		for j0 := 0; j0 < n; j0 += tileN {
			if halt() {
				return
			}
			nt := min(tileN, n-j0)
			packB(buf.pb[:(nt+nr-1)/nr*nr*kc], b, j0, nt, p0, kc, nr)
			block(mt, nt, kc, a, i0, p0, direct, neg, buf, c[i0*ldc+j0:], ldc, true)
		}
	}
}

// readsInPlace reports whether the assembly tiles read A's rows where
// they are (A not transposed, not negated) instead of a packed copy: the
// same products in the same order, without the copy.
func readsInPlace(a operand, neg bool) bool {
	return tileKind != tileGo && !a.trans && !neg
}

// block adds the product of rows [i0, i0+mt) and columns [p0, p0+kc) of
// op(A) — packed in buf.pa, or read in place when direct — and the packed
// kc×nt slice buf.pb to the mt×nt block of C at c[0] (row stride ldc), one
// 4×stripN tile at a time. Tiles that stick out of the block go through a
// scratch tile; in place, a last strip of fewer than 4 rows is packed.
func block(mt, nt, kc int, a operand, i0, p0 int, direct, neg bool, buf *packBuf, c []float64, ldc int, fused bool) {
	nr := stripN()
	pb, scratch := buf.pb, buf.scratch
	for ir := 0; ir < mt; ir += 4 {
		var as []float64
		inPlace := direct && ir+4 <= mt
		switch {
		case inPlace:
			as = a.d[(i0+ir)*a.ld+p0:]
		case direct:
			as = buf.pa[:4*kc]
			packA(as, a, i0+ir, mt-ir, p0, kc, neg)
		default:
			as = buf.pa[ir*kc : (ir+4)*kc]
		}
		for jr := 0; jr < nt; jr += nr {
			bs := pb[jr*kc : (jr+nr)*kc]
			full := ir+4 <= mt && jr+nr <= nt
			dst, ld := c[ir*ldc+jr:], ldc
			if !full {
				dst, ld = scratch[:4*nr], nr
				clear(dst)
			}
			if inPlace {
				tileDirect(kc, as, a.ld, bs, dst, ld, nr, fused)
			} else {
				tileAdd(kc, as, bs, dst, ld, nr, fused)
			}
			if full {
				continue
			}
			for i := 0; i < min(4, mt-ir); i++ {
				row := c[(ir+i)*ldc+jr:]
				for j := 0; j < min(nr, nt-jr); j++ {
					row[j] += dst[i*nr+j]
				}
			}
		}
	}
}

// tileDirect is tileAdd with the strip of A read in place: its row i at
// a[i·lda:], kc entries.
func tileDirect(kc int, a []float64, lda int, b, c []float64, ldc, nr int, fused bool) {
	if len(a) < 3*lda+kc || len(b) < nr*kc || len(c) < 3*ldc+nr {
		panic("subspace: tile out of range")
	}
	tileDirectAsm(kc, a, lda, b, c, ldc, fused)
}

// tileAdd adds the product of a 4-row strip a (4·kc) and a strip b of nr
// (= stripN()) columns (nr·kc) to the 4×nr block of c at c[0] with row
// stride ldc. Each entry is summed in order of l, then added to c; fused
// allows the assembly tile to fuse each product with its addition.
func tileAdd(kc int, a, b, c []float64, ldc, nr int, fused bool) {
	if len(a) < 4*kc || len(b) < nr*kc || len(c) < 3*ldc+nr {
		panic("subspace: tile out of range")
	}
	if tileKind != tileGo {
		tileAsm(kc, a, b, c, ldc, fused)
		return
	}
	mulTileGo(kc, a, b, c, ldc)
}

// mulTileGo is the portable 4×12 tile: c[i·ldc + j] += Σ_l a[4l+i]·b[12l+j],
// in three column groups of four with sixteen accumulators each. Every
// product is written float64(a*b), so no compiler fuses it (the Go
// specification forbids fusing an explicitly converted product): it serves
// the unfused products too.
func mulTileGo(kc int, a, b, c []float64, ldc int) {
	a = a[:4*kc]
	b = b[:12*kc]
	for jg := 0; jg < 12; jg += 4 {
		var c00, c01, c02, c03, c10, c11, c12, c13 float64
		var c20, c21, c22, c23, c30, c31, c32, c33 float64
		for l := 0; l < kc; l++ {
			av := a[4*l : 4*l+4 : 4*l+4]
			bv := b[12*l+jg : 12*l+jg+4 : 12*l+jg+4]
			a0, a1, a2, a3 := av[0], av[1], av[2], av[3]
			b0, b1, b2, b3 := bv[0], bv[1], bv[2], bv[3]
			c00 += float64(a0 * b0)
			c01 += float64(a0 * b1)
			c02 += float64(a0 * b2)
			c03 += float64(a0 * b3)
			c10 += float64(a1 * b0)
			c11 += float64(a1 * b1)
			c12 += float64(a1 * b2)
			c13 += float64(a1 * b3)
			c20 += float64(a2 * b0)
			c21 += float64(a2 * b1)
			c22 += float64(a2 * b2)
			c23 += float64(a2 * b3)
			c30 += float64(a3 * b0)
			c31 += float64(a3 * b1)
			c32 += float64(a3 * b2)
			c33 += float64(a3 * b3)
		}
		r := c[jg : jg+4 : jg+4]
		r[0], r[1], r[2], r[3] = r[0]+c00, r[1]+c01, r[2]+c02, r[3]+c03
		r = c[ldc+jg : ldc+jg+4 : ldc+jg+4]
		r[0], r[1], r[2], r[3] = r[0]+c10, r[1]+c11, r[2]+c12, r[3]+c13
		r = c[2*ldc+jg : 2*ldc+jg+4 : 2*ldc+jg+4]
		r[0], r[1], r[2], r[3] = r[0]+c20, r[1]+c21, r[2]+c22, r[3]+c23
		r = c[3*ldc+jg : 3*ldc+jg+4 : 3*ldc+jg+4]
		r[0], r[1], r[2], r[3] = r[0]+c30, r[1]+c31, r[2]+c32, r[3]+c33
	}
}

// packA copies rows [i0, i0+mt) and columns [p0, p0+kc) of op(A) into
// strips of 4 rows (strip s holds, for each l, the entries of rows
// 4s..4s+3), negated when neg is set, padding the last strip with zeros.
func packA(dst []float64, a operand, i0, mt, p0, kc int, neg bool) {
	sign := 1.0
	if neg {
		sign = -1
	}
	for s := 0; s < mt; s += 4 {
		strip := dst[s*kc : (s+4)*kc]
		rows := min(4, mt-s)
		if rows < 4 {
			clear(strip)
		}
		if a.trans {
			for l := 0; l < kc; l++ {
				at := (p0+l)*a.ld + i0 + s
				for r, v := range a.d[at : at+rows] {
					strip[4*l+r] = sign * v
				}
			}
			continue
		}
		if rows < 4 {
			for r := 0; r < rows; r++ {
				at := (i0+s+r)*a.ld + p0
				for l, v := range a.d[at : at+kc] {
					strip[4*l+r] = sign * v
				}
			}
			continue
		}
		at := (i0+s)*a.ld + p0
		r0, r1 := a.d[at:at+kc], a.d[at+a.ld:at+a.ld+kc]
		r2, r3 := a.d[at+2*a.ld:at+2*a.ld+kc], a.d[at+3*a.ld:at+3*a.ld+kc]
		if neg {
			for l := range r0 {
				d := strip[4*l : 4*l+4 : 4*l+4]
				d[0], d[1], d[2], d[3] = -r0[l], -r1[l], -r2[l], -r3[l]
			}
			continue
		}
		for l := range r0 {
			d := strip[4*l : 4*l+4 : 4*l+4]
			d[0], d[1], d[2], d[3] = r0[l], r1[l], r2[l], r3[l]
		}
	}
}

// packB copies rows [p0, p0+kc) and columns [j0, j0+nt) of op(B) into
// strips of nr columns (strip s holds, for each l, the entries of columns
// nr·s..nr·s+nr−1), padding the last strip with zeros.
func packB(dst []float64, b operand, j0, nt, p0, kc, nr int) {
	for s := 0; s < nt; s += nr {
		strip := dst[s*kc : (s+nr)*kc]
		cols := min(nr, nt-s)
		if cols < nr {
			clear(strip)
		}
		if !b.trans {
			for l := 0; l < kc; l++ {
				row := (p0+l)*b.ld + j0 + s
				copy(strip[nr*l:nr*l+cols], b.d[row:row+cols])
			}
			continue
		}
		for l := 0; l < kc; l++ {
			at := j0*b.ld + s*b.ld + p0 + l
			dst := strip[nr*l : nr*l+cols]
			for r := range dst {
				dst[r] = b.d[at+r*b.ld]
			}
		}
	}
}

// dotGo is the portable rowDot: gonum's Ddot.
func dotGo(x, y []float64) float64 {
	return blas64.Dot(blas64.Vector{N: len(x), Data: x, Inc: 1}, blas64.Vector{N: len(x), Data: y, Inc: 1})
}

// axpyGo is the portable rowAxpy: gonum's Daxpy.
func axpyGo(alpha float64, x, y []float64) {
	blas64.Axpy(alpha, blas64.Vector{N: len(x), Data: x, Inc: 1}, blas64.Vector{N: len(x), Data: y, Inc: 1})
}
