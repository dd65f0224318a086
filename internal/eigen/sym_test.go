package eigen

import (
	"math"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// Sym never panics and never returns gonum v0.17.0's wrong eigenvalue: on
// the matrix of its doc comment it returns those of diag(−0.2, 0, 0, 0) up
// to 1e-300 (derived: the flushed entries are ≤ 1.5e-301, so by Weyl's
// inequality the eigenvalues move by at most ‖E‖₂ ≤ 2·1.5e-301), with and
// without vectors; on NaN or ±Inf it reports failure.
func TestSymNeverPanics(t *testing.T) {
	a := mat.NewSymDense(4, []float64{
		-0.2, -0, -0, -1.5000000000000002e-301,
		-0, -0, -5e-302, -0,
		-0, -5e-302, -0, -0,
		-1.5000000000000002e-301, -0, -0, -0})
	for _, vectors := range []bool{false, true} {
		v, _, ok := Sym(a, vectors)
		if !ok {
			t.Fatalf("vectors %v: no decomposition", vectors)
		}
		want := []float64{-0.2, 0, 0, 0}
		for i := range v {
			if math.Abs(v[i]-want[i]) > 1e-300 {
				t.Errorf("vectors %v: eigenvalue %d = %v, want %v", vectors, i, v[i], want[i])
			}
		}
	}
	for _, bad := range []float64{math.NaN(), math.Inf(1), math.Inf(-1)} {
		if _, _, ok := Sym(mat.NewSymDense(2, []float64{1, bad, bad, 1}), false); ok {
			t.Errorf("entry %v accepted", bad)
		}
	}
	// Ordinary matrices, at ordinary and extreme scales: the eigenvalues of
	// s·[[2, 1], [1, 2]] are s and 3s (derived), and the eigenvectors
	// (1, ∓1)/√2.
	for _, s := range []float64{1, 1e-300, 1e300, 5e-324} {
		v, vec, ok := Sym(mat.NewSymDense(2, []float64{2 * s, s, s, 2 * s}), true)
		// (At s = 5e-324 the entries are subnormal but exact: the scaled
		// matrix is [[2, 1], [1, 2]] again.)
		if !ok || math.Abs(v[0]-s) > 1e-15*s || math.Abs(v[1]-3*s) > 1e-15*3*s {
			t.Errorf("scale %g: %v %v", s, ok, v)
			continue
		}
		if math.Abs(math.Abs(vec.At(0, 1))-math.Sqrt(0.5)) > 1e-15 {
			t.Errorf("scale %g: eigenvector %v", s, vec.At(0, 1))
		}
	}
}
