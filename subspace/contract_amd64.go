//go:build amd64 && !purego

package subspace

import "github.com/segre-lab/segre/internal/cpufeat"

// The contraction kernels of contract_amd64.s: dotRows4 and axpyRowsAcc
// (AVX, every product rounded and then added) do the same sums in the same
// order as dotRowGo and axpyRowsGo, gramTile4x8 (FMA) the same fused
// multiply-adds as gramTileGo, so the results are the same bit for bit.
// They run when the processor and the operating system support AVX2 and
// FMA.

//go:noescape
func dotRows4(rows, n4 int, a *float64, lda int, y, out *float64)

//go:noescape
func axpyRowsAcc(m, nc int, x, a *float64, lda int, out *float64)

//go:noescape
func gramTile4x8(s int, a, b *float64, ld int, c *float64, ldc int)

// contractAsm selects the assembly kernels; tests switch it off to
// compare them with the portable code.
var contractAsm = cpufeat.AVX2FMA()

// dotRows4Asm and axpyRowsAccAsm call the kernels on slices whose lengths
// the callers (dotRows, axpyRows) have checked.
func dotRows4Asm(rows, n4 int, a []float64, lda int, y, out []float64) {
	dotRows4(rows, n4, &a[0], lda, &y[0], &out[0])
}

func axpyRowsAccAsm(m, nc int, x, a []float64, lda int, out []float64) {
	axpyRowsAcc(m, nc, &x[0], &a[0], lda, &out[0])
}

func gramTile4x8Asm(s int, a, b []float64, ld int, c []float64, ldc int) {
	gramTile4x8(s, &a[0], &b[0], ld, &c[0], ldc)
}
