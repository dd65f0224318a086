package verified

import (
	"math"
	"math/rand/v2"
	"testing"
)

// rowCholesky is the row-by-row (left-looking) form of shiftedCholesky, the
// form the package used before: the reference that the two-rows-at-a-time form
// must reproduce bit for bit (see shiftedCholesky).
func rowCholesky(a, l []float64, n int, s float64) (float64, bool) {
	var maxDiag float64
	for i := 0; i < n; i++ {
		for j := 0; j < i; j++ {
			l[i*n+j] = a[i*n+j]
		}
		d := a[i*n+i] - s
		l[i*n+i] = d
		maxDiag = math.Max(maxDiag, math.Abs(d))
	}
	var frob, maxL float64
	for i := 0; i < n; i++ {
		ri := l[i*n : i*n+i+1]
		for j := 0; j < i; j++ {
			rj := l[j*n : j*n+j]
			v := ri[j]
			for k := range rj {
				v -= float64(ri[k] * rj[k])
			}
			v /= l[j*n+j]
			ri[j] = v
			frob += float64(v * v)
		}
		d := ri[i]
		for k := 0; k < i; k++ {
			d -= float64(ri[k] * ri[k])
		}
		if !(d > 0) || math.IsInf(d, 0) {
			return 0, false
		}
		ri[i] = math.Sqrt(d)
		frob += d
		maxL = math.Max(maxL, ri[i])
	}
	return choleskyBound(n, s, frob, maxDiag, maxL)
}

// TestCholeskyFormsAgree checks that the two-rows-at-a-time factorisation gives
// the row-by-row form's bound bit for bit, and fails exactly when it fails,
// on random symmetric matrices of orders 1 to 40 with shifts on both sides
// of λmin (so both outcomes occur), including entries of mixed magnitude and
// infinities. Reference: rowCholesky above (derived here: the same
// operations in the same order, see shiftedCholesky).
func TestCholeskyFormsAgree(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 11))
	var ok, failed int
	for trial := 0; trial < 3000; trial++ {
		n := 1 + rng.IntN(40)
		a := make([]float64, n*n)
		for i := 0; i < n; i++ {
			for j := 0; j <= i; j++ {
				v := rng.NormFloat64()
				if trial%7 == 0 {
					v *= math.Ldexp(1, rng.IntN(80)-40)
				}
				a[i*n+j], a[j*n+i] = v, v
			}
			a[i*n+i] += float64(n) * rng.Float64() * 2
		}
		if trial%97 == 0 {
			i := rng.IntN(n)
			a[i*n+rng.IntN(i+1)] = math.Inf(1)
		}
		s := -float64(n) * (rng.Float64() - 0.3)
		l1, l2 := make([]float64, n*n), make([]float64, n*n)
		b1, ok1 := rowCholesky(a, l1, n, s)
		b2, ok2 := shiftedCholesky(a, l2, n, s, nil)
		if ok1 != ok2 || math.Float64bits(b1) != math.Float64bits(b2) {
			t.Fatalf("trial %d (n = %d, s = %g): row form (%v, %v), two rows at a time (%v, %v)", trial, n, s, b1, ok1, b2, ok2)
		}
		if ok1 {
			ok++
		} else {
			failed++
		}
	}
	if ok < 300 || failed < 300 {
		t.Fatalf("the trials did not exercise both outcomes: %d passed, %d failed", ok, failed)
	}
}
