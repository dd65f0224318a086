package suite_test

import (
	"context"
	"math"
	"testing"

	"github.com/segre-lab/segre/net"
	"github.com/segre-lab/segre/rankone"
	"github.com/segre-lab/segre/rankone/suite"
)

// The structured families' optima (derived on DirectSum and KroneckerFull)
// checked against branch-and-bound, an independent global method, on small
// members: its certified interval must contain the derived d*, and close
// on it to the requested gap.
func TestStructuredAgainstBranchBound(t *testing.T) {
	ctx := context.Background()
	for _, in := range []suite.Instance{
		suite.DirectSum(suite.OneMatrix(2, 3, 1), suite.HurwitzRadon(2, 2)),   // 4×5: d* = min(σ-tail, 1/√2)
		suite.Rotated(suite.KroneckerFull(suite.HurwitzRadon(2, 2), 1, 3), 2), // 2×6: d* = 1/√2
		suite.Rotated(suite.KroneckerFull(suite.OneMatrix(2, 2, 3), 1, 3), 4), // 2×6: one matrix's d*
	} {
		w := suite.MustNew(t, in)
		r, err := (&net.BranchBound{Gap: 1e-7}).Search(ctx, w)
		if err != nil {
			t.Fatalf("%s: %v", in.Name, err)
		}
		if r.Lower > in.Optimum || r.Upper < in.Optimum {
			t.Errorf("%s: branch-and-bound [%.12f, %.12f] excludes the derived d* %.12f", in.Name, r.Lower, r.Upper, in.Optimum)
		}
		if r.Upper-r.Lower > 1e-6 {
			t.Errorf("%s: interval [%v, %v] did not close", in.Name, r.Lower, r.Upper)
		}
	}
}

// The known optimal point of every structured instance has the derived
// distance (certified Upper at X0, Y0 within 1e-12 of d*; the rotations and
// embeddings are exact up to rounding), and the flattening bound never
// exceeds d*.
func TestStructuredWitnesses(t *testing.T) {
	ctx := context.Background()
	for _, in := range suite.Structured(true) {
		w := suite.MustNew(t, in)
		u, err := rankone.Verify(w, in.X0, in.Y0)
		if err != nil {
			t.Fatal(err)
		}
		if math.Abs(u-in.Optimum) > 1e-12 {
			t.Errorf("%s: Upper at the known point %.15f, d* %.15f", in.Name, u, in.Optimum)
		}
		if _, lo := rankone.FlatteningBound(ctx, w); lo > in.Optimum {
			t.Errorf("%s: flattening Lower %v above d* %v", in.Name, lo, in.Optimum)
		}
	}
}
