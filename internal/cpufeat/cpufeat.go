// Package cpufeat reports the processor's vector extensions, for the
// module's two assembly kernels (internal/sdp's solver and subspace's
// factorisation), which are selected at run time. It says false for every
// extension on other architectures and in the purego build.
package cpufeat

var avx2FMA, avx512 = detect()

// AVX2FMA reports AVX2 and FMA, with the operating system's support for
// their registers.
func AVX2FMA() bool { return avx2FMA }

// AVX512F reports AVX-512F (and AVX2 and FMA), with the operating
// system's support for its registers.
func AVX512F() bool { return avx512 }
