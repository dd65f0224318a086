package rankone_test

import (
	"context"
	"errors"
	"fmt"
	"math"
	"math/cmplx"
	"math/rand/v2"
	"sort"
	"testing"

	"github.com/segre-lab/segre/rankone"
	"github.com/segre-lab/segre/rankone/suite"
	"github.com/segre-lab/segre/subspace"
)

func cgauss(rng *rand.Rand, n int) []complex128 {
	v := make([]complex128, n)
	var s float64
	for i := range v {
		v[i] = complex(rng.NormFloat64(), rng.NormFloat64())
		s += real(v[i])*real(v[i]) + imag(v[i])*imag(v[i])
	}
	for i := range v {
		v[i] /= complex(math.Sqrt(s), 0)
	}
	return v
}

// complexSpanOf returns the span of x_t y_tᵀ scrambled by a random complex
// mixing (derived, as spanOf over R: for X, Y of full column rank k ≤
// min(m, n), Σ c_t x_t y_tᵀ = X diag(c) Yᵀ has rank #{c_t ≠ 0}, so the
// rank-one points of the span are exactly the x_t y_tᵀ up to scale; this is
// the uniqueness behind Jennrich's algorithm, Harshman 1970, Leurgans,
// Ross, Abel, SIAM J. Matrix Anal. Appl. 14, 1993, which holds over C).
func complexSpanOf(rng *rand.Rand, xs, ys [][]complex128) subspace.ComplexBasis {
	k, m, n := len(xs), len(xs[0]), len(ys[0])
	L := m * n
	d := make([]complex128, k*L)
	for t := 0; t < k; t++ {
		for s := 0; s < k; s++ {
			c := complex(rng.NormFloat64(), rng.NormFloat64())
			for i := 0; i < m; i++ {
				for j := 0; j < n; j++ {
					d[t*L+i*n+j] += c * xs[s][i] * ys[s][j]
				}
			}
		}
	}
	return subspace.ComplexBasis{Count: k, Rows: m, Cols: n, Data: d}
}

// cos returns |⟨a, b⟩|/(‖a‖‖b‖) for complex vectors (Hermitian product):
// 1 exactly when a and b are equal up to a complex scalar.
func cos(a, b []complex128) float64 {
	var d complex128
	var na, nb float64
	for i := range a {
		d += cmplx.Conj(a[i]) * b[i]
		na += real(a[i])*real(a[i]) + imag(a[i])*imag(a[i])
		nb += real(b[i])*real(b[i]) + imag(b[i])*imag(b[i])
	}
	return cmplx.Abs(d) / math.Sqrt(na*nb)
}

func newComplex(t *testing.T, b subspace.ComplexBasis) *subspace.Subspace {
	t.Helper()
	w, err := subspace.NewComplex(context.Background(), b, subspace.Options{})
	if err != nil {
		t.Fatal(err)
	}
	return w
}

// checkComplexPoints checks what every returned point must satisfy:
// real-coordinate witness, Upper equal to a fresh VerifyComplex (so it is
// certified), at most tol, and pairwise distinct points (Noisy keeps
// coinciding points: pass noisy).
func checkComplexPoints(t *testing.T, w *subspace.Subspace, pts []rankone.ComplexPoint, tol float64, noisy ...bool) {
	t.Helper()
	for i, p := range pts {
		if len(p.X) != w.Rows() || len(p.Y) != w.Cols() {
			t.Fatalf("point %d: lengths %d, %d, want %d, %d", i, len(p.X), len(p.Y), w.Rows(), w.Cols())
		}
		u, err := rankone.VerifyComplex(w, p.X, p.Y)
		if err != nil || u != p.Upper {
			t.Errorf("point %d: Upper %v, VerifyComplex %v (%v)", i, p.Upper, u, err)
		}
		if p.Upper > tol {
			t.Errorf("point %d: certified complex distance %v > %v", i, p.Upper, tol)
		}
		for j := 0; j < i && len(noisy) == 0; j++ {
			xi, yi := pts[i].Vectors()
			xj, yj := pts[j].Vectors()
			if cos(xi, xj)*cos(yi, yj) > 1-1e-9 {
				t.Errorf("points %d and %d coincide", i, j)
			}
		}
	}
}

// matchComplex reports whether every planted (x_t, y_t) is among the
// points up to a complex scalar, to 1e-9 in the cosines (common practice:
// backward-stable steps on well-conditioned random data, as in
// TestPointsJennrich).
func matchComplex(t *testing.T, pts []rankone.ComplexPoint, xs, ys [][]complex128) {
	t.Helper()
	if len(pts) != len(xs) {
		t.Fatalf("%d points, want %d", len(pts), len(xs))
	}
	for s := range xs {
		found := false
		for _, p := range pts {
			x, y := p.Vectors()
			if cos(x, xs[s])*cos(y, ys[s]) > 1-1e-9 {
				found = true
			}
		}
		if !found {
			t.Errorf("planted point %d not recovered", s)
		}
	}
}

// Planted complex points (Jennrich over C): W spanned by k random complex
// x_t y_tᵀ, k ≤ min(m, n), contains exactly those points (complexSpanOf);
// after rotating by random unitaries the count is unchanged
// (suite.RotatedComplex).
func TestComplexPointsJennrich(t *testing.T) {
	rng := rand.New(rand.NewPCG(81, 82))
	for _, c := range []struct{ m, n, k int }{{5, 7, 4}, {6, 6, 6}, {3, 9, 3}, {8, 4, 1}, {1, 3, 1}, {4, 4, 3}} {
		t.Run(fmt.Sprintf("%dx%d/k%d", c.m, c.n, c.k), func(t *testing.T) {
			xs, ys := make([][]complex128, c.k), make([][]complex128, c.k)
			for s := range xs {
				xs[s], ys[s] = cgauss(rng, c.m), cgauss(rng, c.n)
			}
			in := suite.ComplexInstance{Basis: complexSpanOf(rng, xs, ys)}
			for _, rot := range []bool{false, true} {
				if rot {
					in = suite.RotatedComplex(in, 7)
				}
				w := newComplex(t, in.Basis)
				pts, err := (&rankone.AllPoints{Seed: 1}).ComplexPoints(context.Background(), w)
				if err != nil {
					t.Fatalf("rot=%v: %v", rot, err)
				}
				if !rot {
					matchComplex(t, pts, xs, ys)
				} else if len(pts) != c.k {
					t.Errorf("rotated: %d points, want %d", len(pts), c.k)
				}
				checkComplexPoints(t, w, pts, 1e-8)
			}
		})
	}
}

// span{I, J} (J the rotation by 90°) over C contains exactly the two
// points (I ∓ iJ)/2 = (1, ∓i)(1, ±i)ᵀ/2 up to scale (derived here:
// det(aI + bJ) = a² + b² = 0 iff b = ±ia, and I − iJ = [[1, i], [−i, 1]]);
// over R it contains none (a² + b² > 0 unless a = b = 0), and the real
// AllPoints finds none. Embedded in the top-left block of 3×3 matrices
// (the real case of TestPointsFailures, ErrComplex over R) the same two
// points are found over C by simultaneous diagonalisation.
func TestComplexPointsPencilIJ(t *testing.T) {
	ctx := context.Background()
	r := complex(1/math.Sqrt2, 0)
	wantX := [][]complex128{{r, -1i * r}, {r, 1i * r}}
	wantY := [][]complex128{{r, 1i * r}, {r, -1i * r}}
	ij := suite.PencilIJ()
	w := suite.MustNewComplex(t, ij)
	pts, err := (&rankone.AllPoints{}).ComplexPoints(ctx, w)
	if err != nil {
		t.Fatal(err)
	}
	matchComplex(t, pts, wantX, wantY)
	checkComplexPoints(t, w, pts, 1e-8)

	wr, err := subspace.New(ctx, subspace.Basis{Count: 2, Rows: 2, Cols: 2, Data: []float64{1, 0, 0, 1, 0, -1, 1, 0}}, subspace.Options{})
	if err != nil {
		t.Fatal(err)
	}
	if rp, err := (&rankone.AllPoints{}).Points(ctx, wr); err != nil || len(rp) != 0 {
		t.Errorf("over R: %d points (%v), want none", len(rp), err)
	}

	emb := subspace.ComplexBasis{Count: 2, Rows: 3, Cols: 3, Data: []complex128{
		1, 0, 0, 0, 1, 0, 0, 0, 0,
		0, -1, 0, 1, 0, 0, 0, 0, 0,
	}}
	w3 := newComplex(t, emb)
	pts, err = (&rankone.AllPoints{}).ComplexPoints(ctx, w3)
	if err != nil {
		t.Fatal(err)
	}
	matchComplex(t, pts, [][]complex128{{r, -1i * r, 0}, {r, 1i * r, 0}}, [][]complex128{{r, 1i * r, 0}, {r, -1i * r, 0}})
	checkComplexPoints(t, w3, pts, 1e-8)
}

// A generic complex 2×n subspace of dimension n (and m×2 of dimension m)
// meets the rank-one matrices in exactly n (m) points, the degree of the
// Segre variety P¹×P^{n−1} (J. Harris, Algebraic Geometry: A First Course,
// 1992; recalled from memory; suite.ComplexCritical's Degree): the pencil
// over C finds all of them, certified and distinct.
func TestComplexPointsPencilCount(t *testing.T) {
	var cases []suite.ComplexInstance
	for n := 2; n <= 6; n++ {
		cases = append(cases, suite.ComplexCritical(2, n, uint64(n)))
	}
	for m := 3; m <= 5; m++ {
		cases = append(cases, suite.ComplexCritical(m, 2, uint64(10+m)))
	}
	cases = append(cases, suite.RotatedComplex(cases[3], 3), suite.RotatedComplex(cases[len(cases)-1], 4))
	for _, in := range cases {
		t.Run(in.Name, func(t *testing.T) {
			w := suite.MustNewComplex(t, in)
			pts, err := (&rankone.AllPoints{Seed: 3}).ComplexPoints(context.Background(), w)
			if err != nil {
				t.Fatal(err)
			}
			if len(pts) != in.Degree {
				t.Errorf("%d points, want the degree %d", len(pts), in.Degree)
			}
			checkComplexPoints(t, w, pts, 1e-8)
		})
	}
}

// Real subspaces treated over C (subspace.ComplexFromReal): every real
// point is a complex point, so the complex list contains the real one.
// Planted real components are all found (complexSpanOf's argument with
// real factors); for a real 2×n subspace of dimension n the real points
// (rankone.AllPoints over R) are among the n complex points.
func TestComplexPointsRealData(t *testing.T) {
	ctx := context.Background()
	rng := rand.New(rand.NewPCG(83, 84))
	a, b := make([][]float64, 3), make([][]float64, 3)
	ac, bc := make([][]complex128, 3), make([][]complex128, 3)
	for s := range a {
		a[s], b[s] = gauss(rng, 4), gauss(rng, 5)
		ac[s], bc[s] = toComplex(a[s]), toComplex(b[s])
	}
	w := newComplex(t, subspace.ComplexFromReal(spanOf(rng, a, b)))
	pts, err := (&rankone.AllPoints{Seed: 4}).ComplexPoints(ctx, w)
	if err != nil {
		t.Fatal(err)
	}
	matchComplex(t, pts, ac, bc)
	checkComplexPoints(t, w, pts, 1e-8)

	for _, n := range []int{3, 4, 5, 6} {
		in := suite.Random(2, n, n, uint64(n))
		wr, err := subspace.New(ctx, in.Basis, subspace.Options{})
		if err != nil {
			t.Fatal(err)
		}
		rpts, err := (&rankone.AllPoints{}).Points(ctx, wr)
		if err != nil {
			t.Fatalf("n=%d over R: %v", n, err)
		}
		wc := newComplex(t, subspace.ComplexFromReal(in.Basis))
		cpts, err := (&rankone.AllPoints{}).ComplexPoints(ctx, wc)
		if err != nil {
			t.Fatalf("n=%d over C: %v", n, err)
		}
		if len(cpts) != n {
			t.Errorf("n=%d: %d complex points, want the degree %d", n, len(cpts), n)
		}
		checkComplexPoints(t, wc, cpts, 1e-8)
		for i, rp := range rpts {
			found := false
			for _, cp := range cpts {
				x, y := cp.Vectors()
				if cos(x, toComplex(rp.X))*cos(y, toComplex(rp.Y)) > 1-1e-9 {
					found = true
				}
			}
			if !found {
				t.Errorf("n=%d: real point %d not among the complex points", n, i)
			}
		}
		t.Logf("2×%d: %d real points, %d complex", n, len(rpts), len(cpts))
	}
}

func toComplex(v []float64) []complex128 {
	out := make([]complex128, len(v))
	for i, x := range v {
		out[i] = complex(x, 0)
	}
	return out
}

// Search and Points on a complex subspace keep the convention of every
// complex Result: real coordinates, Upper from Verify (the realified
// distance), and the best point by complex distance first; the complex
// distance of the witness is certified by VerifyComplex. Same seed, same
// result.
func TestComplexPointsSearch(t *testing.T) {
	ctx := context.Background()
	rng := rand.New(rand.NewPCG(85, 86))
	xs, ys := [][]complex128{cgauss(rng, 3), cgauss(rng, 3)}, [][]complex128{cgauss(rng, 4), cgauss(rng, 4)}
	w := newComplex(t, complexSpanOf(rng, xs, ys))
	ap := &rankone.AllPoints{Seed: 5}
	res, err := ap.Search(ctx, w)
	if err != nil {
		t.Fatal(err)
	}
	if res.Status != rankone.Converged || len(res.X) != 6 || len(res.Y) != 8 {
		t.Fatalf("status %v, witness lengths %d, %d", res.Status, len(res.X), len(res.Y))
	}
	if u, _ := rankone.Verify(w, res.X, res.Y); u != res.Upper {
		t.Errorf("Upper %v, Verify %v", res.Upper, u)
	}
	if u := rankone.ComplexUpperAt(w, res.X, res.Y, res.Upper); u > 1e-8 {
		t.Errorf("complex Upper of the witness %v", u)
	}
	cpts, err := ap.ComplexPoints(ctx, w)
	if err != nil {
		t.Fatal(err)
	}
	pts, err := ap.Points(ctx, w)
	if err != nil || len(pts) != len(cpts) {
		t.Fatalf("Points: %d points (%v), ComplexPoints %d", len(pts), err, len(cpts))
	}
	for i := range pts {
		u, _ := rankone.Verify(w, pts[i].X, pts[i].Y)
		if pts[i].Upper != u || !equal(pts[i].X, cpts[i].X) || !equal(pts[i].Y, cpts[i].Y) {
			t.Errorf("point %d: Points and ComplexPoints disagree", i)
		}
		// The realified distance of a complex point is √((1 + d²)/2) ≥ 1/√2
		// (derived in package subspace: d² = 2d''² − 1).
		if pts[i].Upper < 1/math.Sqrt2*(1-1e-15) {
			t.Errorf("point %d: realified Upper %v below 1/√2", i, pts[i].Upper)
		}
	}
	again, _ := ap.ComplexPoints(ctx, w)
	for i := range again {
		if !equal(again[i].X, cpts[i].X) || again[i].Upper != cpts[i].Upper {
			t.Errorf("point %d differs on a rerun with the same seed", i)
		}
	}
}

func equal(a, b []float64) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i] != b[i] {
			return false
		}
	}
	return true
}

// Failure modes over C are reported with the errors of AllPoints, never a
// wrong certified point.
func TestComplexPointsFailures(t *testing.T) {
	ctx := context.Background()
	rng := rand.New(rand.NewPCG(87, 88))
	// Too many terms: a generic 3×3 subspace of complex dimension 5.
	w := suite.MustNewComplex(t, suite.ComplexCritical(3, 3, 1))
	if _, err := (&rankone.AllPoints{}).ComplexPoints(ctx, w); !errors.Is(err, rankone.ErrTooManyTerms) {
		t.Errorf("k > min(m, n): %v", err)
	}
	// span{I, diag(J, 1)}: the column space is all of C³, above dim W = 2.
	w = newComplex(t, subspace.ComplexBasis{Count: 2, Rows: 3, Cols: 3, Data: []complex128{
		1, 0, 0, 0, 1, 0, 0, 0, 1,
		0, -1, 0, 1, 0, 0, 0, 0, 1,
	}})
	if _, err := (&rankone.AllPoints{}).ComplexPoints(ctx, w); !errors.Is(err, rankone.ErrNotSpanned) {
		t.Errorf("column space too large: %v", err)
	}
	// Noise of 1e-3 on a planted span: strict refuses, Noisy reports points
	// farther than the tolerance, each with a valid certified distance.
	xs, ys := [][]complex128{cgauss(rng, 4), cgauss(rng, 4)}, [][]complex128{cgauss(rng, 5), cgauss(rng, 5)}
	nb := complexSpanOf(rng, xs, ys)
	for i := range nb.Data {
		nb.Data[i] += complex(1e-3*rng.NormFloat64(), 1e-3*rng.NormFloat64())
	}
	w = newComplex(t, nb)
	if _, err := (&rankone.AllPoints{}).ComplexPoints(ctx, w); !errors.Is(err, rankone.ErrNotSpanned) {
		t.Errorf("noisy span, strict: %v", err)
	}
	pts, err := (&rankone.AllPoints{Noisy: true}).ComplexPoints(ctx, w)
	if !errors.Is(err, rankone.ErrNotRankOne) || len(pts) != 2 {
		t.Errorf("noisy span, Noisy: %d points, %v", len(pts), err)
	}
	checkComplexPoints(t, w, pts, 1, true) // valid Uppers; d ≤ 1 always
	// The wrong field, a bad setting, a cancelled context.
	wr, _ := subspace.New(ctx, suite.Random(3, 3, 2, 1).Basis, subspace.Options{})
	if _, err := (&rankone.AllPoints{}).ComplexPoints(ctx, wr); !errors.Is(err, rankone.ErrLength) {
		t.Errorf("real subspace: %v", err)
	}
	wc := suite.MustNewComplex(t, suite.PencilIJ())
	if _, err := (&rankone.AllPoints{AcceptTol: -1}).ComplexPoints(ctx, wc); !errors.Is(err, rankone.ErrOption) {
		t.Errorf("negative AcceptTol: %v", err)
	}
	cctx, cancel := context.WithCancel(ctx)
	cancel()
	if _, err := (&rankone.AllPoints{}).ComplexPoints(cctx, wc); !errors.Is(err, context.Canceled) {
		t.Errorf("cancelled: %v", err)
	}
	if res, err := (&rankone.AllPoints{}).Search(cctx, wc); !errors.Is(err, context.Canceled) || res.Status != rankone.Cancelled {
		t.Errorf("cancelled Search: %v, %v", res.Status, err)
	}
}

// Hostile complex data (the seeds of FuzzStrategiesComplex and more:
// entries near overflow and underflow, subnormal, duplicated and zero
// matrices): ComplexPoints never panics, and whatever it returns carries
// its own certified distance. Cases 3 and 5 contain whole families of
// points (span{E11, E12} ∋ e₁zᵀ for every z; span{E11, E21, E32} ∋ x e₁ᵀ
// for x ∈ span{e₁, e₂}) and case 1 a double point (det(aE11 + b[[0, 1],
// [2, 0]]) = −2b²): errors, never a wrong certified point.
func TestComplexPointsHostile(t *testing.T) {
	ctx := context.Background()
	cases := []subspace.ComplexBasis{
		{Count: 1, Rows: 2, Cols: 2, Data: []complex128{1e150, 1e-150, 0, 5e-324}},
		{Count: 2, Rows: 2, Cols: 2, Data: []complex128{1e150, 1i, 0, 1, 1e-300i, 1, 2, 0}},
		{Count: 2, Rows: 2, Cols: 2, Data: []complex128{1, 2i, 3, 4, 1, 2i, 3, 4}},
		{Count: 3, Rows: 2, Cols: 2, Data: []complex128{1, 0, 0, 0, 0, 0, 0, 0, 0, 1e-310, 0, 0}},
		{Count: 2, Rows: 1, Cols: 3, Data: []complex128{1, 1i, 0, 0, 1e200, 1}},
		{Count: 3, Rows: 3, Cols: 2, Data: []complex128{
			1, 0, 0, 0, 0, 0,
			0, 0, 1e-200, 0, 0, 0,
			0, 0, 0, 0, 0, 1e200i}},
	}
	for i, cb := range cases {
		w, err := subspace.NewComplex(ctx, cb, subspace.Options{})
		if err != nil {
			continue
		}
		for _, noisy := range []bool{false, true} {
			pts, err := (&rankone.AllPoints{Noisy: noisy}).ComplexPoints(ctx, w)
			t.Logf("case %d noisy=%v: %d points, %v", i, noisy, len(pts), err)
			if noisy {
				checkComplexPoints(t, w, pts, 1, true)
			} else {
				checkComplexPoints(t, w, pts, 1)
			}
		}
	}
}

// span{I, J} over C (suite.PencilIJ): the two points (1, ∓i)(1, ±i)ᵀ/2,
// printed phase-free as the ratios x₂/x₁ and y₂/y₁ (derived in
// TestComplexPointsPencilIJ).
func ExampleAllPoints_ComplexPoints() {
	w, err := subspace.NewComplex(context.Background(), suite.PencilIJ().Basis, subspace.Options{})
	if err != nil {
		panic(err)
	}
	pts, err := (&rankone.AllPoints{}).ComplexPoints(context.Background(), w)
	if err != nil {
		panic(err)
	}
	var lines []string
	for _, p := range pts {
		x, y := p.Vectors()
		rx, ry := x[1]/x[0], y[1]/y[0]
		lines = append(lines, fmt.Sprintf("x₂/x₁ = %+.0fi, y₂/y₁ = %+.0fi, certified distance below 1e-12: %v",
			imag(rx), imag(ry), p.Upper < 1e-12 && math.Abs(real(rx)) < 1e-9 && math.Abs(real(ry)) < 1e-9))
	}
	sort.Strings(lines)
	for _, l := range lines {
		fmt.Println(l)
	}
	// Output:
	// x₂/x₁ = +1i, y₂/y₁ = -1i, certified distance below 1e-12: true
	// x₂/x₁ = -1i, y₂/y₁ = +1i, certified distance below 1e-12: true
}
