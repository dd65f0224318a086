package suite

import (
	"context"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"

	"github.com/segre-lab/segre/subspace"
)

// The Hurwitz–Radon matrices satisfy A_sᵀA_t + A_tᵀA_s = 2δ_st I and
// A_sA_tᵀ + A_tA_sᵀ = 2δ_st I (the relations used in HurwitzRadon's
// derivation), checked with gonum products.
func TestHurwitzRadonRelations(t *testing.T) {
	for _, n := range []int{2, 4} {
		a := HurwitzRadonMatrices(n)
		for s := range a {
			for u := range a {
				as, au := mat.NewDense(n, n, a[s]), mat.NewDense(n, n, a[u])
				var p, q, p2, q2 mat.Dense
				p.Mul(as.T(), au)
				q.Mul(au.T(), as)
				p.Add(&p, &q)
				p2.Mul(as, au.T())
				q2.Mul(au, as.T())
				p2.Add(&p2, &q2)
				for i := 0; i < n; i++ {
					for j := 0; j < n; j++ {
						want := 0.0
						if s == u && i == j {
							want = 2
						}
						if p.At(i, j) != want || p2.At(i, j) != want {
							t.Fatalf("n=%d: relation fails for (%d, %d)", n, s, u)
						}
					}
				}
			}
		}
	}
}

// Known optimal points attain their optimum: evaluated with the subspace
// contractions, whose accuracy against gonum is tested in package subspace.
func TestKnownPointsAttainOptimum(t *testing.T) {
	insts := []Instance{OneMatrix(4, 6, 1), Symmetric(4), HurwitzRadon(4, 3), HurwitzRadon(2, 1), Planted(5, 6, 7, 2)}
	for _, in := range append(insts, Rotated(insts[0], 3), Rotated(insts[4], 4)) {
		w, err := subspace.New(context.Background(), in.Basis, subspace.Options{})
		if err != nil {
			t.Fatal(err)
		}
		d := math.Sqrt(w.Residual(in.X0, in.Y0))
		if math.Abs(d-in.Optimum) > 1e-13 {
			t.Errorf("%s: d(x₀, y₀) = %.17g, Optimum %.17g", in.Name, d, in.Optimum)
		}
	}
	// Antisymmetric: h(x, y) = (1 − (x·y)²)/2 at random points (derived).
	rng := rand.New(rand.NewPCG(1, 2))
	w, _ := subspace.New(context.Background(), Antisymmetric(5).Basis, subspace.Options{})
	for i := 0; i < 10; i++ {
		x, y := unit(gaussian(rng, 5)), unit(gaussian(rng, 5))
		var c float64
		for k := range x {
			c += x[k] * y[k]
		}
		if h := w.Value(x, y); math.Abs(h-(1-c*c)/2) > 1e-14 {
			t.Errorf("antisymmetric h = %v, want %v", h, (1-c*c)/2)
		}
	}
	// Hurwitz–Radon with p = n: h ≡ 1/n (derived).
	w, _ = subspace.New(context.Background(), HurwitzRadon(4, 4).Basis, subspace.Options{})
	for i := 0; i < 10; i++ {
		x, y := unit(gaussian(rng, 4)), unit(gaussian(rng, 4))
		if h := w.Value(x, y); math.Abs(h-0.25) > 1e-14 {
			t.Errorf("HR(4,4) h = %v, want 1/4", h)
		}
	}
}

// Haar matrices are orthogonal (QᵀQ = I to rounding, common practice 1e-14).
func TestHaarOrthogonal(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 3))
	q := mat.NewDense(6, 6, Haar(rng, 6))
	var p mat.Dense
	p.Mul(q.T(), q)
	for i := 0; i < 6; i++ {
		for j := 0; j < 6; j++ {
			want := 0.0
			if i == j {
				want = 1
			}
			if math.Abs(p.At(i, j)-want) > 1e-14 {
				t.Fatalf("QᵀQ[%d,%d] = %v", i, j, p.At(i, j))
			}
		}
	}
}

// The normed-algebra complement has h ≡ 1 − 1/n (derived in its doc).
func TestNormedAlgebraComplementConstant(t *testing.T) {
	rng := rand.New(rand.NewPCG(4, 4))
	for _, n := range []int{2, 4} {
		w, err := subspace.New(context.Background(), NormedAlgebraComplement(n, 1).Basis, subspace.Options{})
		if err != nil {
			t.Fatal(err)
		}
		if w.Dim() != n*n-n {
			t.Errorf("dim %d, want %d", w.Dim(), n*n-n)
		}
		for i := 0; i < 10; i++ {
			x, y := unit(gaussian(rng, n)), unit(gaussian(rng, n))
			if h := w.Value(x, y); math.Abs(h-(1-1/float64(n))) > 1e-13 {
				t.Errorf("n=%d: h = %v, want %v", n, h, 1-1/float64(n))
			}
		}
	}
}
