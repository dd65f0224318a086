package verified

import (
	"math"
	"math/rand/v2"
	"testing"

	"github.com/segre-lab/segre/internal/reference"
	"gonum.org/v1/gonum/mat"
)

func randSym(rng *rand.Rand, n int, eig []float64) *mat.SymDense {
	// Q diag(eig) Qᵀ with Q from gonum's QR of a Gaussian matrix.
	q := reference.RandOrthogonal(rng, n)
	var a mat.Dense
	a.Mul(q, mat.NewDiagDense(n, eig))
	a.Mul(&a, q.T())
	s := mat.NewSymDense(n, nil)
	for i := 0; i < n; i++ {
		for j := i; j < n; j++ {
			s.SetSym(i, j, (a.At(i, j)+a.At(j, i))/2)
		}
	}
	return s
}

// The proven bounds bracket gonum's eigenvalues (reference library) and are
// tight to a few multiples of n·u·‖A‖ (Rump 2006 test; derived on MinEigLower).
func TestEigenBoundsAgainstGonum(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 1))
	for _, n := range []int{1, 2, 5, 20, 60} {
		eig := make([]float64, n)
		for i := range eig {
			eig[i] = rng.NormFloat64()
		}
		a := randSym(rng, n, eig)
		var es mat.EigenSym
		if !es.Factorize(a, false) {
			t.Fatal("EigenSym failed")
		}
		vals := es.Values(nil)
		lmin, lmax := vals[0], vals[n-1]
		lo := MinEigLower(a, lmin)
		hi := MaxEigUpper(a, lmax)
		// gonum's values are accurate to about n·u·‖A‖ (backward stable
		// eigensolver, common practice); the proven bounds must lie outside
		// them up to that accuracy and be no looser than 1e-10.
		acc := 100 * float64(n) * 0x1p-52 * 4
		if lo > lmin+acc || hi < lmax-acc {
			t.Errorf("n=%d: bounds [%v, %v] do not contain [%v, %v]", n, lo, hi, lmin, lmax)
		}
		if lmin-lo > 1e-10 || hi-lmax > 1e-10 {
			t.Errorf("n=%d: bounds loose: %v below, %v above", n, lmin-lo, hi-lmax)
		}
	}
}

// Exact cases (derived): the identity has λ = 1; the rank-one PSD matrix
// 11ᵀ has λmin = 0 exactly and λmax = n; a bad guess still gives a valid bound.
func TestEigenBoundsExact(t *testing.T) {
	n := 7
	id := mat.NewSymDense(n, nil)
	ones := mat.NewSymDense(n, nil)
	for i := 0; i < n; i++ {
		id.SetSym(i, i, 1)
		for j := i; j < n; j++ {
			ones.SetSym(i, j, 1)
		}
	}
	if lo := MinEigLower(id, 1); lo > 1 || lo < 1-1e-13 {
		t.Errorf("identity: λmin bound %v", lo)
	}
	if hi := MaxEigUpper(id, 1); hi < 1 || hi > 1+1e-13 {
		t.Errorf("identity: λmax bound %v", hi)
	}
	if lo := MinEigLower(ones, 0); lo > 0 {
		t.Errorf("11ᵀ: λmin bound %v > 0", lo)
	}
	if hi := MaxEigUpper(ones, float64(n)); hi < float64(n) || hi > float64(n)+1e-12 {
		t.Errorf("11ᵀ: λmax bound %v", hi)
	}
	for _, g := range []float64{-100, 100, math.NaN()} {
		if hi := MaxEigUpper(ones, g); hi < float64(n) {
			t.Errorf("guess %v: λmax bound %v below %d", g, hi, n)
		}
	}
	bad := mat.NewSymDense(2, []float64{1, math.NaN(), math.NaN(), 1})
	if lo := MinEigLower(bad, 0); !math.IsInf(lo, -1) {
		t.Errorf("NaN matrix: bound %v, want -Inf", lo)
	}
}
