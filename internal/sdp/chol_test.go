package sdp

import (
	"context"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// paths runs f on each path this build has: the portable code (gonum's
// BLAS and plain loops) and, where the processor has them, the kernels of
// kernel_amd64.s; useKernels is restored after.
func paths(t *testing.T, f func(t *testing.T)) {
	t.Helper()
	defer func(v bool) { useKernels = v }(useKernels)
	useKernels = false
	t.Run("portable", f)
	if kernelsAvailable {
		useKernels = true
		t.Run("kernels", f)
	}
}

// The blocked factorisation agrees with gonum's mat.Cholesky (the reference
// library) on random positive definite matrices whose order is not a
// multiple of the block or tile sizes, solves to the accuracy backward
// stability promises, and reports an indefinite matrix and a cancelled
// context; on both paths. The orders cover the tile path's corners: one
// block column (k ≤ 128), block columns cut inside a tile (k mod 12, k mod
// 4 ≠ 0), the inner diagonal blocks (k = 5, 17), and enough column strips
// for the trailing update to be split between goroutines (k ≥ 320).
func TestCholAgainstGonum(t *testing.T) { paths(t, testChol) }

func testChol(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	for _, k := range []int{1, 5, 17, 63, 64, 65, 129, 300, 600} {
		g := mat.NewDense(k, k, nil)
		for i := 0; i < k; i++ {
			for j := 0; j < k; j++ {
				g.Set(i, j, rng.NormFloat64())
			}
		}
		a := mat.NewSymDense(k, nil)
		a.SymOuterK(1, g)
		for i := 0; i < k; i++ {
			a.SetSym(i, i, a.At(i, i)+float64(k)) // well conditioned
		}
		var ref mat.Cholesky
		if !ref.Factorize(a) {
			t.Fatal("gonum: not positive definite")
		}
		var ru mat.TriDense
		ref.UTo(&ru)
		var c chol
		ok, err := c.factor(context.Background(), a.RawSymmetric().Data, k)
		if !ok || err != nil {
			t.Fatalf("k=%d: factor %v %v", k, ok, err)
		}
		// Both are backward stable factorisations of the same matrix with a
		// positive diagonal, hence agree to a few units of roundoff times the
		// condition of the factor (Higham 2002, Thm 10.3 and §10.1.1): 1e-10
		// relative to ‖U‖ is ample at these orders and condition ≤ 10.
		var diff float64
		var norm float64
		for i := 0; i < k; i++ {
			for j := i; j < k; j++ {
				diff = math.Max(diff, math.Abs(c.u[i*k+j]-ru.At(i, j)))
				norm = math.Max(norm, math.Abs(ru.At(i, j)))
			}
		}
		if diff > 1e-10*norm {
			t.Errorf("k=%d: factors differ by %g (norm %g)", k, diff, norm)
		}
		b := make([]float64, k)
		for i := range b {
			b[i] = rng.NormFloat64()
		}
		x := append([]float64(nil), b...)
		c.solve(x)
		r := mat.NewVecDense(k, nil)
		r.MulVec(a, mat.NewVecDense(k, x))
		r.SubVec(r, mat.NewVecDense(k, b))
		if rn := mat.Norm(r, 2); rn > 1e-10*mat.Norm(mat.NewVecDense(k, b), 2) {
			t.Errorf("k=%d: residual %g", k, rn)
		}
	}
	// Indefinite: diag(1, −1) padded.
	k := 70
	a := make([]float64, k*k)
	for i := 0; i < k; i++ {
		a[i*k+i] = 1
	}
	a[67*k+67] = -1
	var c chol
	if ok, err := c.factor(context.Background(), a, k); ok || err != nil {
		t.Errorf("indefinite matrix: %v %v", ok, err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if _, err := c.factor(ctx, a, k); err == nil {
		t.Error("cancelled context not reported")
	}
}
