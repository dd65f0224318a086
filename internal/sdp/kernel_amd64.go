//go:build amd64 && !purego

package sdp

// The amd64 kernels (kernel_amd64.s): the 4×12 tile of the products and of
// the Schur complement's factorisation (tiles.go), and the entry sums of
// the Schur complement's assembly (schur.go). They are used when the
// processor and the operating system support AVX2 and FMA; the build tag
// purego selects the portable code everywhere.

//go:noescape
func tile4x12(kc int, a, b, c *float64, ldc int)

//go:noescape
func pairDots(rec, rev *float64, ps, qs *int32, vs, out *float64, n int)

func cpuid(eaxArg, ecxArg uint32) (eax, ebx, ecx, edx uint32)

func xgetbv0() (eax, edx uint32)

// haveKernels reports AVX2 and FMA in the processor (CPUID leaves 1 and 7)
// and the YMM state enabled by the operating system (OSXSAVE, and bits 1–2
// of XCR0), as the Intel 64 and IA-32 Architectures Software Developer's
// Manual (vol. 1, §14.3) prescribes before using AVX.
func haveKernels() bool {
	maxLeaf, _, _, _ := cpuid(0, 0)
	if maxLeaf < 7 {
		return false
	}
	_, _, c1, _ := cpuid(1, 0)
	const fma, osxsave, avx = 1 << 12, 1 << 27, 1 << 28
	if c1&fma == 0 || c1&osxsave == 0 || c1&avx == 0 {
		return false
	}
	if xcr0, _ := xgetbv0(); xcr0&6 != 6 {
		return false
	}
	_, b7, _, _ := cpuid(7, 0)
	const avx2 = 1 << 5
	return b7&avx2 != 0
}

// useKernels selects the kernels; kernelsAvailable records whether they
// can be selected (tests run both paths).
var (
	useKernels       = haveKernels()
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
