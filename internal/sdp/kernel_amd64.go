//go:build amd64 && !purego

package sdp

import "github.com/segre-lab/segre/internal/cpufeat"

// The amd64 kernels (kernel_amd64.s): the 4×12 tile of the products and of
// the Schur complement's factorisation (tiles.go), and the entry sums of
// the Schur complement's assembly (schur.go). They are used when the
// processor and the operating system support AVX2 and FMA; the build tag
// purego selects the portable code everywhere.

//go:noescape
func tile4x12(kc int, a, b, c *float64, ldc int)

//go:noescape
func pairDots(rec, rev *float64, ps, qs *int32, vs, out *float64, n int)

// useKernels selects the kernels; kernelsAvailable records whether they
// can be selected (tests run both paths).
var (
	useKernels       = cpufeat.AVX2FMA()
	kernelsAvailable = useKernels
)

// tileKernel runs tile4x12 on slices (the caller, kernel in tiles.go,
// checks the lengths).
func tileKernel(kc int, a, b, c []float64, ldc int) {
	tile4x12(kc, &a[0], &b[0], &c[0], ldc)
}

// pairKernel runs pairDots on slices: out[f] for f < len(vs). The caller
// guarantees len(ps), len(qs), len(out) ≥ len(vs) and that every index in
// ps and qs addresses a record of 8 inside rec and rev.
func pairKernel(rec, rev []float64, ps, qs []int32, vs, out []float64) {
	if len(vs) > 0 {
		pairDots(&rec[0], &rev[0], &ps[0], &qs[0], &vs[0], &out[0], len(vs))
	}
}
