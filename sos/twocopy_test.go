package sos

import (
	"context"
	"errors"
	"testing"

	"github.com/segre-lab/segre/rankone"
	"github.com/segre-lab/segre/rankone/searchtest"
	"github.com/segre-lab/segre/rankone/suite"
)

// TwoCopy reports EigenBound as a certified Lower: on the antisymmetric
// subspace the bound is h* ≤ 3/4 (TestEigenBoundAntisymmetric's value), so
// Lower = √(1 − 3/4) = 1/2 rounded down (derived: d = √(1 − h)), below
// d* = √(1/2) (suite.Antisymmetric's derivation); its Upper is a valid
// witness's. A complex subspace is refused with ErrTooLarge.
func TestTwoCopySearcher(t *testing.T) {
	in := suite.Antisymmetric(4)
	r, err := (&TwoCopy{}).Search(context.Background(), mustNew(t, in))
	if err != nil {
		t.Fatal(err)
	}
	if r.Lower > 0.5 || r.Lower < 0.5-1e-8 || r.LowerBy != (&TwoCopy{}).Name() {
		t.Errorf("Lower %.17g by %q, want 1/2 rounded down", r.Lower, r.LowerBy)
	}
	if r.Upper < in.Optimum-1e-12 || r.X == nil {
		t.Errorf("Upper %g below d* %g, or no witness", r.Upper, in.Optimum)
	}
	w := suite.MustNewComplex(t, suite.PencilIJ())
	if r, err := (&TwoCopy{}).Search(context.Background(), w); !errors.Is(err, ErrTooLarge) || r.Lower != 0 {
		t.Errorf("complex: %v, Lower %g", err, r.Lower)
	}
}

// TwoCopy passes the conformance suite (no accuracy claim: it searches for
// no witness) on the closed-form instances.
func TestTwoCopyConformance(t *testing.T) {
	searchtest.Run(t, func() rankone.Searcher { return &TwoCopy{} }, searchtest.Options{})
}

// EigenBoundOrder names the form EigenBound uses (derived from its two
// forms): k·n for a stored W (a Gaussian 4×4 subspace of dimension 8 is
// stored as W: 8·4 = 32), m·n(n+1)/2 for a stored complement (dimension
// 12 of 16 is stored as its complement of dimension 4: 4·4·5/2 = 40), and
// not ok beyond 2500 (a Gaussian 12×24 subspace of dimension 280 stored as
// its complement: 12·24·25/2 = 3600).
func TestEigenBoundOrder(t *testing.T) {
	for _, c := range []struct {
		in    suite.Instance
		order int
		ok    bool
	}{
		{suite.Random(4, 4, 8, 1), 32, true},
		{suite.Random(4, 4, 12, 1), 40, true},
		{suite.Random(12, 24, 280, 1), 3600, false},
	} {
		w := mustNew(t, c.in)
		if got, ok := EigenBoundOrder(w); got != c.order || ok != c.ok {
			t.Errorf("%s (stored %d, complement %v): order %d, %v; want %d, %v", c.in.Name, w.Stored().Count(), w.Stored().Complement(), got, ok, c.order, c.ok)
		}
	}
}
