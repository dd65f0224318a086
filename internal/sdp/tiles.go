package sdp

import (
	"context"
	"runtime"
	"sync"
)

// The tile path of the Schur complement's factorisation: the blocked
// right-looking algorithm of the doc of chol, with every O(k³) operation
// done by one kernel that subtracts a product Aᵀ·B of two packed panels
// from a 4×12 tile of the matrix (kernel_amd64.s; Goto and van de Geijn,
// "Anatomy of high-performance matrix multiplication", ACM Trans. Math.
// Softw. 34, 2008, describe this organisation: packed panels streamed
// through a register-resident tile).
//
// For the block column j of width jb, U12 (jb × rest, the rows of the
// block column right of the diagonal block) is computed four rows at a
// time: rows l0..l0+3 of A12 first lose U11[0:l0, l0:l0+4]ᵀ·U12[0:l0, :]
// (the kernel, over the rows of U12 already packed), then the 4×4 triangle
// is solved by row operations, then the four rows are packed. The trailing
// matrix then loses U12ᵀU12 (the kernel over all tiles that meet the upper
// triangle), split between goroutines by column strips. Each entry of the
// matrix is computed by the same operations whatever the split.
//
// The tiles that straddle the diagonal also write below it, into storage
// that the factorisation never reads (only the upper triangle holds U).

const (
	tileRows  = 4   // rows of the kernel's tile (the A panel's width)
	tileCols  = 12  // columns of the kernel's tile (the B panel's width)
	tileBlock = 128 // block column width of the tile path (the kernel's depth)
	tileInner = 16  // block column width inside the diagonal blocks
)

// kernel subtracts Σ_{l<kc} a[4l+i]·b[12l+j] from c[i·ldc+j] (i < 4,
// j < 12), through tileKernel after checking the lengths.
func kernel(kc int, a, b, c []float64, ldc int) {
	if kc <= 0 {
		return
	}
	if len(a) < tileRows*kc || len(b) < tileCols*kc || len(c) < (tileRows-1)*ldc+tileCols {
		panic("sdp: tile out of range")
	}
	tileKernel(kc, a, b, c, ldc)
}

// kernelEdge is kernel for a tile of which only h rows and w columns lie in
// the matrix: the full tile is computed into scratch and its valid part
// subtracted.
func kernelEdge(kc int, a, b, c []float64, ldc, h, w int, tmp *[tileRows * tileCols]float64) {
	clear(tmp[:])
	kernel(kc, a, b, tmp[:], tileCols)
	for i := 0; i < h; i++ {
		for j := 0; j < w; j++ {
			c[i*ldc+j] += tmp[i*tileCols+j]
		}
	}
}

// factorTiles is the tile path, in place on c.u.
func (c *chol) factorTiles(ctx context.Context) (bool, error) {
	k := c.k
	if n := ((k+tileCols-1)/tileCols*tileCols + tileCols) * tileBlock; len(c.bp) < n {
		c.bp = make([]float64, n)
		c.ap = make([]float64, n)
	}
	return c.factorRange(ctx, 0, k, tileBlock)
}

// factorRange factors the diagonal block [lo, hi) of c.u (whose rows above
// lo are already eliminated) by block columns of width nb; the diagonal
// blocks of width above tileInner are factored by the same method with
// width tileInner, the smaller ones by diagonalBlock.
func (c *chol) factorRange(ctx context.Context, lo, hi, nb int) (bool, error) {
	for j0 := lo; j0 < hi; j0 += nb {
		if err := ctx.Err(); err != nil {
			return false, err
		}
		jb := min(nb, hi-j0)
		if jb > tileInner {
			if ok, err := c.factorRange(ctx, j0, j0+jb, tileInner); !ok || err != nil {
				return ok, err
			}
		} else if !diagonalBlock(c.u, c.k, j0, jb) {
			return false, nil
		}
		rest := hi - j0 - jb
		if rest == 0 {
			break
		}
		c.panel(j0, jb, rest)
		if err := c.trailing(ctx, j0, jb, rest); err != nil {
			return false, err
		}
	}
	return true, nil
}

// panel computes U12 = U11⁻ᵀA12 for the block column at j0 of width jb in
// place, and packs it: bp holds strips of 12 columns, each jb rows of 12
// values; ap strips of 4 columns, each jb rows of 4 (zero beyond rest).
func (c *chol) panel(j0, jb, rest int) {
	k, u := c.k, c.u
	base := j0 + jb
	nsB, nsA := (rest+tileCols-1)/tileCols, (rest+tileRows-1)/tileRows
	var t4 [tileRows * tileBlock]float64
	var tmp [tileRows * tileCols]float64
	for l0 := 0; l0 < jb; l0 += tileRows {
		g := min(tileRows, jb-l0)
		if l0 > 0 {
			// t4[p][i] = U11[p][l0+i]: the A operand of the update.
			for p := 0; p < l0; p++ {
				for i := 0; i < tileRows; i++ {
					v := 0.0
					if i < g {
						v = u[(j0+p)*k+j0+l0+i]
					}
					t4[p*tileRows+i] = v
				}
			}
			for s := 0; s < nsB; s++ {
				c0 := s * tileCols
				w := min(tileCols, rest-c0)
				cs := u[(j0+l0)*k+base+c0:]
				b := c.bp[s*jb*tileCols:]
				if g == tileRows && w == tileCols {
					kernel(l0, t4[:], b, cs, k)
				} else {
					kernelEdge(l0, t4[:], b, cs, k, g, w, &tmp)
				}
			}
		}
		// The g×g triangle: row l loses U11[p][l]·row p for l0 ≤ p < l,
		// then is divided by U11[l][l].
		for i := 0; i < g; i++ {
			l := l0 + i
			row := u[(j0+l)*k+base : (j0+l)*k+base+rest]
			for p := l0; p < l; p++ {
				f := u[(j0+p)*k+j0+l]
				prow := u[(j0+p)*k+base : (j0+p)*k+base+rest]
				for j, v := range prow {
					row[j] -= f * v
				}
			}
			d := u[(j0+l)*k+j0+l]
			for j := range row {
				row[j] /= d
			}
			for s := 0; s < nsB; s++ {
				dst := c.bp[(s*jb+l)*tileCols : (s*jb+l+1)*tileCols]
				n := copy(dst, row[s*tileCols:min(rest, (s+1)*tileCols)])
				clear(dst[n:])
			}
			for s := 0; s < nsA; s++ {
				dst := c.ap[(s*jb+l)*tileRows : (s*jb+l+1)*tileRows]
				n := copy(dst, row[s*tileRows:min(rest, (s+1)*tileRows)])
				clear(dst[n:])
			}
		}
	}
}

// trailing subtracts U12ᵀU12 from the upper triangle of the trailing
// matrix (rows and columns from j0+jb on), by column strips of 12 split
// between up to GOMAXPROCS goroutines in contiguous ranges of about equal
// work. Each goroutine checks ctx between strips; the context's error is
// returned if it was cancelled.
func (c *chol) trailing(ctx context.Context, j0, jb, rest int) error {
	k, u := c.k, c.u
	base := j0 + jb
	nsB := (rest + tileCols - 1) / tileCols
	strips := func(s0, s1 int) {
		var tmp [tileRows * tileCols]float64
		for s := s0; s < s1; s++ {
			if ctx.Err() != nil {
				return
			}
			c0 := s * tileCols
			w := min(tileCols, rest-c0)
			b := c.bp[s*jb*tileCols:]
			for r0 := 0; r0 < c0+w; r0 += tileRows {
				h := min(tileRows, rest-r0)
				a := c.ap[(r0/tileRows)*jb*tileRows:]
				cs := u[(base+r0)*k+base+c0:]
				if h == tileRows && w == tileCols {
					kernel(jb, a, b, cs, k)
				} else {
					kernelEdge(jb, a, b, cs, k, h, w, &tmp)
				}
			}
		}
	}
	// Strip s costs about s+1 tiles: split the triangle's area evenly.
	workers := min(runtime.GOMAXPROCS(0), nsB/8)
	if workers <= 1 {
		strips(0, nsB)
		return ctx.Err()
	}
	var wg sync.WaitGroup
	total := float64(nsB) * float64(nsB+1) / 2
	lo := 0
	for w := 1; w <= workers; w++ {
		hi := nsB
		if w < workers {
			target := total * float64(w) / float64(workers)
			for hi = lo; hi < nsB && float64(hi)*float64(hi+1)/2 < target; hi++ {
			}
		}
		wg.Add(1)
		go func(lo, hi int) {
			defer wg.Done()
			strips(lo, hi)
		}(lo, hi)
		lo = hi
	}
	wg.Wait()
	return ctx.Err()
}
