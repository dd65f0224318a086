//go:build amd64 && !purego

package cpufeat

func cpuid(eaxArg, ecxArg uint32) (eax, ebx, ecx, edx uint32)

func xgetbv0() (eax, edx uint32)

// detect reads CPUID and XCR0: AVX2 and FMA with the YMM state enabled by
// the operating system (OSXSAVE, bits 1–2 of XCR0), and AVX-512F on top
// with the opmask and ZMM state enabled (bits 5–7), as the Intel 64 and
// IA-32 Architectures Software Developer's Manual (vol. 1, §14.3 and
// §15.2) prescribes before using them.
func detect() (avx2FMA, avx512 bool) {
	maxLeaf, _, _, _ := cpuid(0, 0)
	if maxLeaf < 7 {
		return false, false
	}
	_, _, c1, _ := cpuid(1, 0)
	const fma, osxsave, avx = 1 << 12, 1 << 27, 1 << 28
	if c1&fma == 0 || c1&osxsave == 0 || c1&avx == 0 {
		return false, false
	}
	xcr0, _ := xgetbv0()
	if xcr0&6 != 6 {
		return false, false
	}
	_, b7, _, _ := cpuid(7, 0)
	const avx2, avx512f = 1 << 5, 1 << 16
	if b7&avx2 == 0 {
		return false, false
	}
	return true, b7&avx512f != 0 && xcr0&0xe0 == 0xe0
}
