package rankone

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"

	"github.com/segre-lab/segre/internal/reference"
	"github.com/segre-lab/segre/internal/verified"
	"github.com/segre-lab/segre/subspace"
)

// The two routes of FlatteningBounds (the p×p partial trace, and the Gram
// matrix of the other order with the same nonzero spectrum) give the same
// bound up to their rounding terms, and both are at least the top
// eigenvalue of the partial traces computed by gonum's EigenSym (the
// reference library) from an explicitly orthonormalised basis (gonum's QR).
func TestFlatteningBoundsRoutes(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	for _, sh := range [][3]int{{2, 3, 40}, {3, 50, 2}, {7, 2, 5}, {4, 5, 6}, {30, 4, 9}, {2, 3, 400}, {150, 2, 400}} {
		k, m, n := sh[0], sh[1], sh[2]
		data := make([]float64, k*m*n)
		for i := range data {
			data[i] = rng.NormFloat64()
		}
		w, err := subspace.New(context.Background(), subspace.Basis{Count: k, Rows: m, Cols: n, Data: data}, subspace.Options{})
		if err != nil {
			t.Fatal(err)
		}
		h1, h2 := FlatteningBounds(context.Background(), w)
		// Direct route, from PartialTraces.
		t1, d1, t2, d2 := PartialTraces(w)
		direct := func(a *mat.SymDense, d float64) float64 {
			var es mat.EigenSym
			es.Factorize(a, false)
			v := es.Values(nil)
			return verified.MaxEigUpper(a, v[len(v)-1]) + d
		}
		r1, r2 := direct(t1, d1), direct(t2, d2)
		// Reference: orthonormal basis by gonum's QR, partial traces, EigenSym.
		a := mat.NewDense(m*n, k, nil)
		for c := 0; c < k; c++ {
			for l := 0; l < m*n; l++ {
				a.Set(l, c, data[c*m*n+l])
			}
		}
		var qr mat.QR
		qr.Factorize(a)
		var q mat.Dense
		qr.QTo(&q)
		ref1, ref2 := mat.NewSymDense(m, nil), mat.NewSymDense(n, nil)
		for c := 0; c < k; c++ {
			qc := mat.NewDense(m, n, mat.Col(nil, c, &q))
			var p1, p2 mat.Dense
			p1.Mul(qc, qc.T())
			p2.Mul(qc.T(), qc)
			for i := 0; i < m; i++ {
				for j := i; j < m; j++ {
					ref1.SetSym(i, j, ref1.At(i, j)+p1.At(i, j))
				}
			}
			for i := 0; i < n; i++ {
				for j := i; j < n; j++ {
					ref2.SetSym(i, j, ref2.At(i, j)+p2.At(i, j))
				}
			}
		}
		top := func(s *mat.SymDense) float64 {
			var es mat.EigenSym
			es.Factorize(s, false)
			v := es.Values(nil)
			return v[len(v)-1]
		}
		e1, e2 := top(ref1), top(ref2)
		// Derived: both routes bound the same λmax with margins of a few
		// γ_p‖S‖_F² ≈ 1e-13 at these sizes; 1e-10 is ample, and the
		// reference (accurate to ~1e-14) must lie below each bound up to it.
		for _, c := range []struct{ got, direct, ref float64 }{{h1, r1, e1}, {h2, r2, e2}} {
			if math.Abs(c.got-c.direct) > 1e-10 || c.got < c.ref-1e-13 || c.direct < c.ref-1e-13 {
				t.Errorf("%v: bound %v, direct route %v, reference λmax %v", sh, c.got, c.direct, c.ref)
			}
		}
	}
	// A cancelled context: every returned bound is still valid (here +Inf or
	// the Gershgorin bound, both ≥ λmax).
	w, _ := subspace.New(context.Background(), subspace.Basis{Count: 1, Rows: 2, Cols: 2, Data: []float64{2, 0, 0, 1}}, subspace.Options{})
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if h1, h2 := FlatteningBounds(ctx, w); h1 < 0.8 || h2 < 0.8 {
		t.Errorf("cancelled: %v %v below λmax = 4/5", h1, h2)
	}
}

// PartialTraces against the partial traces of gonum's projector
// (reference.Projector, a general-purpose reference library), for W and
// W⊥ stored: entries to 1e-12 (rounding of sums of a few dozen products of
// unit-sized numbers, common practice) and slacks δ below 1e-12 (their
// derivation: γ-sized terms times ‖S‖_F²).
func TestPartialTracesAgainstGonum(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	for _, c := range []struct{ r, m, n int }{{3, 4, 4}, {6, 3, 4}, {10, 3, 4}, {2, 2, 7}, {12, 3, 4}, {2, 5, 1}} {
		data := reference.RandMatrices(rng, c.r, c.m, c.n)
		w, err := subspace.New(context.Background(), subspace.Basis{Count: c.r, Rows: c.m, Cols: c.n, Data: data}, subspace.Options{})
		if err != nil {
			t.Fatal(err)
		}
		p, _, ok := reference.Projector(data, c.r, c.m, c.n)
		if !ok {
			t.Fatal("gonum SVD failed")
		}
		r1, r2 := reference.PartialTraces(p, c.m, c.n)
		t1, d1, t2, d2 := PartialTraces(w)
		if !mat.EqualApprox(t1, r1, 1e-12) || !mat.EqualApprox(t2, r2, 1e-12) {
			t.Errorf("%v: partial traces differ from gonum's", c)
		}
		if !(d1 >= 0 && d1 < 1e-12 && d2 >= 0 && d2 < 1e-12) {
			t.Errorf("%v: partial trace slack %g, %g", c, d1, d2)
		}
	}
}

// The bounds need no cache and keep no state: concurrent calls agree with
// a sequential one (run under the race detector in CI).
func TestConcurrentFlatteningBounds(t *testing.T) {
	rng := rand.New(rand.NewPCG(9, 10))
	data := reference.RandMatrices(rng, 5, 4, 6)
	w, err := subspace.New(context.Background(), subspace.Basis{Count: 5, Rows: 4, Cols: 6, Data: data}, subspace.Options{})
	if err != nil {
		t.Fatal(err)
	}
	h1, h2 := FlatteningBounds(context.Background(), w)
	done := make(chan error, 8)
	for g := 0; g < 8; g++ {
		go func() {
			a1, a2 := FlatteningBounds(context.Background(), w)
			PartialTraces(w)
			if a1 != h1 || a2 != h2 {
				done <- fmt.Errorf("concurrent results differ: %v %v", a1, a2)
				return
			}
			done <- nil
		}()
	}
	for g := 0; g < 8; g++ {
		if err := <-done; err != nil {
			t.Error(err)
		}
	}
}
