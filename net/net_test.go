package net

import (
	"context"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"github.com/segre-lab/segre/rankone"
	"github.com/segre-lab/segre/rankone/searchtest"
	"github.com/segre-lab/segre/rankone/suite"
	"github.com/segre-lab/segre/subspace"
)

// The covering-radius claim itself (derived in the package doc): random unit
// vectors lie within ε of the direction of some net point or its negative,
// found by brute force over the stored net.
func TestCoveringRadius(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 1))
	for _, c := range []struct{ d, N int }{{2, 3}, {2, 10}, {3, 4}, {3, 7}, {4, 3}, {5, 2}} {
		eps := CoveringRadius(c.d, c.N)
		total := NetSize(c.d, c.N, 1<<30)
		pts := make([][]float64, total)
		for i := range pts {
			p := make([]float64, c.d)
			NetPoint(p, c.d, c.N, int64(i))
			var s float64
			for _, v := range p {
				s += v * v
			}
			for j := range p {
				p[j] /= math.Sqrt(s)
			}
			pts[i] = p
		}
		worst := 0.0
		trials := 3000
		if testing.Short() {
			trials = 500
		}
		for k := 0; k < trials; k++ {
			x := make([]float64, c.d)
			var s float64
			for j := range x {
				x[j] = rng.NormFloat64()
				s += x[j] * x[j]
			}
			for j := range x {
				x[j] /= math.Sqrt(s)
			}
			best := math.Inf(1)
			for _, p := range pts {
				var dp, dm float64
				for j := range p {
					dp += (x[j] - p[j]) * (x[j] - p[j])
					dm += (x[j] + p[j]) * (x[j] + p[j])
				}
				best = math.Min(best, math.Sqrt(math.Min(dp, dm)))
			}
			worst = math.Max(worst, best)
		}
		if worst > eps {
			t.Errorf("d=%d N=%d: a unit vector at distance %v > ε = %v", c.d, c.N, worst, eps)
		}
		if GridSize(c.d, eps) > c.N {
			t.Errorf("GridSize(%d, %v) = %d > %d", c.d, eps, GridSize(c.d, eps), c.N)
		}
	}
}

func mustNew(t *testing.T, in suite.Instance) *subspace.Subspace { return suite.MustNew(t, in) }

// The complement of the quaternion span in 4×4 (h ≡ 3/4, d* = 1/2, derived
// in suite.NormedAlgebraComplement): local methods prove nothing, the net
// and branch-and-bound prove d* > 0, and never contradict d* = 1/2.
func TestNormedAlgebraComplement(t *testing.T) {
	for _, n := range []int{2, 4} {
		in := suite.NormedAlgebraComplement(n, 1)
		w := mustNew(t, in)
		ms, _ := (&rankone.MultiStart{Starts: 4}).Search(context.Background(), w)
		if ms.Lower != 0 {
			t.Errorf("n=%d: multistart Lower %v, want 0 (it proves nothing)", n, ms.Lower)
		}
		fl, _ := rankone.Flattening{}.Search(context.Background(), w)
		if fl.Lower != 0 {
			t.Errorf("n=%d: flattening Lower %v; the derivation says Tr₂P_W = (n−1)I gives nothing", n, fl.Lower)
		}
		for _, s := range []rankone.Searcher{&Exhaustive{Epsilon: 0.05}, &BranchBound{Gap: 0.05}} {
			r, err := s.Search(context.Background(), w)
			if err != nil {
				t.Fatal(err)
			}
			if !(r.Lower > 0) {
				t.Errorf("n=%d %s: Lower %v, want > 0", n, rankone.NameOf(s), r.Lower)
			}
			if r.Lower > in.Optimum || r.Upper < in.Optimum-1e-12 {
				t.Errorf("n=%d %s: [%v, %v] excludes d* = %v", n, rankone.NameOf(s), r.Lower, r.Upper, in.Optimum)
			}
		}
	}
}

// On random small instances the net, branch-and-bound and many-start local
// search never contradict each other (every Lower ≤ every Upper), and
// branch-and-bound closes its requested gap.
func TestAgreementRandomSmall(t *testing.T) {
	sizes := [][2]int{{2, 2}, {2, 5}, {3, 3}, {3, 4}, {4, 4}, {4, 5}, {5, 3}}
	seeds := 3
	if testing.Short() {
		seeds = 1
	}
	for _, sz := range sizes {
		for seed := 0; seed < seeds; seed++ {
			m, n := sz[0], sz[1]
			k := max(1, m*n/2-1+seed)
			in := suite.Random(m, n, k, uint64(seed))
			w := mustNew(t, in)
			ctx := context.Background()
			bb, err := (&BranchBound{}).Search(ctx, w)
			if err != nil {
				t.Fatal(err)
			}
			ex, err := (&Exhaustive{Epsilon: 0.1}).Search(ctx, w)
			if err != nil {
				t.Fatal(err)
			}
			ms, _ := (&rankone.MultiStart{Starts: 32}).Search(ctx, w)
			rs := []rankone.Result{bb, ex, ms}
			for i := range rs {
				for j := range rs {
					if rs[i].Lower > rs[j].Upper {
						t.Errorf("%s: Lower of #%d (%v) > Upper of #%d (%v)", in.Name, i, rs[i].Lower, j, rs[j].Upper)
					}
				}
			}
			if bb.Status == rankone.GapReached {
				lo, hi := bb.ValueBounds()
				if hi-lo > 1e-6*hi*(1+1e-9) {
					t.Errorf("%s: gap reached but h interval [%v, %v]", in.Name, lo, hi)
				}
			} else {
				t.Errorf("%s: branch-and-bound status %v", in.Name, bb.Status)
			}
		}
	}
}

// Exhaustive and BranchBound pass the conformance suite (BranchBound with a
// node limit so that degenerate families end quickly; its witness is
// polished by the local method, so it claims accuracy; the worker count does
// not change the result).
func TestConformance(t *testing.T) {
	small := []suite.Instance{
		suite.OneMatrix(3, 5, 1), suite.OneMatrix(6, 2, 2), suite.Antisymmetric(3), suite.Symmetric(3),
		suite.Full(2, 3, 1), suite.Hyperplane(3, 4, 1), suite.HurwitzRadon(2, 2), suite.HurwitzRadon(4, 2),
		suite.Planted(3, 6, 5, 1), suite.Planted(5, 2, 4, 2),
	}
	searchtest.Run(t, func() rankone.Searcher { return &BranchBound{MaxNodes: 4000, Workers: 2} }, searchtest.Options{
		Accuracy:  1e-10,
		Instances: small,
		SameAs:    []func() rankone.Searcher{func() rankone.Searcher { return &BranchBound{MaxNodes: 4000, Workers: 1} }},
	})
	searchtest.Run(t, func() rankone.Searcher { return &Exhaustive{Epsilon: 0.2, Workers: 2} }, searchtest.Options{
		Accuracy:  1e-10,
		Instances: small,
		SameAs:    []func() rankone.Searcher{func() rankone.Searcher { return &Exhaustive{Epsilon: 0.2, Workers: 1} }},
	})
}

// One-matrix subspaces with m = 1 or n = 1: the sphere S^0 is two points, so
// branch-and-bound is exact at once (Eckart–Young reference in the family).
func TestOneDimensionalSide(t *testing.T) {
	for _, in := range []suite.Instance{suite.OneMatrix(1, 6, 1), suite.OneMatrix(5, 1, 2), suite.Random(1, 7, 3, 1)} {
		w := mustNew(t, in)
		r, err := (&BranchBound{}).Search(context.Background(), w)
		if err != nil {
			t.Fatal(err)
		}
		if r.Status != rankone.GapReached {
			t.Errorf("%s: status %v", in.Name, r.Status)
		}
		if r.Upper-r.Lower > 1e-12 {
			t.Errorf("%s: interval [%v, %v] not tight", in.Name, r.Lower, r.Upper)
		}
		if !math.IsNaN(in.Optimum) && (r.Lower > in.Optimum+1e-14 || r.Upper < in.Optimum-1e-14) {
			t.Errorf("%s: [%v, %v] excludes d* = %v", in.Name, r.Lower, r.Upper, in.Optimum)
		}
	}
}

// A cancelled search returns valid bounds with the context's error.
func TestCancelledAndLimits(t *testing.T) {
	in := suite.Random(4, 6, 12, 3)
	w := mustNew(t, in)
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	for _, s := range []rankone.Searcher{&BranchBound{}, &Exhaustive{}} {
		r, err := s.Search(ctx, w)
		if err == nil || r.Status != rankone.Cancelled {
			t.Errorf("%s: err %v status %v", rankone.NameOf(s), err, r.Status)
		}
	}
	r, err := (&BranchBound{MaxFrontier: 50}).Search(context.Background(), w)
	if err != nil || r.Status != rankone.LimitReached {
		t.Errorf("frontier cap: err %v status %v", err, r.Status)
	}
	if r.Lower > 0 && !strings.Contains(r.LowerBy, "frontier limit") {
		t.Errorf("frontier cap not reported: %q", r.LowerBy)
	}
	if _, err := (&Exhaustive{Epsilon: 1e-3, MaxPoints: 1000}).Search(context.Background(), w); err == nil {
		t.Error("oversized net accepted")
	}
}
