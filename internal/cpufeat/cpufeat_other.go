//go:build !amd64 || purego

package cpufeat

// detect reports no vector extensions: other architectures and the purego
// build use the portable code.
func detect() (avx2FMA, avx512 bool) { return false, false }
