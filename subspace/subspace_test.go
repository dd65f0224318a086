package subspace

import (
	"context"
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/floats/scalar"
	"gonum.org/v1/gonum/mat"

	"github.com/segre-lab/segre/internal/reference"
)

func randBasis(rng *rand.Rand, r, m, n int) Basis {
	return Basis{Count: r, Rows: m, Cols: n, Data: reference.RandMatrices(rng, r, m, n)}
}

// refProjector computes P_W with gonum's SVD (reference.Projector): the
// reference for every contraction below (a general-purpose reference
// library).
func refProjector(t *testing.T, b Basis) (*mat.Dense, int) {
	p, k, ok := reference.Projector(b.Data, b.Count, b.Rows, b.Cols)
	if !ok {
		t.Fatal("gonum SVD failed")
	}
	return p, k
}

var randUnit = reference.RandUnit

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
			w, err := New(context.Background(), b, Options{})
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
	w, err := New(context.Background(), Basis{Count: 6, Rows: 4, Cols: 5, Data: d}, Options{})
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
// contraction at once and get the
// same answers as a serial run (run under -race in CI).
func TestConcurrentUse(t *testing.T) {
	rng := rand.New(rand.NewPCG(9, 9))
	w, err := New(context.Background(), randBasis(rng, 5, 4, 6), Options{})
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
	if w, err := New(ctx, b, Options{}); w != nil || !errors.Is(err, context.Canceled) {
		t.Errorf("cancelled: %v, %v", w, err)
	}
	for i := range keep {
		if math.Float64bits(keep[i]) != math.Float64bits(data[i]) {
			t.Fatal("input changed")
		}
	}
	w1, err1 := New(context.Background(), b, Options{})
	w2, err2 := New(context.Background(), b, Options{})
	if err1 != nil || err2 != nil || w1.Dim() != w2.Dim() || w1.OrthogonalityBound() != w2.OrthogonalityBound() {
		t.Errorf("New and NewContext differ: %v %v", err1, err2)
	}
}
