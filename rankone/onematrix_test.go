package rankone

import (
	"context"
	"math"
	"math/big"
	"math/rand/v2"
	"testing"

	"github.com/segre-lab/segre/subspace"
)

// For one matrix the flattening Lower resolves tiny distances (issue 11:
// it was 0 for every d* below about 5e-8). span{diag(1, t)}: d*² = t²/(1+t²)
// for the stored vector exactly (Eckart–Young for one matrix, common
// practice), computed here in big.Rat from the stored entries themselves.
// The bound must hold (Lower² ≤ d*², exactly) and resolve d* to 1% for
// t ≥ 1e-13 (derived: the bound's absolute slack is a few units of
// 2⁻⁵³ on σ₂ ≈ t, so 1% needs t ≳ 1e-13).
func TestOneMatrixTinyDistance(t *testing.T) {
	for _, tv := range []float64{1e-3, 1e-7, 3e-9, 1e-10, 1e-12, 1e-13, 1e-15, 0} {
		b := subspace.Basis{Count: 1, Rows: 2, Cols: 2, Data: []float64{1, 0, 0, tv}}
		w, err := subspace.New(context.Background(), b, subspace.Options{})
		if err != nil {
			t.Fatal(err)
		}
		q := w.Stored().Vector(0, nil)
		d2 := exactOneMatrixD2(q)
		_, lo := FlatteningBound(context.Background(), w)
		l2 := new(big.Rat).SetFloat64(lo)
		l2.Mul(l2, l2)
		if l2.Cmp(d2) > 0 {
			t.Fatalf("t = %g: Lower %g above d*", tv, lo)
		}
		want, _ := d2.Float64()
		want = math.Sqrt(want)
		if tv >= 1e-13 && lo < 0.99*want {
			t.Errorf("t = %g: Lower %g, d* = %g: not resolved to 1%%", tv, lo, want)
		}
		// The witness side agrees: Verify at (e1, e1) gives an Upper ≥ d*.
		up, err := Verify(w, []float64{1, 0}, []float64{1, 0})
		if err != nil || up < lo {
			t.Errorf("t = %g: Upper %g below Lower %g (%v)", tv, up, lo, err)
		}
	}
}

// exactOneMatrixD2 returns d*² = q₂₂²/(q₁₁² + q₂₂²) for a stored 2×2
// vector that is diagonal (asserted), in exact rational arithmetic.
func exactOneMatrixD2(q []float64) *big.Rat {
	if q[1] != 0 || q[2] != 0 {
		panic("not diagonal")
	}
	a := new(big.Rat).SetFloat64(q[0])
	d := new(big.Rat).SetFloat64(q[3])
	a.Mul(a, a)
	d.Mul(d, d)
	if d.Cmp(a) > 0 {
		a, d = d, a
	}
	den := new(big.Rat).Add(a, d)
	return d.Quo(d, den)
}

// On random near-rank-one matrices A = x yᵀ + t·E (5×7), the one-matrix
// Lower never exceeds the Upper of the best local search and resolves d*
// to within 10% of it (the local search finds the top singular pair, so its
// Upper is d* to rounding; derived tolerance: the bound's slack is a few
// units of u on σ₂ ≥ t·σ_min(E) ≫ 1e-14 for t ≥ 1e-11).
func TestOneMatrixAgainstLocalSearch(t *testing.T) {
	rng := rand.New(rand.NewPCG(31, 32))
	for trial := 0; trial < 40; trial++ {
		m, n := 5, 7
		tv := math.Pow(10, -float64(1+trial%11))
		a := make([]float64, m*n)
		x, y := make([]float64, m), make([]float64, n)
		for i := range x {
			x[i] = rng.NormFloat64()
		}
		for j := range y {
			y[j] = rng.NormFloat64()
		}
		for i := 0; i < m; i++ {
			for j := 0; j < n; j++ {
				a[i*n+j] = x[i]*y[j] + tv*rng.NormFloat64()
			}
		}
		w, err := subspace.New(context.Background(), subspace.Basis{Count: 1, Rows: m, Cols: n, Data: a}, subspace.Options{})
		if err != nil {
			t.Fatal(err)
		}
		_, lo := FlatteningBound(context.Background(), w)
		res, err := (&ALS{}).Search(context.Background(), w)
		if err != nil {
			t.Fatal(err)
		}
		if lo > res.Upper {
			t.Fatalf("t = %g: Lower %g above Upper %g", tv, lo, res.Upper)
		}
		if lo < 0.9*res.Upper {
			t.Errorf("t = %g: Lower %g not within 10%% of Upper %g", tv, lo, res.Upper)
		}
	}
}
