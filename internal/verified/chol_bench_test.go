package verified

import (
	"math/rand/v2"
	"testing"
)

// BenchmarkCholeskyForms times the verified test's factorisation at order 32
// (branch-and-bound's cell matrices at 3×32): the one-at-a-time reference
// form against the two-rows-at-a-time form it must equal bit for bit.
func BenchmarkCholeskyForms(b *testing.B) {
	rng := rand.New(rand.NewPCG(1, 2))
	n := 32
	a := make([]float64, n*n)
	for i := 0; i < n; i++ {
		for j := 0; j <= i; j++ {
			v := rng.NormFloat64()
			a[i*n+j], a[j*n+i] = v, v
		}
		a[i*n+i] += 3 * float64(n)
	}
	l := make([]float64, n*n)
	b.Run("row", func(b *testing.B) {
		for b.Loop() {
			rowCholesky(a, l, n, 0)
		}
	})
	b.Run("pairs", func(b *testing.B) {
		for b.Loop() {
			shiftedCholesky(a, l, n, 0, nil)
		}
	})
}
