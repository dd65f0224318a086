//go:build !amd64 || purego

package subspace

// No assembly tile on this architecture or in the purego build: the
// blocked products use the portable tile of gemm.go.

var bestTile, tileKind = tileGo, tileGo

func tileAsm(kc int, a, b, c []float64, ldc int, fused bool) { panic("subspace: no assembly tile") }

func tileDirectAsm(kc int, a []float64, lda int, b, c []float64, ldc int, fused bool) {
	panic("subspace: no assembly tile")
}

func rowDot(x, y []float64) float64 { return dotGo(x, y) }

func rowAxpy(alpha float64, x, y []float64) { axpyGo(alpha, x, y) }
