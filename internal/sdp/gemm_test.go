package sdp

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
)

// Gemm agrees with gonum's Dgemm (the reference) on both paths, for every
// transposition, shapes that do and do not fill the 4×12 tiles, depths
// across the packing depth, strides larger than the rows and several α.
// Tolerance (derived here): both compute each entry as a sum of k
// products in some order, with or without fused multiply-adds, so they
// differ by at most 2γ_k·Σ|a||b| (Higham 2002, §3.1); 4k·u·Σ|a||b| bounds
// that.
func TestExportedGemmAgainstGonum(t *testing.T) {
	defer func(v bool) { useKernels = v }(useKernels)
	paths := []bool{false}
	if kernelsAvailable {
		paths = append(paths, true)
	}
	rng := rand.New(rand.NewPCG(7, 7))
	shapes := [][3]int{{1, 1, 1}, {4, 12, 5}, {5, 13, 7}, {33, 50, 300}, {64, 25, 513}, {3, 40, 2}}
	for _, kern := range paths {
		useKernels = kern
		for _, sh := range shapes {
			m, n, k := sh[0], sh[1], sh[2]
			for _, ta := range []bool{false, true} {
				for _, tb := range []bool{false, true} {
					for _, alpha := range []float64{1, -0.5} {
						t.Run(fmt.Sprintf("kernel=%v/%dx%dx%d/ta=%v/tb=%v/α=%g", kern, m, n, k, ta, tb, alpha), func(t *testing.T) {
							ar, ac := m, k
							if ta {
								ar, ac = k, m
							}
							br, bc := k, n
							if tb {
								br, bc = n, k
							}
							lda, ldb, ldc := ac+3, bc+1, n+2
							a, b := make([]float64, ar*lda), make([]float64, br*ldb)
							c := make([]float64, m*ldc)
							for i := range a {
								a[i] = rng.NormFloat64()
							}
							for i := range b {
								b[i] = rng.NormFloat64()
							}
							for i := range c {
								c[i] = rng.NormFloat64()
							}
							want := append([]float64(nil), c...)
							tA, tB := blas.NoTrans, blas.NoTrans
							if ta {
								tA = blas.Trans
							}
							if tb {
								tB = blas.Trans
							}
							blas64.Gemm(tA, tB, alpha, blas64.General{Rows: ar, Cols: ac, Stride: lda, Data: a},
								blas64.General{Rows: br, Cols: bc, Stride: ldb, Data: b}, 1, blas64.General{Rows: m, Cols: n, Stride: ldc, Data: want})
							got := append([]float64(nil), c...)
							Gemm(ta, tb, m, n, k, alpha, a, lda, b, ldb, got, ldc)
							for i := 0; i < m; i++ {
								for j := 0; j < ldc; j++ {
									if j >= n {
										if got[i*ldc+j] != c[i*ldc+j] {
											t.Fatalf("padding (%d, %d) changed", i, j)
										}
										continue
									}
									var mag float64
									for l := 0; l < k; l++ {
										var av, bv float64
										if ta {
											av = a[l*lda+i]
										} else {
											av = a[i*lda+l]
										}
										if tb {
											bv = b[j*ldb+l]
										} else {
											bv = b[l*ldb+j]
										}
										mag += math.Abs(av * bv)
									}
									tol := 4*float64(k)*0x1p-53*math.Abs(alpha)*mag + 0x1p-53*math.Abs(c[i*ldc+j])*4
									if d := math.Abs(got[i*ldc+j] - want[i*ldc+j]); d > tol {
										t.Fatalf("(%d, %d): %v, gonum %v (diff %g > %g)", i, j, got[i*ldc+j], want[i*ldc+j], d, tol)
									}
								}
							}
						})
					}
				}
			}
		}
	}
}
