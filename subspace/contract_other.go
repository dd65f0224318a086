//go:build !amd64 || purego

package subspace

// No contraction kernels on this architecture or in the purego build:
// dotRowGo, axpyRowsGo and gramTileGo do the same sums.

var contractAsm = false

func dotRows4Asm(rows, n4 int, a []float64, lda int, y, out []float64) {
	panic("subspace: no assembly contraction kernel")
}

func axpyRowsAccAsm(m, nc int, x, a []float64, lda int, out []float64) {
	panic("subspace: no assembly contraction kernel")
}

func gramTile4x8Asm(s int, a, b []float64, ld int, c []float64, ldc int) {
	panic("subspace: no assembly contraction kernel")
}
