package subspace

import (
	"context"
	"math"
	"math/rand/v2"
	"testing"
)

// The search operators of a complex subspace are W”'s G(y) and H(x)
// (derived in complexops.go): applied to random vectors they agree with
// GOperator and HOperator to rounding (1e-12 relative, common practice for
// two orderings of the same sums of about mn terms).
func TestSearchOperatorsMatch(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	for _, sh := range [][3]int{{2, 3, 2}, {3, 3, 4}, {4, 2, 5}, {5, 6, 12}} {
		m, n, k := sh[0], sh[1], sh[2]
		d := make([]complex128, k*m*n)
		for i := range d {
			d[i] = complex(rng.NormFloat64(), rng.NormFloat64())
		}
		w, err := NewComplex(context.Background(), ComplexBasis{Count: k, Rows: m, Cols: n, Data: d}, Options{})
		if err != nil {
			t.Fatal(err)
		}
		x, y := make([]float64, 2*m), make([]float64, 2*n)
		for i := range x {
			x[i] = rng.NormFloat64()
		}
		for i := range y {
			y[i] = rng.NormFloat64()
		}
		for side, pair := range [][2]*Operator{{w.GOperator(y), w.SearchGOperator(y)}, {w.HOperator(x), w.SearchHOperator(x)}} {
			p := pair[0].Order()
			if pair[1].Order() != p {
				t.Fatalf("orders %d and %d", p, pair[1].Order())
			}
			v := make([]float64, p)
			for i := range v {
				v[i] = rng.NormFloat64()
			}
			a, b := make([]float64, p), make([]float64, p)
			pair[0].Apply(a, v)
			pair[1].Apply(b, v)
			var diff, norm float64
			for i := range a {
				diff += (a[i] - b[i]) * (a[i] - b[i])
				norm += a[i] * a[i]
			}
			if math.Sqrt(diff) > 1e-12*math.Sqrt(norm) {
				t.Errorf("%d×%d k%d side %d: |difference| %g, |G v| %g", m, n, k, side, math.Sqrt(diff), math.Sqrt(norm))
			}
		}
	}
	// The partial traces likewise (ApplyPartialTrace1/2 on W'').
	for _, sh := range [][3]int{{2, 3, 2}, {4, 3, 5}} {
		m, n, k := sh[0], sh[1], sh[2]
		d := make([]complex128, k*m*n)
		for i := range d {
			d[i] = complex(rng.NormFloat64(), rng.NormFloat64())
		}
		w, err := NewComplex(context.Background(), ComplexBasis{Count: k, Rows: m, Cols: n, Data: d}, Options{})
		if err != nil {
			t.Fatal(err)
		}
		x, y := make([]float64, 2*m), make([]float64, 2*n)
		for i := range x {
			x[i] = rng.NormFloat64()
		}
		for i := range y {
			y[i] = rng.NormFloat64()
		}
		a, b := make([]float64, 2*m), make([]float64, 2*m)
		w.ApplyPartialTrace1(a, x)
		w.SearchPartialTrace1(b, x)
		c, e := make([]float64, 2*n), make([]float64, 2*n)
		w.ApplyPartialTrace2(c, y)
		w.SearchPartialTrace2(e, y)
		for _, pr := range [][2][]float64{{a, b}, {c, e}} {
			var diff, norm float64
			for i := range pr[0] {
				diff += (pr[0][i] - pr[1][i]) * (pr[0][i] - pr[1][i])
				norm += pr[0][i] * pr[0][i]
			}
			if math.Sqrt(diff) > 1e-12*math.Sqrt(norm) {
				t.Errorf("%d×%d k%d: partial trace differs by %g (norm %g)", m, n, k, math.Sqrt(diff), math.Sqrt(norm))
			}
		}
	}
	// The projection (Project on W'').
	{
		d := make([]complex128, 3*3*4)
		for i := range d {
			d[i] = complex(rng.NormFloat64(), rng.NormFloat64())
		}
		w, err := NewComplex(context.Background(), ComplexBasis{Count: 3, Rows: 3, Cols: 4, Data: d}, Options{})
		if err != nil {
			t.Fatal(err)
		}
		a := make([]float64, 6*8)
		for i := range a {
			a[i] = rng.NormFloat64()
		}
		x, y := make([]float64, 6), make([]float64, 8)
		for i := range x {
			x[i] = rng.NormFloat64()
		}
		for i := range y {
			y[i] = rng.NormFloat64()
		}
		gx1, gy1, gx2, gy2 := make([]float64, 6), make([]float64, 8), make([]float64, 6), make([]float64, 8)
		h1, h2 := w.Gradient(gx1, gy1, x, y, nil), w.SearchGradient(gx2, gy2, x, y, nil)
		if math.Abs(h1-h2) > 1e-12*math.Abs(h1) {
			t.Errorf("gradient's value %v, search %v", h1, h2)
		}
		for i := range gx1 {
			if math.Abs(gx1[i]-gx2[i]) > 1e-12*(1+math.Abs(gx1[i])) {
				t.Errorf("gradient x[%d]: %v and %v", i, gx1[i], gx2[i])
			}
		}
		p1, p2 := make([]float64, len(a)), append([]float64(nil), a...)
		w.Project(p1, a)
		w.SearchProject(p2, p2) // in place
		var diff, norm float64
		for i := range p1 {
			diff += (p1[i] - p2[i]) * (p1[i] - p2[i])
			norm += p1[i] * p1[i]
		}
		if math.Sqrt(diff) > 1e-12*math.Sqrt(norm) {
			t.Errorf("projection differs by %g (norm %g)", math.Sqrt(diff), math.Sqrt(norm))
		}
	}
	// A real subspace: the search operators are the operators.
	w, _ := New(context.Background(), Basis{Count: 1, Rows: 2, Cols: 2, Data: []float64{1, 0, 0, 1}}, Options{})
	if w.SearchGOperator([]float64{1, 0}).Order() != 2 || w.SearchHOperator([]float64{0, 1}).Order() != 2 {
		t.Error("real search operators")
	}
}
