package suite_test

import (
	"context"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/segre-lab/segre/net"
	"github.com/segre-lab/segre/rankone"
	"github.com/segre-lab/segre/rankone/searchtest"
	"github.com/segre-lab/segre/rankone/suite"
	"github.com/segre-lab/segre/sos"
	"github.com/segre-lab/segre/subspace"
)

// randomComplexInstance draws complex instance i: a family, a size (m, n ≤
// 3, so that branch-and-bound over the phase-reduced sphere runs) and a
// seed, optionally rotated by random unitaries.
func randomComplexInstance(i int) suite.ComplexInstance {
	rng := rand.New(rand.NewPCG(20261203, uint64(i)))
	m, n := 1+rng.IntN(3), 1+rng.IntN(3)
	seed := uint64(i) + 1
	var in suite.ComplexInstance
	switch rng.IntN(6) {
	case 0:
		in = suite.ComplexOneMatrix(m, n, seed)
	case 1:
		in = suite.ComplexAntisymmetric(max(m, 2))
	case 2:
		in = suite.ComplexPlanted(m, n, 1+rng.IntN(m*n), seed)
	case 3:
		in = suite.CompletelyEntangled(max(m, 2), max(n, 2))
	case 4:
		in = suite.ComplexCritical(max(m, 2), max(n, 2), seed)
	default:
		in = suite.PencilIJ()
	}
	if rng.IntN(2) == 0 {
		in = suite.RotatedComplex(in, seed)
	}
	return in
}

// complexIntervals runs every searcher on the complex subspace w (in its
// real coordinates) and translates each certified interval to the complex
// distance: Lower by rankone.ComplexLower, Upper the smaller of
// rankone.ComplexUpper and VerifyComplex at the witness.
func complexIntervals(ctx context.Context, w *subspace.Subspace, searchers []rankone.Searcher) []bound {
	var bs []bound
	for _, s := range searchers {
		res, err := s.Search(ctx, w)
		if err != nil && res.X == nil {
			continue
		}
		bs = append(bs, bound{rankone.NameOf(s), rankone.ComplexLower(res.Lower), rankone.ComplexUpperAt(w, res.X, res.Y, res.Upper)})
	}
	return bs
}

// The never-lies property over C: on random complex instances every
// strategy's translated interval is proper, no Lower exceeds another's
// Upper (no tolerance: all are proven for the same stored subspace), and
// the known complex d* lies inside every interval up to 1e-9 wherever the
// input-span distance θ (subspace.ComplexInputDistance) is proven below
// 1e-10, so that this slack is ample (|Δd*| ≤ θ).
func TestNeverLiesComplex(t *testing.T) {
	count := 300
	if testing.Short() {
		count = 40
	}
	if *neverLiesN > 0 {
		count = *neverLiesN / 5
	}
	ctx := context.Background()
	checked := 0
	for i := 0; i < count; i++ {
		in := randomComplexInstance(i)
		w := suite.MustNewComplex(t, in)
		// The known d* is of the input's span: compare with it only when the
		// stored subspace is proven within 1e-10 of that span.
		th, terr := subspace.ComplexInputDistance(ctx, in.Basis, w)
		knownOK := terr == nil && th <= 1e-10
		searchers := []rankone.Searcher{
			rankone.Flattening{}, &rankone.ALS{}, &rankone.TrustRegion{},
			&rankone.MultiStart{Starts: 4, Seed: uint64(i)}, &rankone.AllPoints{},
			&net.BranchBound{Gap: 1e-3, MaxNodes: 3000},
		}
		if net.SideDimension(w) <= 3 {
			searchers = append(searchers, &net.Exhaustive{Epsilon: 0.2})
		}
		if cm, cn := w.ComplexShape(); cm*cn <= 16 && i%3 == 0 {
			searchers = append(searchers, &sos.Bound{}) // the complex PPT relaxation
		}
		bs := complexIntervals(ctx, w, searchers)
		if msg := inconsistent(bs); msg != "" {
			t.Fatalf("instance %d (%s): %s", i, in.Name, msg)
		}
		for _, a := range bs {
			if knownOK && !math.IsNaN(in.Optimum) && (a.lower > in.Optimum+1e-9 || a.upper < in.Optimum-1e-9) {
				t.Fatalf("instance %d (%s): %s gives [%v, %v], d* = %v", i, in.Name, a.name, a.lower, a.upper, in.Optimum)
			}
		}
		checked += len(bs)
	}
	t.Logf("%d complex instances, %d certified intervals compared pairwise", count, checked)
}

// The conformance suite on the realified instances (real subspaces of
// 2m×2n matrices with the known d”* = √((1 + d*²)/2)): every strategy
// keeps the Searcher contract on them.
func TestConformanceRealified(t *testing.T) {
	var insts []suite.Instance
	for _, in := range suite.ComplexClosedForms(true) {
		insts = append(insts, in.Realified())
	}
	for _, s := range []func() rankone.Searcher{
		func() rankone.Searcher { return &rankone.ALS{} },
		func() rankone.Searcher { return &rankone.TrustRegion{} },
		func() rankone.Searcher { return rankone.Flattening{} },
	} {
		t.Run(rankone.NameOf(s()), func(t *testing.T) {
			searchtest.Run(t, s, searchtest.Options{Instances: insts})
		})
	}
}
