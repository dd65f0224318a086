package segre

import (
	"context"
	"math"
	"strings"
	"testing"
	"time"

	"github.com/segre-lab/segre/rankone/suite"
	"github.com/segre-lab/segre/subspace"
)

// CertifyComplex on the complex families with known answers (each
// family's doc names its source): the input-span interval contains the
// known d* (allowing 1e-12 for optima computed in floating point: the
// one-matrix value from gonum's SVD and the planted point, which lies in
// the span only up to the rounding of the mixing); subspaces containing a
// rank-one matrix are found to 1e-10; the completely entangled subspaces
// get a certified Lower > 0; and for 2×2 and 2×3 the interval closes to
// the requested gap (branch-and-bound over the phase-reduced sphere).
func TestCertifyComplexClosedForms(t *testing.T) {
	for _, in := range suite.ComplexClosedForms(testing.Short()) {
		t.Run(in.Name, func(t *testing.T) {
			_, rep, err := CertifyComplex(context.Background(), in.Basis, Options{Budget: 20 * time.Second})
			if err != nil {
				t.Fatal(err)
			}
			if rep.Input == nil || !rep.Input.Proven {
				t.Fatalf("input span not proven: %+v", rep.Input)
			}
			lo, up := rep.Input.Lower, rep.Input.Upper
			if !math.IsNaN(in.Optimum) && (lo > in.Optimum+1e-12 || up < in.Optimum-1e-12) {
				t.Errorf("[%g, %g] excludes d* = %g", lo, up, in.Optimum)
			}
			if in.Optimum == 0 && rep.Upper > 1e-10 {
				t.Errorf("a rank-one point exists but Upper = %g", rep.Upper)
			}
			if in.Family == "completely-entangled" && !(rep.Lower > 0) {
				t.Errorf("no product vector, but Lower = %g", rep.Lower)
			}
			m, n := in.Basis.Rows, in.Basis.Cols
			if m*n <= 6 && rep.Stop != GapReached {
				t.Errorf("2×2 or 2×3: stopped by %v with [%g, %g]", rep.Stop, rep.Lower, rep.Upper)
			}
			if rep.XC == nil || len(rep.XC) != m || len(rep.YC) != n {
				t.Errorf("complex witness missing")
			}
			t.Logf("[%.10g, %.10g] %v in %v, lower by %q", rep.Lower, rep.Upper, rep.Stop, rep.Elapsed, rep.LowerBy)
		})
	}
}

// Real and complex answers differ on span{I, J}: over R, d* = 1/√2 (no
// real rank-one matrix: det(aI + bJ) = a² + b² > 0, and the value is
// derived in the suite's Hurwitz–Radon family), over C it is 0.
func TestRealVersusComplex(t *testing.T) {
	in := suite.PencilIJ()
	cb := in.Basis
	rb := make([]float64, len(cb.Data))
	for i, z := range cb.Data {
		rb[i] = realPart(z) // the pencil's matrices are real
	}
	_, rrep, err := CertifyBasis(context.Background(), subspace.Basis{Count: cb.Count, Rows: cb.Rows, Cols: cb.Cols, Data: rb}, Options{})
	if err != nil {
		t.Fatal(err)
	}
	_, crep, err := CertifyComplex(context.Background(), in.Basis, Options{})
	if err != nil {
		t.Fatal(err)
	}
	if !(rrep.Lower > 0.7071 && crep.Upper < 1e-12) {
		t.Errorf("real [%g, %g], complex [%g, %g]", rrep.Lower, rrep.Upper, crep.Lower, crep.Upper)
	}
	if !strings.Contains(crep.Field.String(), "complex") {
		t.Errorf("field %v", crep.Field)
	}
}

func realPart(z complex128) float64 { return real(z) }
