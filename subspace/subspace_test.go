package subspace

import (
	"context"
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/floats/scalar"
	"gonum.org/v1/gonum/mat"
)

func randBasis(rng *rand.Rand, r, m, n int) Basis {
	d := make([]float64, r*m*n)
	for i := range d {
		d[i] = rng.NormFloat64()
	}
	return Basis{Count: r, Rows: m, Cols: n, Data: d}
}

// refProjector computes P_W with gonum's SVD of the mn×r matrix [vec B_t],
// keeping singular values above 1e-10·σ₁: the reference for every
// contraction below (a general-purpose reference library).
func refProjector(t *testing.T, b Basis) (*mat.Dense, int) {
	L := b.Rows * b.Cols
	a := mat.NewDense(L, b.Count, nil)
	for c := 0; c < b.Count; c++ {
		for l := 0; l < L; l++ {
			a.Set(l, c, b.Data[c*L+l])
		}
	}
	var svd mat.SVD
	if !svd.Factorize(a, mat.SVDThin) {
		t.Fatal("gonum SVD failed")
	}
	s := svd.Values(nil)
	var u mat.Dense
	svd.UTo(&u)
	k := 0
	for _, v := range s {
		if v > 1e-10*s[0] {
			k++
		}
	}
	uk := u.Slice(0, L, 0, k)
	var p mat.Dense
	p.Mul(uk, uk.T())
	return &p, k
}

func randUnit(rng *rand.Rand, n int) []float64 {
	v := make([]float64, n)
	var s float64
	for i := range v {
		v[i] = rng.NormFloat64()
		s += v[i] * v[i]
	}
	s = math.Sqrt(s)
	for i := range v {
		v[i] /= s
	}
	return v
}

func kronVec(x, y []float64) *mat.VecDense {
	v := make([]float64, len(x)*len(y))
	kron(v, x, y)
	return mat.NewVecDense(len(v), v)
}

func TestContractionsAgainstGonum(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	cases := []struct {
		name    string
		r, m, n int
	}{
		{"square-small-dim", 3, 4, 4},
		{"rect-half", 6, 3, 4},
		{"complement-stored", 10, 3, 4},
		{"wide", 2, 2, 7},
		{"full-space", 12, 3, 4},
		{"more-than-full", 15, 3, 4},
		{"column", 2, 5, 1},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			b := randBasis(rng, c.r, c.m, c.n)
			w, err := New(b, Options{})
			if err != nil {
				t.Fatal(err)
			}
			p, k := refProjector(t, b)
			if w.Dim() != k {
				t.Fatalf("Dim = %d, gonum SVD rank = %d", w.Dim(), k)
			}
			rec, orth := w.BackwardError()
			// Householder QR is backward stable: errors of order mn·u (Higham 2002, Thm 19.4).
			if rec > 1e-13 || orth > 1e-13 {
				t.Errorf("backward error %g, orthogonality %g", rec, orth)
			}
			if w.OrthogonalityBound() < orth {
				t.Errorf("proven η = %g below computed %g", w.OrthogonalityBound(), orth)
			}
			for trial := 0; trial < 5; trial++ {
				x, y := randUnit(rng, c.m), randUnit(rng, c.n)
				v := kronVec(x, y)
				var pv mat.VecDense
				pv.MulVec(p, v)
				href := mat.Dot(v, &pv)
				if got := w.Value(x, y); !scalar.EqualWithinAbs(got, href, 1e-12) {
					t.Errorf("Value = %v, gonum %v", got, href)
				}
				if got := w.Residual(x, y); !scalar.EqualWithinAbs(got, 1-href, 1e-12) {
					t.Errorf("Residual = %v, gonum 1−h = %v", got, 1-href)
				}
				// Reference distance ‖v − Pv‖ from gonum's P, as a residual vector.
				var res mat.VecDense
				res.SubVec(v, &pv)
				dref := mat.Norm(&res, 2)
				ub := w.ResidualBound(x, y)
				if ub < dref-1e-14 || ub > dref+1e-12 {
					t.Errorf("ResidualBound = %v, gonum d = %v", ub, dref)
				}
				// G(y): xᵀG(y)x = h for every x (derived: definition of G).
				var g, h mat.SymDense
				w.G(&g, y)
				w.H(&h, x)
				if got := mat.Inner(mat.NewVecDense(c.m, x), &g, mat.NewVecDense(c.m, x)); !scalar.EqualWithinAbs(got, href, 1e-12) {
					t.Errorf("xᵀG(y)x = %v, want %v", got, href)
				}
				if got := mat.Inner(mat.NewVecDense(c.n, y), &h, mat.NewVecDense(c.n, y)); !scalar.EqualWithinAbs(got, href, 1e-12) {
					t.Errorf("yᵀH(x)y = %v, want %v", got, href)
				}
				// Entry check of G(y) against (I⊗y)ᵀP(I⊗y) built with gonum.
				iy := mat.NewDense(c.m*c.n, c.m, nil)
				for i := 0; i < c.m; i++ {
					for j := 0; j < c.n; j++ {
						iy.Set(i*c.n+j, i, y[j])
					}
				}
				var tmp, gref mat.Dense
				tmp.Mul(p, iy)
				gref.Mul(iy.T(), &tmp)
				if !mat.EqualApprox(&g, &gref, 1e-12) {
					t.Errorf("G(y) differs from (I⊗y)ᵀP(I⊗y)")
				}
				ag := make([]float64, c.m)
				w.ApplyG(ag, y, x)
				var gx mat.VecDense
				gx.MulVec(&g, mat.NewVecDense(c.m, x))
				if !mat.EqualApprox(mat.NewVecDense(c.m, ag), &gx, 1e-12) {
					t.Errorf("ApplyG differs from G(y)x")
				}
				ah := make([]float64, c.n)
				w.ApplyH(ah, x, y)
				var hy mat.VecDense
				hy.MulVec(&h, mat.NewVecDense(c.n, y))
				if !mat.EqualApprox(mat.NewVecDense(c.n, ah), &hy, 1e-12) {
					t.Errorf("ApplyH differs from H(x)y")
				}
				// Gradient: ∂h/∂x = 2G(y)x (derived: h = xᵀG(y)x).
				gxv, gyv := make([]float64, c.m), make([]float64, c.n)
				hv := w.Gradient(gxv, gyv, x, y, nil)
				if !scalar.EqualWithinAbs(hv, href, 1e-12) {
					t.Errorf("Gradient value %v, want %v", hv, href)
				}
				for i := range gxv {
					if !scalar.EqualWithinAbs(gxv[i], 2*gx.AtVec(i), 1e-12) {
						t.Fatalf("gx[%d] = %v, want %v", i, gxv[i], 2*gx.AtVec(i))
					}
				}
				for j := range gyv {
					if !scalar.EqualWithinAbs(gyv[j], 2*hy.AtVec(j), 1e-12) {
						t.Fatalf("gy[%d] = %v, want %v", j, gyv[j], 2*hy.AtVec(j))
					}
				}
			}
			// Partial traces: Tr₂(P)_ab = Σ_j P[(a,j),(b,j)] from gonum's P.
			t1, d1, t2, d2 := w.PartialTraces()
			for a := 0; a < c.m; a++ {
				for bb := 0; bb < c.m; bb++ {
					var s float64
					for j := 0; j < c.n; j++ {
						s += p.At(a*c.n+j, bb*c.n+j)
					}
					if !scalar.EqualWithinAbs(t1.At(a, bb), s, 1e-12) {
						t.Errorf("T1[%d,%d] = %v, want %v", a, bb, t1.At(a, bb), s)
					}
				}
			}
			for cc := 0; cc < c.n; cc++ {
				for dd := 0; dd < c.n; dd++ {
					var s float64
					for i := 0; i < c.m; i++ {
						s += p.At(i*c.n+cc, i*c.n+dd)
					}
					if !scalar.EqualWithinAbs(t2.At(cc, dd), s, 1e-12) {
						t.Errorf("T2[%d,%d] = %v, want %v", cc, dd, t2.At(cc, dd), s)
					}
				}
			}
			if !(d1 >= 0 && d1 < 1e-12 && d2 >= 0 && d2 < 1e-12) {
				t.Errorf("partial trace slack %g, %g", d1, d2)
			}
			// Project agrees with gonum's P on a random full matrix.
			a := randUnit(rng, c.m*c.n)
			pa := make([]float64, len(a))
			w.Project(pa, a)
			var ref mat.VecDense
			ref.MulVec(p, mat.NewVecDense(len(a), a))
			if !mat.EqualApprox(mat.NewVecDense(len(a), pa), &ref, 1e-12) {
				t.Errorf("Project differs from gonum's P·a")
			}
		})
	}
}

func TestDependentAndZeroInputs(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	b := randBasis(rng, 3, 4, 5)
	L := 20
	// Append B0 + 2B1 (dependent), a zero matrix, and 1e-200·B2 (tiny but a multiple).
	d := append([]float64(nil), b.Data...)
	extra := make([]float64, 3*L)
	for l := 0; l < L; l++ {
		extra[l] = b.Data[l] + 2*b.Data[L+l]
		extra[2*L+l] = 1e-200 * b.Data[2*L+l]
	}
	d = append(d, extra...)
	orig := append([]float64(nil), d...)
	w, err := New(Basis{Count: 6, Rows: 4, Cols: 5, Data: d}, Options{})
	if err != nil {
		t.Fatal(err)
	}
	// Derived: span{B0, B1, B2, B0+2B1, 0, c·B2} = span{B0, B1, B2}, dimension 3.
	if w.Dim() != 3 {
		t.Errorf("Dim = %d, want 3", w.Dim())
	}
	if g, z := w.Inputs(); g != 6 || z != 1 {
		t.Errorf("Inputs = %d, %d; want 6, 1", g, z)
	}
	for i := range d {
		if d[i] != orig[i] {
			t.Fatal("New modified its input")
		}
	}
}

// A Subspace is safe for concurrent use: many goroutines call every
// contraction (and the lazily computed partial traces) at once and get the
// same answers as a serial run (run under -race in CI).
func TestConcurrentUse(t *testing.T) {
	rng := rand.New(rand.NewPCG(9, 9))
	w, err := New(randBasis(rng, 5, 4, 6), Options{})
	if err != nil {
		t.Fatal(err)
	}
	x, y := randUnit(rng, 4), randUnit(rng, 6)
	want := w.Value(x, y)
	done := make(chan float64)
	for g := 0; g < 8; g++ {
		go func() {
			var s mat.SymDense
			w.G(&s, y)
			w.PartialTraces()
			w.ResidualBound(x, y)
			done <- w.Value(x, y)
		}()
	}
	for g := 0; g < 8; g++ {
		if v := <-done; v != want {
			t.Errorf("concurrent Value %v, serial %v", v, want)
		}
	}
}

// MaxEigH/MaxEigG: the estimate matches gonum's EigenSym of the explicit
// H(x), G(y) (reference library), and the proven bound lies above it by no
// more than rounding-level slack, for both storages and unnormalised input.
func TestMaxEigBounds(t *testing.T) {
	rng := rand.New(rand.NewPCG(11, 12))
	for _, c := range []struct{ r, m, n int }{{3, 3, 5}, {12, 3, 5}, {2, 6, 2}, {9, 4, 3}, {15, 3, 5}} {
		w, err := New(randBasis(rng, c.r, c.m, c.n), Options{})
		if err != nil {
			t.Fatal(err)
		}
		for trial := 0; trial < 4; trial++ {
			x, y := randUnit(rng, c.m), randUnit(rng, c.n)
			for i := range x {
				x[i] *= 1.5
			}
			var h, g mat.SymDense
			w.H(&h, x)
			w.G(&g, y)
			for _, tc := range []struct {
				name string
				a    *mat.SymDense
				f    func(v []float64) (float64, float64)
				p    int
			}{
				{"H", &h, func(v []float64) (float64, float64) { return w.MaxEigH(x, v) }, c.n},
				{"G", &g, func(v []float64) (float64, float64) { return w.MaxEigG(y, v) }, c.m},
			} {
				var es mat.EigenSym
				es.Factorize(tc.a, false)
				vals := es.Values(nil)
				ref := vals[len(vals)-1]
				vec := make([]float64, tc.p)
				est, up := tc.f(vec)
				if math.Abs(est-ref) > 1e-12 {
					t.Errorf("%v %s: estimate %v, gonum %v", c, tc.name, est, ref)
				}
				// The bound's slack is γ-sized (derived on MaxEigH): 1e-12 covers these sizes.
				if up < ref-1e-15 || up > ref+1e-12 {
					t.Errorf("%v %s (complement %v): bound %v, gonum %v", c, tc.name, w.comp, up, ref)
				}
			}
		}
	}
}

// BlockForm.MaxEig agrees with MaxEigH/MaxEigG (tested against gonum above)
// on both storages and both sides: same estimate, bound above the gonum
// value by rounding-level slack only.
func TestBlockForm(t *testing.T) {
	rng := rand.New(rand.NewPCG(13, 14))
	for _, c := range []struct{ r, m, n int }{{3, 3, 5}, {12, 3, 5}, {5, 4, 3}, {10, 4, 3}} {
		w, err := New(randBasis(rng, c.r, c.m, c.n), Options{})
		if err != nil {
			t.Fatal(err)
		}
		for _, onX := range []bool{true, false} {
			f := w.NewBlockForm(onX)
			d, p := c.m, c.n
			if !onX {
				d, p = c.n, c.m
			}
			for trial := 0; trial < 4; trial++ {
				u := randUnit(rng, d)
				u[0] *= 1.3
				var a mat.SymDense
				if onX {
					w.H(&a, u)
				} else {
					w.G(&a, u)
				}
				var es mat.EigenSym
				es.Factorize(&a, false)
				vals := es.Values(nil)
				ref := vals[len(vals)-1]
				est, up := f.MaxEig(u, make([]float64, p))
				if math.Abs(est-ref) > 1e-12 || up < ref-1e-15 || up > ref+1e-12 {
					t.Errorf("%v onX=%v complement=%v: est %v bound %v, gonum %v", c, onX, w.comp, est, up, ref)
				}
			}
		}
	}
}

// NewContext: a done context is reported as an error wrapping its cause,
// nothing is returned, and the input is unchanged; a live one gives the same
// Subspace as New (derived: the same operations in the same order).
func TestNewContext(t *testing.T) {
	rng := rand.New(rand.NewPCG(8, 9))
	data := make([]float64, 40*6*6)
	for i := range data {
		data[i] = rng.NormFloat64()
	}
	keep := append([]float64(nil), data...)
	b := Basis{Count: 40, Rows: 6, Cols: 6, Data: data}
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if w, err := NewContext(ctx, b, Options{}); w != nil || !errors.Is(err, context.Canceled) {
		t.Errorf("cancelled: %v, %v", w, err)
	}
	for i := range keep {
		if math.Float64bits(keep[i]) != math.Float64bits(data[i]) {
			t.Fatal("input changed")
		}
	}
	w1, err1 := New(b, Options{})
	w2, err2 := NewContext(context.Background(), b, Options{})
	if err1 != nil || err2 != nil || w1.Dim() != w2.Dim() || w1.OrthogonalityBound() != w2.OrthogonalityBound() {
		t.Errorf("New and NewContext differ: %v %v", err1, err2)
	}
}
