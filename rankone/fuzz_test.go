package rankone

import (
	"context"
	"math"
	"testing"

	"github.com/segre-lab/segre/subspace"
)

// FuzzVerify feeds the witness verifier arbitrary vectors (NaN, ±Inf,
// subnormals, huge and tiny magnitudes, zero). It must never panic; an
// accepted witness has 0 ≤ Upper ≤ 1 and Upper at least the certified
// flattening lower bound on d* (both are proven: Upper ≥ d(x, y) ≥ d* ≥
// Lower, so Upper < Lower would expose a false certificate).
func FuzzVerify(f *testing.F) {
	f.Add(1.0, 0.0, 0.0, 1.0, 0.0)
	f.Add(1e-300, 5e-324, 1e300, -1e308, 2.0)
	f.Add(math.NaN(), 1.0, 1.0, 1.0, 1.0)
	f.Add(0.0, 0.0, 1.0, 1.0, 1.0)
	// W = span{diag(2, 1)} in 2×3: h* = 4/5 (the top squared singular value
	// over the squared norm, common practice), and the flattening bound is
	// exact here, so Lower ≈ √(1/5) (checked to be positive below).
	w, err := subspace.New(context.Background(), subspace.Basis{Count: 1, Rows: 2, Cols: 3, Data: []float64{
		2, 0, 0, 0, 1, 0}}, subspace.Options{})
	if err != nil {
		f.Fatal(err)
	}
	_, lower := FlatteningBound(context.Background(), w)
	if !(lower > 0) {
		f.Fatalf("flattening lower bound %v; the check below would be empty", lower)
	}
	f.Fuzz(func(t *testing.T, x0, x1, y0, y1, y2 float64) {
		u, err := Verify(w, []float64{x0, x1}, []float64{y0, y1, y2})
		if err != nil {
			return
		}
		if !(u >= 0 && u <= 1) {
			t.Fatalf("Upper = %v", u)
		}
		if u < lower {
			t.Fatalf("Upper %v below the certified Lower %v", u, lower)
		}
	})
}
