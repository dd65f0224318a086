package rankone

import (
	"fmt"
	"math"

	"github.com/segre-lab/segre/internal/accurate"
	"github.com/segre-lab/segre/subspace"
)

// Complex subspaces. A subspace built by subspace.NewComplex is the real
// subspace W'' of 2m×2n matrices whose value is half the complex one
// (h = 2h'', see package subspace), so every strategy runs on it unchanged
// and its Results are in those real coordinates: the witness X = (re x,
// im x), Y = (re y, im y), and bounds on d'' with d² = 2d''² − 1. The
// functions below give the complex numbers; package segre reports them.

// VerifyComplex returns a certified upper bound on the complex distance
// d(x/‖x‖, y/‖y‖) for the real-coordinate witness (X, Y) of a complex
// subspace: subspace.ComplexResidualBound at X, Y scaled by powers of two,
// over a proven lower bound on ‖X‖‖Y‖ (as Verify). It returns an error for
// a real subspace or a bad witness.
func VerifyComplex(w *subspace.Subspace, x, y []float64) (float64, error) {
	if w.Field() != subspace.Complex {
		return 1, fmt.Errorf("%w: VerifyComplex of a real subspace", ErrLength)
	}
	return verifyWith(w, x, y, w.ComplexResidualBound)
}

// rankKey is what witnesses are ranked by: their certified Upper, or for a
// complex subspace their certified complex distance, which Upper (the
// realified distance, √((1 + d²)/2)) cannot resolve below about 1e-8.
func rankKey(w *subspace.Subspace, x, y []float64, upper float64) float64 {
	if w.Field() != subspace.Complex {
		return upper
	}
	if v, err := VerifyComplex(w, x, y); err == nil {
		return v
	}
	return math.Inf(1)
}

// ComplexLower turns a certified lower bound on d”* (the realified
// subspace's distance) into one on the complex d* = √(2d”*² − 1),
// rounded down (0 when nothing is proven).
func ComplexLower(lowerR float64) float64 {
	l2 := accurate.Down(float64(lowerR * lowerR))
	v := accurate.Down(2*l2 - 1) // 2·l2 is exact
	if !(v > 0) {
		return 0
	}
	return accurate.SqrtDown(v)
}

// ComplexUpper turns a certified upper bound on d”* into one on the
// complex d* (rounded up; at most 1). VerifyComplex at the witness is
// sharper for tiny distances.
func ComplexUpper(upperR float64) float64 {
	u2 := accurate.Up(float64(upperR * upperR))
	v := accurate.Up(2*u2 - 1)
	if !(v > 0) {
		return 0
	}
	return math.Min(1, accurate.SqrtUp(v))
}

// ComplexUpperAt returns the certified complex Upper of a witness (X, Y)
// of a complex subspace whose realified Upper is upperR: the smaller of
// ComplexUpper(upperR) and VerifyComplex at the witness.
func ComplexUpperAt(w *subspace.Subspace, x, y []float64, upperR float64) float64 {
	u := ComplexUpper(upperR)
	if v, err := VerifyComplex(w, x, y); err == nil && v < u {
		u = v
	}
	return u
}
