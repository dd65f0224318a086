//go:build !amd64 || purego

package sdp

// No kernels on this architecture or in the purego build: products and the
// Schur complement's factorisation go through gonum's BLAS, and the Schur
// complement's entries are summed by the portable loop of schur.go.

var useKernels, kernelsAvailable = false, false

func tileKernel(kc int, a, b, c []float64, ldc int) { panic("sdp: no tile kernel") }

func pairKernel(rec, rev []float64, ps, qs []int32, vs, out []float64) {
	panic("sdp: no pair kernel")
}
