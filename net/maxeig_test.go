package net

import (
	"context"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"

	"github.com/segre-lab/segre/internal/reference"
	"github.com/segre-lab/segre/subspace"
)

// MaxEigH/MaxEigG: the estimate matches gonum's EigenSym of the explicit
// H(x), G(y) (reference library), and the proven bound lies above it by no
// more than rounding-level slack, for both storages and unnormalised input.
func TestMaxEigBounds(t *testing.T) {
	rng := rand.New(rand.NewPCG(11, 12))
	for _, c := range []struct{ r, m, n int }{{3, 3, 5}, {12, 3, 5}, {2, 6, 2}, {9, 4, 3}, {15, 3, 5}} {
		w, err := subspace.New(context.Background(), subspace.Basis{Count: c.r, Rows: c.m, Cols: c.n, Data: reference.RandMatrices(rng, c.r, c.m, c.n)}, subspace.Options{})
		if err != nil {
			t.Fatal(err)
		}
		for trial := 0; trial < 4; trial++ {
			x, y := reference.RandUnit(rng, c.m), reference.RandUnit(rng, c.n)
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
				{"H", &h, func(v []float64) (float64, float64) { return MaxEigH(w, x, v) }, c.n},
				{"G", &g, func(v []float64) (float64, float64) { return MaxEigG(w, y, v) }, c.m},
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
					t.Errorf("%v %s (complement %v): bound %v, gonum %v", c, tc.name, w.StoresComplement(), up, ref)
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
		w, err := subspace.New(context.Background(), subspace.Basis{Count: c.r, Rows: c.m, Cols: c.n, Data: reference.RandMatrices(rng, c.r, c.m, c.n)}, subspace.Options{})
		if err != nil {
			t.Fatal(err)
		}
		for _, onX := range []bool{true, false} {
			f := NewBlockForm(w, onX)
			d, p := c.m, c.n
			if !onX {
				d, p = c.n, c.m
			}
			for trial := 0; trial < 4; trial++ {
				u := reference.RandUnit(rng, d)
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
					t.Errorf("%v onX=%v complement=%v: est %v bound %v, gonum %v", c, onX, w.StoresComplement(), est, up, ref)
				}
			}
		}
	}
}

// Overflowing inputs give +Inf or a valid bound (nothing proved), never a
// panic or a NaN.
func TestMaxEigOverflow(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 7))
	for _, r := range []int{2, 10} { // stores W, then W⊥
		w, err := subspace.New(context.Background(), subspace.Basis{Count: r, Rows: 3, Cols: 4, Data: reference.RandMatrices(rng, r, 3, 4)}, subspace.Options{})
		if err != nil {
			t.Fatal(err)
		}
		x := []float64{1e300, -1e300, 1e300}
		if _, up := MaxEigH(w, x, make([]float64, 4)); !(up >= 0) {
			t.Errorf("r=%d: MaxEigH bound %v", r, up)
		}
	}
}
