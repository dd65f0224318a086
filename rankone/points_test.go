package rankone_test

import (
	"context"
	"errors"
	"math"
	"math/cmplx"
	"math/rand/v2"
	"testing"

	"github.com/segre-lab/segre/internal/reference"
	"github.com/segre-lab/segre/rankone"

	"gonum.org/v1/gonum/mat"

	"github.com/segre-lab/segre/rankone/suite"
	"github.com/segre-lab/segre/subspace"
)

// spanOf returns the span of a_i b_iᵀ, scrambled by a random invertible
// mixing (the points of W are then exactly ±(a_i, b_i): derived, since for
// A, B of full column rank r ≤ min(m, n), Σ c_i a_i b_iᵀ has rank #{c_i ≠ 0}).
func spanOf(rng *rand.Rand, a, b [][]float64) subspace.Basis {
	r, m, n := len(a), len(a[0]), len(b[0])
	L := m * n
	d := make([]float64, r*L)
	for t := 0; t < r; t++ {
		for s := 0; s < r; s++ {
			c := rng.NormFloat64()
			for i := 0; i < m; i++ {
				for j := 0; j < n; j++ {
					d[t*L+i*n+j] += c * a[s][i] * b[s][j]
				}
			}
		}
	}
	return subspace.Basis{Count: r, Rows: m, Cols: n, Data: d}
}

// gauss is a random unit vector (reference.RandUnit).
func gauss(rng *rand.Rand, n int) []float64 { return reference.RandUnit(rng, n) }

func matchAll(t *testing.T, pts []rankone.Point, a, b [][]float64) {
	t.Helper()
	if len(pts) != len(a) {
		t.Fatalf("%d points, want %d", len(pts), len(a))
	}
	for s := range a {
		found := false
		for _, p := range pts {
			if math.Abs(dotv(p.X, a[s]))*math.Abs(dotv(p.Y, b[s])) > 1-1e-9 {
				found = true
			}
		}
		if !found {
			t.Errorf("component %d not recovered", s)
		}
	}
	for _, p := range pts {
		if p.Upper > 1e-8 {
			t.Errorf("point with certified distance %v", p.Upper)
		}
	}
}

func TestPointsJennrich(t *testing.T) {
	rng := rand.New(rand.NewPCG(21, 22))
	for _, c := range []struct{ m, n, r int }{{5, 7, 4}, {6, 6, 6}, {3, 9, 3}, {8, 4, 1}} {
		a, b := make([][]float64, c.r), make([][]float64, c.r)
		for s := range a {
			a[s], b[s] = gauss(rng, c.m), gauss(rng, c.n)
		}
		basis := spanOf(rng, a, b)
		for _, rot := range []bool{false, true} {
			in := suite.Instance{Basis: basis, X0: a[0], Y0: b[0]}
			aa, bb := a, b
			if rot {
				// Rotated copy: the points are the rotated components (derived in
				// suite.Rotated); here their number and certificates are checked.
				in = suite.Rotated(in, 3)
				aa, bb = nil, nil
			}
			w, err := subspace.New(context.Background(), in.Basis, subspace.Options{})
			if err != nil {
				t.Fatal(err)
			}
			pts, err := (&rankone.AllPoints{Seed: 1}).Points(context.Background(), w)
			if err != nil {
				t.Fatalf("%v rot=%v: %v", c, rot, err)
			}
			if aa != nil {
				matchAll(t, pts, aa, bb)
			} else if len(pts) != c.r {
				t.Errorf("%v rotated: %d points, want %d", c, len(pts), c.r)
			}
			for _, p := range pts {
				if p.Upper > 1e-8 {
					t.Errorf("rotated point with certified distance %v", p.Upper)
				}
			}
		}
	}
}

// 2×n at dimension n: the number of real points equals the number of real
// generalised eigenvalues of the pencil, computed here independently: W⊥
// from gonum's SVD of the input basis, then gonum's Eigen of −K₂⁻¹K₁.
func TestPointsPencilCount(t *testing.T) {
	rng := rand.New(rand.NewPCG(23, 24))
	for trial := 0; trial < 6; trial++ {
		n := 3 + trial%4
		in := suite.Random(2, n, n, uint64(trial))
		w, err := subspace.New(context.Background(), in.Basis, subspace.Options{})
		if err != nil {
			t.Fatal(err)
		}
		pts, err := (&rankone.AllPoints{Seed: 2}).Points(context.Background(), w)
		if err != nil {
			t.Fatalf("n=%d: %v", n, err)
		}
		// Independent count.
		L := 2 * n
		a := mat.NewDense(L, n, nil)
		for c := 0; c < n; c++ {
			for l := 0; l < L; l++ {
				a.Set(l, c, in.Basis.Data[c*L+l])
			}
		}
		var svd mat.SVD
		svd.Factorize(a, mat.SVDFull)
		var u mat.Dense
		svd.UTo(&u)
		k1, k2 := mat.NewDense(n, n, nil), mat.NewDense(n, n, nil)
		for j := 0; j < n; j++ {
			for q := 0; q < n; q++ {
				k1.Set(j, q, u.At(q, n+j))   // N_j[0, q]
				k2.Set(j, q, u.At(n+q, n+j)) // N_j[1, q]
			}
		}
		var m mat.Dense
		m.Solve(k2, k1)
		var eg mat.Eigen
		eg.Factorize(&m, mat.EigenNone)
		real := 0
		for _, v := range eg.Values(nil) {
			if math.Abs(imag(v)) <= 1e-8*(1+cmplx.Abs(v)) {
				real++
			}
		}
		if len(pts) != real {
			t.Errorf("n=%d: %d points, gonum counts %d real eigenvalues", n, len(pts), real)
		}
		for _, p := range pts {
			if p.Upper > 1e-8 {
				t.Errorf("point with certified distance %v", p.Upper)
			}
		}
	}
	// n planted real rank-one matrices: all n found.
	for _, n := range []int{3, 5, 8} {
		a, b := make([][]float64, n), make([][]float64, n)
		for s := range a {
			a[s], b[s] = gauss(rng, 2), gauss(rng, n)
		}
		w, _ := subspace.New(context.Background(), spanOf(rng, a, b), subspace.Options{})
		pts, err := (&rankone.AllPoints{}).Points(context.Background(), w)
		if err != nil {
			t.Fatal(err)
		}
		matchAll(t, pts, a, b)
	}
}

// Failure modes are reported, never a wrong certified point.
func TestPointsFailures(t *testing.T) {
	rng := rand.New(rand.NewPCG(25, 26))
	ctx := context.Background()
	// Too many terms: dim 7 > min(4, 5).
	w, _ := subspace.New(context.Background(), suite.Random(4, 5, 7, 1).Basis, subspace.Options{})
	if _, err := (&rankone.AllPoints{}).Points(ctx, w); !errors.Is(err, rankone.ErrTooManyTerms) {
		t.Errorf("r > min(m, n): %v", err)
	}
	// span{I, J} embedded in the top-left 2×2 block of 3×3 matrices: column
	// and row spaces of dimension 2 = dim W, but aI + bJ is invertible unless
	// a = b = 0 (derived), so there is no real rank-one point: complex
	// eigenvalues.
	b := subspace.Basis{Count: 2, Rows: 3, Cols: 3, Data: []float64{
		1, 0, 0, 0, 1, 0, 0, 0, 0,
		0, -1, 0, 1, 0, 0, 0, 0, 0,
	}}
	w, _ = subspace.New(context.Background(), b, subspace.Options{})
	if _, err := (&rankone.AllPoints{}).Points(ctx, w); !errors.Is(err, rankone.ErrComplex) {
		t.Errorf("no real points: %v", err)
	}
	// span{I, diag(J, 1)}: the column space is all of R³ > dim W = 2.
	b = subspace.Basis{Count: 2, Rows: 3, Cols: 3, Data: []float64{
		1, 0, 0, 0, 1, 0, 0, 0, 1,
		0, -1, 0, 1, 0, 0, 0, 0, 1,
	}}
	w, _ = subspace.New(context.Background(), b, subspace.Options{})
	if _, err := (&rankone.AllPoints{}).Points(ctx, w); !errors.Is(err, rankone.ErrNotSpanned) {
		t.Errorf("column space too large: %v", err)
	}
	// Noise: the planted span perturbed by 1e-3 contains no rank-one matrix.
	a, bb := [][]float64{gauss(rng, 4), gauss(rng, 4)}, [][]float64{gauss(rng, 5), gauss(rng, 5)}
	nb := spanOf(rng, a, bb)
	for i := range nb.Data {
		nb.Data[i] += 1e-3 * rng.NormFloat64()
	}
	w, _ = subspace.New(context.Background(), nb, subspace.Options{})
	if _, err := (&rankone.AllPoints{}).Points(ctx, w); !errors.Is(err, rankone.ErrNotSpanned) {
		t.Errorf("noisy span, strict: %v", err)
	}
	pts, err := (&rankone.AllPoints{Noisy: true}).Points(ctx, w)
	if !errors.Is(err, rankone.ErrNotRankOne) {
		t.Errorf("noisy span, Noisy: %v", err)
	}
	for _, p := range pts {
		if u, _ := rankone.Verify(w, p.X, p.Y); u != p.Upper {
			t.Errorf("point Upper %v ≠ rankone.Verify %v", p.Upper, u)
		}
	}
	// Nearly parallel components (angle 1e-12): either an error, or points
	// that are certified and distinct.
	a0 := gauss(rng, 4)
	a1 := append([]float64(nil), a0...)
	a1[0] += 1e-12
	w, _ = subspace.New(context.Background(), spanOf(rng, [][]float64{a0, a1, gauss(rng, 4)}, [][]float64{gauss(rng, 4), gauss(rng, 4), gauss(rng, 4)}), subspace.Options{})
	pts, err = (&rankone.AllPoints{}).Points(ctx, w)
	if err == nil {
		for _, p := range pts {
			if p.Upper > 1e-8 {
				t.Errorf("accepted point with distance %v", p.Upper)
			}
		}
	}
}
