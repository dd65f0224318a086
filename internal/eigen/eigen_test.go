package eigen

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// topTridiag agrees with gonum's EigenSym (reference library) on random
// tridiagonal matrices, including tiny off-diagonals (near-decoupled blocks).
func TestTopTridiag(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	for trial := 0; trial < 300; trial++ {
		k := 1 + rng.IntN(30)
		a, b := make([]float64, k), make([]float64, k-1)
		for i := range a {
			a[i] = rng.NormFloat64()
		}
		for i := range b {
			b[i] = rng.NormFloat64()
			if trial%3 == 0 {
				b[i] *= 1e-9
			}
		}
		tm := mat.NewSymDense(k, nil)
		for i := 0; i < k; i++ {
			tm.SetSym(i, i, a[i])
			if i+1 < k {
				tm.SetSym(i, i+1, b[i])
			}
		}
		var es mat.EigenSym
		es.Factorize(tm, false)
		vals := es.Values(nil)
		s := make([]float64, k)
		th, ok := topTridiag(a, b, s)
		if !ok {
			continue // the caller falls back to EigenSym
		}
		if math.Abs(th-vals[k-1]) > 1e-13*math.Max(1, math.Abs(vals[k-1])) {
			t.Fatalf("k=%d: θ = %v, gonum %v", k, th, vals[k-1])
		}
		// Residual ‖Ts − θs‖ small (derived: s is an eigenvector to rounding).
		var r float64
		for i := 0; i < k; i++ {
			v := (a[i] - th) * s[i]
			if i > 0 {
				v += b[i-1] * s[i-1]
			}
			if i+1 < k {
				v += b[i] * s[i+1]
			}
			r += v * v
		}
		if gap := vals[k-1] - func() float64 {
			if k > 1 {
				return vals[k-2]
			}
			return math.Inf(-1)
		}(); gap > 1e-6 && math.Sqrt(r) > 1e-10 {
			t.Fatalf("k=%d: residual %v", k, math.Sqrt(r))
		}
	}
}
