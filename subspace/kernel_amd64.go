//go:build amd64 && !purego

package subspace

import "github.com/segre-lab/segre/internal/cpufeat"

// The amd64 kernels (kernel_amd64.s): the dot product and axpy of the
// factorisation's panels (AVX2, fused), and the tile of the blocked products
// (gemm.go), 4×12 with AVX2 or 4×24 with AVX-512, each with fused
// multiply-adds (tile4x12, tile4x24: for the factorisation) and without
// (tile4x12Sep, tile4x24Sep: for the Gram matrix that orthogonality proves
// a bound from, every product rounded and then added). They are used when
// the processor and the operating system support them; the build tag
// purego selects the portable tile everywhere.

//go:noescape
func tile4x12(kc int, a, b, c *float64, ldc int)

//go:noescape
func tile4x12Sep(kc int, a, b, c *float64, ldc int)

//go:noescape
func tile4x24(kc int, a, b, c *float64, ldc int)

//go:noescape
func tile4x24Sep(kc int, a, b, c *float64, ldc int)

// The direct tiles read row i of A's strip in place at a + i·lda.

//go:noescape
func tile4x12D(kc int, a *float64, lda int, b, c *float64, ldc int)

//go:noescape
func tile4x12SepD(kc int, a *float64, lda int, b, c *float64, ldc int)

//go:noescape
func tile4x24D(kc int, a *float64, lda int, b, c *float64, ldc int)

//go:noescape
func tile4x24SepD(kc int, a *float64, lda int, b, c *float64, ldc int)

//go:noescape
func dotAsm(n int, x, y *float64) float64

//go:noescape
func axpyAsm(n int, alpha float64, x, y *float64)

// detectTile returns the best tile this machine runs: AVX-512, else AVX2
// with FMA, else the portable tile (internal/cpufeat).
func detectTile() int {
	switch {
	case cpufeat.AVX512F():
		return tileAVX512
	case cpufeat.AVX2FMA():
		return tileAVX2
	}
	return tileGo
}

// tileKind is the tile in use; bestTile the best this machine runs (tests
// select each kind up to it).
var (
	bestTile = detectTile()
	tileKind = bestTile
)

// tileAsm runs the assembly tile of tileKind, fused or not, on slices; the
// caller (tileAdd) has checked the lengths.
func tileAsm(kc int, a, b, c []float64, ldc int, fused bool) {
	switch {
	case tileKind == tileAVX512 && fused:
		tile4x24(kc, &a[0], &b[0], &c[0], ldc)
	case tileKind == tileAVX512:
		tile4x24Sep(kc, &a[0], &b[0], &c[0], ldc)
	case fused:
		tile4x12(kc, &a[0], &b[0], &c[0], ldc)
	default:
		tile4x12Sep(kc, &a[0], &b[0], &c[0], ldc)
	}
}

// tileDirectAsm is tileAsm with A's four rows read in place at a[0],
// a[lda], a[2·lda], a[3·lda]; the caller (tileDirect) checks the lengths.
func tileDirectAsm(kc int, a []float64, lda int, b, c []float64, ldc int, fused bool) {
	switch {
	case tileKind == tileAVX512 && fused:
		tile4x24D(kc, &a[0], lda, &b[0], &c[0], ldc)
	case tileKind == tileAVX512:
		tile4x24SepD(kc, &a[0], lda, &b[0], &c[0], ldc)
	case fused:
		tile4x12D(kc, &a[0], lda, &b[0], &c[0], ldc)
	default:
		tile4x12SepD(kc, &a[0], lda, &b[0], &c[0], ldc)
	}
}

// rowDot returns Σ x_i·y_i (len(x) = len(y)), with the AVX2 kernel when
// the tile in use is an assembly one.
func rowDot(x, y []float64) float64 {
	if tileKind == tileGo || len(x) == 0 {
		return dotGo(x, y)
	}
	_ = y[len(x)-1]
	return dotAsm(len(x), &x[0], &y[0])
}

// rowAxpy sets y += alpha·x (len(x) = len(y)), as rowDot.
func rowAxpy(alpha float64, x, y []float64) {
	if tileKind == tileGo || len(x) == 0 {
		axpyGo(alpha, x, y)
		return
	}
	_ = y[len(x)-1]
	axpyAsm(len(x), alpha, &x[0], &y[0])
}
