package sdp

import (
	"runtime"
	"sync"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
)

// gemmDepth is the depth of the packed panels of Gemm (the kernel's kc):
// a 4×gemmDepth strip of A and a 12×gemmDepth strip of B take 32 KiB.
const gemmDepth = 256

// Gemm sets C += α·op(A)·op(B) for row-major matrices with strides lda,
// ldb, ldc: op(A) is m×k (A itself, or Aᵀ when ta is set, A then k×m),
// op(B) is k×n (likewise with tb), C is m×n and must not overlap A or B.
// It is the product of the solvers that live outside this package (the
// first-order methods of package sos), through the same 4×12 tile kernel
// as the interior-point method's products (tiles.go): op(A) is packed
// times −α in strips of 4 rows and op(B) in strips of 12 columns, gemmDepth
// deep at a time, and each tile of C loses the product of its strips
// (Goto and van de Geijn 2008). The column strips of C are split between
// two goroutines when there is enough work; every entry is computed by the
// same operations whatever the split. Without the kernels (other
// architectures, the purego build, processors without AVX2 and FMA) it
// calls gonum's Dgemm.
//
// It panics if a dimension is negative or a slice is too short.
func Gemm(ta, tb bool, m, n, k int, alpha float64, a []float64, lda int, b []float64, ldb int, c []float64, ldc int) {
	if m < 0 || n < 0 || k < 0 {
		panic("sdp: Gemm with a negative dimension")
	}
	if m == 0 || n == 0 || k == 0 || alpha == 0 {
		return
	}
	ar, ac := m, k
	if ta {
		ar, ac = k, m
	}
	br, bc := k, n
	if tb {
		br, bc = n, k
	}
	if lda < ac || ldb < bc || ldc < n || len(a) < (ar-1)*lda+ac || len(b) < (br-1)*ldb+bc || len(c) < (m-1)*ldc+n {
		panic("sdp: Gemm out of range")
	}
	if !useKernels {
		tA, tB := blas.NoTrans, blas.NoTrans
		if ta {
			tA = blas.Trans
		}
		if tb {
			tB = blas.Trans
		}
		blas64.Gemm(tA, tB, alpha, blas64.General{Rows: ar, Cols: ac, Stride: lda, Data: a},
			blas64.General{Rows: br, Cols: bc, Stride: ldb, Data: b}, 1, blas64.General{Rows: m, Cols: n, Stride: ldc, Data: c})
		return
	}
	nsA, nsB := (m+tileRows-1)/tileRows, (n+tileCols-1)/tileCols
	ap := make([]float64, nsA*tileRows*min(k, gemmDepth))
	bp := make([]float64, nsB*tileCols*min(k, gemmDepth))
	workers := 1
	if runtime.GOMAXPROCS(0) > 1 && float64(m)*float64(n)*float64(k) >= 1<<21 && nsB >= 2 {
		workers = 2
	}
	for l0 := 0; l0 < k; l0 += gemmDepth {
		kc := min(gemmDepth, k-l0)
		// ap[(s·kc + l)·4 + i] = −α·op(A)[4s+i][l0+l] (zero past row m).
		for r := 0; r < nsA*tileRows; r++ {
			s, i := r/tileRows, r%tileRows
			dst := ap[s*kc*tileRows+i:]
			switch {
			case r >= m:
				for l := 0; l < kc; l++ {
					dst[l*tileRows] = 0
				}
			case ta:
				for l := 0; l < kc; l++ {
					dst[l*tileRows] = -alpha * a[(l0+l)*lda+r]
				}
			default:
				for l, v := range a[r*lda+l0 : r*lda+l0+kc] {
					dst[l*tileRows] = -alpha * v
				}
			}
		}
		// bp[(s·kc + l)·12 + j] = op(B)[l0+l][12s+j] (zero past column n).
		for s := 0; s < nsB; s++ {
			w := min(tileCols, n-s*tileCols)
			for l := 0; l < kc; l++ {
				dst := bp[(s*kc+l)*tileCols : (s*kc+l+1)*tileCols]
				if tb {
					for j := 0; j < w; j++ {
						dst[j] = b[(s*tileCols+j)*ldb+l0+l]
					}
				} else {
					copy(dst, b[(l0+l)*ldb+s*tileCols:(l0+l)*ldb+s*tileCols+w])
				}
				clear(dst[w:])
			}
		}
		strips := func(lo, hi int) {
			var tmp [tileRows * tileCols]float64
			for cs := lo; cs < hi; cs++ {
				w := min(tileCols, n-cs*tileCols)
				for rs := 0; rs < nsA; rs++ {
					h := min(tileRows, m-rs*tileRows)
					cc := c[rs*tileRows*ldc+cs*tileCols:]
					if h == tileRows && w == tileCols {
						kernel(kc, ap[rs*kc*tileRows:], bp[cs*kc*tileCols:], cc, ldc)
					} else {
						kernelEdge(kc, ap[rs*kc*tileRows:], bp[cs*kc*tileCols:], cc, ldc, h, w, &tmp)
					}
				}
			}
		}
		if workers == 1 {
			strips(0, nsB)
			continue
		}
		var wg sync.WaitGroup
		wg.Add(1)
		go func() { defer wg.Done(); strips(0, nsB/2) }()
		strips(nsB/2, nsB)
		wg.Wait()
	}
}
