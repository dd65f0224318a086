package sdp

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
	"gonum.org/v1/gonum/mat"

	"github.com/segre-lab/segre/internal/eigen"
)

func randomMatrix(rng *rand.Rand, n int) []float64 {
	a := make([]float64, n*n)
	for i := range a {
		a[i] = rng.NormFloat64()
	}
	return a
}

func randomSym(rng *rand.Rand, n int) []float64 {
	a := randomMatrix(rng, n)
	symPart(n, a, a)
	return a
}

// The block products agree with gonum's Dgemm (the reference library) for
// every combination of transposes, at orders that are and are not
// multiples of the tile's 4 rows and 12 columns, on both paths. Bound: each
// entry is an inner product of length n, computed in any order with or
// without fused multiply-adds, so it errs by at most γ_n Σ_l |a_il||b_lj|
// (Higham, Accuracy and Stability of Numerical Algorithms, 2nd ed., 2002,
// §3.1), and the two results by at most twice that.
func TestGemmAgainstGonum(t *testing.T) {
	paths(t, func(t *testing.T) {
		rng := rand.New(rand.NewPCG(5, 6))
		var pr product
		for _, n := range []int{1, 3, 4, 5, 12, 13, 31, 64} {
			a, b := randomMatrix(rng, n), randomMatrix(rng, n)
			for _, ta := range []bool{false, true} {
				for _, tb := range []bool{false, true} {
					c := make([]float64, n*n)
					pr.gemm(n, ta, a, tb, b, c)
					ref := make([]float64, n*n)
					abs := make([]float64, n*n)
					op := func(tr bool) blas.Transpose {
						if tr {
							return blas.Trans
						}
						return blas.NoTrans
					}
					blas64.Gemm(op(ta), op(tb), 1, general(n, a), general(n, b), 0, general(n, ref))
					aa, bb := make([]float64, n*n), make([]float64, n*n)
					for i := range a {
						aa[i], bb[i] = math.Abs(a[i]), math.Abs(b[i])
					}
					blas64.Gemm(op(ta), op(tb), 1, general(n, aa), general(n, bb), 0, general(n, abs))
					g := float64(n) * 0x1p-53 / (1 - float64(n)*0x1p-53)
					for i := range c {
						if math.Abs(c[i]-ref[i]) > 2*g*abs[i]*(1+1e-12) {
							t.Fatalf("n=%d ta=%v tb=%v entry %d: %v, gonum %v", n, ta, tb, i, c[i], ref[i])
						}
					}
				}
			}
		}
	})
}

// maxEigSym agrees with the largest eigenvalue from eigen.Sym (gonum's
// EigenSym, the reference library) on random symmetric matrices and on
// matrices with known spectra. Bound: both are backward stable, so each
// returns an eigenvalue of A + E with ‖E‖₂ ≤ c·n·u‖A‖_F (Golub, Van Loan,
// Matrix Computations, 4th ed., §8.3.1 and §8.4.1), and by Weyl's
// inequality the two differ by at most the sum; c·n = 100n is generous at
// these orders.
func TestMaxEigSym(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 8))
	check := func(name string, n int, a []float64, want float64, haveWant bool) {
		t.Helper()
		var fro float64
		for _, v := range a {
			fro += v * v
		}
		fro = math.Sqrt(fro)
		s := mat.NewSymDense(n, append([]float64(nil), a...))
		if !haveWant {
			v, _, ok := eigen.Sym(s, false)
			if !ok {
				t.Fatalf("%s: reference failed", name)
			}
			want = v[len(v)-1]
		}
		got, ok := maxEigSym(n, append([]float64(nil), a...), nil)
		if !ok {
			t.Fatalf("%s: failed", name)
		}
		if tol := 100 * float64(n) * 0x1p-53 * fro; math.Abs(got-want) > tol {
			t.Errorf("%s: λmax %v, want %v (tolerance %v)", name, got, want, tol)
		}
	}
	for _, n := range []int{1, 2, 3, 5, 17, 40, 100} {
		check(fmt.Sprintf("random n=%d", n), n, randomSym(rng, n), 0, false)
		// Scaled far from 1: the power-of-two scaling keeps it exact.
		big := randomSym(rng, n)
		for i := range big {
			big[i] *= 1e300
		}
		check(fmt.Sprintf("1e300 n=%d", n), n, big, 0, false)
	}
	// Known spectra (derived): diag(−3, 1, 2) → 2; the identity → 1; the
	// zero matrix → 0; the all-ones n×n matrix (rank one, eigenvalue n);
	// −J (largest eigenvalue 0, n−1 times).
	check("diag", 3, []float64{-3, 0, 0, 0, 1, 0, 0, 0, 2}, 2, true)
	id := make([]float64, 36)
	for i := 0; i < 6; i++ {
		id[i*6+i] = 1
	}
	check("identity", 6, id, 1, true)
	check("zero", 4, make([]float64, 16), 0, true)
	ones, negOnes := make([]float64, 49), make([]float64, 49)
	for i := range ones {
		ones[i], negOnes[i] = 1, -1
	}
	check("ones", 7, ones, 7, true)
	check("minus ones", 7, negOnes, 0, true)
	if _, ok := maxEigSym(2, []float64{1, math.NaN(), math.NaN(), 1}, nil); ok {
		t.Error("NaN entry accepted")
	}
}

// stepTop/stepFromTop give the largest α with S + αD ⪰ 0 (derived in the
// doc of stepTop): at 0.999α the matrix has a Cholesky factor, at 1.001α it
// has none; a positive semidefinite D gives the cap 10⁶. On both paths.
func TestStepLength(t *testing.T) {
	paths(t, func(t *testing.T) {
		rng := rand.New(rand.NewPCG(9, 10))
		var pr product
		for _, n := range []int{1, 4, 13, 30} {
			g := randomMatrix(rng, n)
			s := make([]float64, n*n)
			pr.gemm(n, false, g, true, g, s) // GGᵀ + I ≻ 0
			symPart(n, s, s)
			for i := 0; i < n; i++ {
				s[i*n+i]++
			}
			v := make([]float64, n*n)
			if !factorUpper(n, s, v) || !inverseFactor(n, v, v) {
				t.Fatal("factor failed")
			}
			t1, t2 := make([]float64, n*n), make([]float64, n*n)
			d := randomSym(rng, n)
			d[0] = -math.Abs(d[0]) - 1 // a negative diagonal entry: D is not ⪰ 0
			alpha := stepFromTop(pr.stepTop(n, v, true, d, t1, t2))
			pd := func(f float64) bool {
				m := make([]float64, n*n)
				for i := range m {
					m[i] = s[i] + f*alpha*d[i]
				}
				return factorUpper(n, m, t1)
			}
			if alpha >= 1e6 {
				t.Fatalf("n=%d: indefinite D gave the cap", n)
			}
			if !pd(0.999) || pd(1.001) {
				t.Errorf("n=%d: α = %v is not the distance to the boundary", n, alpha)
			}
			// D = GGᵀ ⪰ 0: no boundary in that direction.
			pr.gemm(n, false, g, true, g, d)
			symPart(n, d, d)
			if a := stepFromTop(pr.stepTop(n, v, true, d, t1, t2)); a != 1e6 {
				t.Errorf("n=%d: PSD direction gave step %v, want the cap 1e6", n, a)
			}
		}
	})
}
