package verified

import (
	"math"
	"math/rand/v2"
	"testing"

	"github.com/segre-lab/segre/internal/reference"
	"gonum.org/v1/gonum/mat"
)

// InverseNormUpper bounds ‖A⁻¹‖₂ = 1/σ_min(A) from above on matrices with
// prescribed singular values (A = U diag(σ) Vᵀ with Haar-like orthogonal
// U, V from gonum's QR): the bound is at least 1/σ_min as gonum's SVD
// computes it (reference library), less the SVD's own error: σ_min is
// computed with absolute error about n·u·σ_max (common practice: backward
// stable SVD, Weyl), so 10·n·u·cond relative is allowed; and at most √n/σ_min·1.01 (derived:
// ‖X‖_F ≤ √n‖X‖₂, α tiny). It refuses a singular matrix.
func TestInverseNormUpper(t *testing.T) {
	rng := rand.New(rand.NewPCG(41, 42))
	for _, c := range []struct {
		n    int
		cond float64
	}{{3, 10}, {5, 1e6}, {8, 1e12}, {4, 1e14}} {
		a := withSingularValues(rng, c.n, c.cond)
		var svd mat.SVD
		svd.Factorize(mat.NewDense(c.n, c.n, append([]float64(nil), a...)), mat.SVDNone)
		s := svd.Values(nil)
		want := 1 / s[c.n-1]
		got, ok := InverseNormUpper(a, c.n, nil)
		if !ok {
			t.Fatalf("n=%d cond %g: not proven", c.n, c.cond)
		}
		slack := math.Min(0.5, 10*float64(c.n)*0x1p-53*c.cond)
		if got < want*(1-slack) || got > want*math.Sqrt(float64(c.n))*1.01 {
			t.Errorf("n=%d cond %g: bound %g, 1/σ_min = %g", c.n, c.cond, got, want)
		}
	}
	if _, ok := InverseNormUpper([]float64{1, 2, 2, 4}, 2, nil); ok {
		t.Error("singular matrix proven nonsingular")
	}
}

func withSingularValues(rng *rand.Rand, n int, cond float64) []float64 {
	u, v := reference.RandOrthogonal(rng, n), reference.RandOrthogonal(rng, n)
	d := mat.NewDense(n, n, nil)
	for i := 0; i < n; i++ {
		d.Set(i, i, math.Pow(cond, -float64(i)/float64(n-1)))
	}
	var a mat.Dense
	a.Product(u, d, v.T())
	return a.RawMatrix().Data
}
