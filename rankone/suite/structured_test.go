package suite_test

import (
	"context"
	"math"
	"testing"

	"github.com/segre-lab/segre/net"
	"github.com/segre-lab/segre/rankone"
	"github.com/segre-lab/segre/rankone/suite"
	"github.com/segre-lab/segre/sos"
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

// The UPB complement (Bennett et al. 1999): W has dimension 4, level one
// proves nothing there (its projector is
// PPT-invariant, derived on UPBComplement), and branch-and-bound, an
// independent global method, proves d* > 0 (the basis is unextendible);
// embedded in 6×6 (derived on Embed) the same interval holds.
func TestUPBComplement(t *testing.T) {
	ctx := context.Background()
	in := suite.UPBComplement()
	w := suite.MustNew(t, in)
	if w.Dim() != 4 {
		t.Fatalf("dimension %d, want 4", w.Dim())
	}
	bb, err := (&net.BranchBound{Gap: 1e-4}).Search(ctx, w)
	if err != nil {
		t.Fatal(err)
	}
	if !(bb.Lower > 0.05) {
		t.Errorf("branch-and-bound Lower %v: the UPB complement holds no rank-one matrix", bb.Lower)
	}
	l1, err := (&sos.Bound{}).Search(ctx, w)
	if err != nil {
		t.Fatal(err)
	}
	if l1.Lower > 1e-6 {
		t.Errorf("level one proved Lower %v on a PPT-invariant projector (expected nothing)", l1.Lower)
	}
	l2, err := (&sos.LevelTwo{}).Search(ctx, w)
	if err != nil {
		t.Fatal(err)
	}
	if l2.Lower > bb.Upper || l2.Lower <= 0 {
		t.Errorf("level two Lower %v, branch-and-bound [%v, %v]", l2.Lower, bb.Lower, bb.Upper)
	}
	e := suite.Embed(in, 6, 6)
	we := suite.MustNew(t, e)
	ms, _ := (&rankone.MultiStart{Starts: 16}).Search(ctx, we)
	if ms.Upper < bb.Lower-1e-9 {
		t.Errorf("embedded: a witness at %v below the 3×3 Lower %v", ms.Upper, bb.Lower)
	}
	t.Logf("UPB complement: branch-and-bound [%v, %v], level two Lower %v", bb.Lower, bb.Upper, l2.Lower)
}
