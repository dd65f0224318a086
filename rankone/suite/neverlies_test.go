package suite_test

import (
	"context"
	"flag"
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/segre-lab/segre/internal/accurate"
	"github.com/segre-lab/segre/net"
	"github.com/segre-lab/segre/rankone"
	"github.com/segre-lab/segre/rankone/searchtest"
	"github.com/segre-lab/segre/rankone/suite"
	"github.com/segre-lab/segre/sos"
	"github.com/segre-lab/segre/subspace"
)

var neverLiesN = flag.Int("neverlies", 0, "instances for TestNeverLies (0: 1500, or 150 with -short)")

// randomInstance draws instance i of the property test: a family, a size
// and a seed from i, optionally rotated. Sizes stay at m, n ≤ 5 so that
// every strategy, the global ones included, runs on every instance.
func randomInstance(i int) suite.Instance {
	rng := rand.New(rand.NewPCG(20261202, uint64(i)))
	m, n := 1+rng.IntN(5), 1+rng.IntN(5)
	L := m * n
	seed := uint64(i) + 1
	var in suite.Instance
	switch f := rng.IntN(12); {
	case f == 0:
		in = suite.OneMatrix(m, n, seed)
	case f == 1:
		in = suite.Antisymmetric(max(m, 2))
	case f == 2:
		in = suite.Symmetric(n)
	case f == 3:
		in = suite.Full(m, n, seed)
	case f == 4 && L >= 2:
		in = suite.Hyperplane(m, n, seed)
	case f == 5:
		p := []int{2, 4}[rng.IntN(2)]
		in = suite.HurwitzRadon(p, 1+rng.IntN(p))
	case f == 6:
		in = suite.Planted(m, n, 1+rng.IntN(L), seed)
	case f == 7:
		in = suite.PlantedNoisy(m, n, 1+rng.IntN(L), math.Pow(10, -1-4*rng.Float64()), seed)
	case f == 8:
		in = suite.RankOneSpan(m, n, 1+rng.IntN(min(L, min(m, n)+3)), seed)
	case f == 9 && m >= 2 && n >= 2:
		in = suite.Boundary(m, n, seed)
	case f == 10:
		in = suite.NormedAlgebraComplement([]int{2, 4}[rng.IntN(2)], seed)
	default:
		in = suite.Random(m, n, 1+rng.IntN(L), seed)
	}
	if rng.IntN(2) == 0 {
		in = suite.Rotated(in, seed)
	}
	return in
}

// bound is one strategy's certified interval on an instance.
type bound struct {
	name         string
	lower, upper float64
}

// intervals runs every searcher on w and returns their certified
// intervals; a refusal (an error with no witness: a size the strategy does
// not handle) gives none.
func intervals(ctx context.Context, w *subspace.Subspace, searchers []rankone.Searcher) []bound {
	var bs []bound
	for _, s := range searchers {
		res, err := s.Search(ctx, w)
		if err != nil && res.X == nil {
			continue
		}
		bs = append(bs, bound{rankone.NameOf(s), res.Lower, res.Upper})
	}
	return bs
}

// inconsistent describes the first improper interval (not 0 ≤ Lower ≤
// Upper ≤ 1) or the first Lower above another strategy's Upper, or returns
// "". Both bounds are proven for the same stored subspace, so no tolerance
// applies (derived: Lower ≤ d* ≤ Upper in exact arithmetic).
func inconsistent(bs []bound) string {
	for _, a := range bs {
		if !(a.lower >= 0 && a.upper <= 1 && a.lower <= a.upper) {
			return fmt.Sprintf("%s gives [%v, %v]", a.name, a.lower, a.upper)
		}
		for _, b := range bs {
			if a.lower > b.upper {
				return fmt.Sprintf("Lower %v of %s exceeds Upper %v of %s", a.lower, a.name, b.upper, b.name)
			}
		}
	}
	return ""
}

// TestNeverLies is the never-lies property at scale: on random instances of
// every family (1500 by default, 150 with -short, any number with
// -neverlies N), every bundled strategy runs, and
//
//   - every certified Lower of every strategy is ≤ every certified Upper of
//     every strategy (both are proven for the same stored subspace, so no
//     tolerance applies: Lower ≤ d* ≤ Upper in exact arithmetic);
//   - where the family's d* is known (for its exact basis), every Lower is
//     ≤ d* + s and every Upper ≥ d* − s, s the stored-versus-exact slack of
//     searchtest.Slack (Wedin's theorem; +Inf for dependent inputs);
//   - every Upper of a planted-noisy instance is compared with nothing but
//     the Lowers (its d* is unknown), and 0 ≤ Lower, Upper ≤ 1 always.
//
// Strategies: flattening, ALS, power, trust region, multi-start, portfolio,
// all-points, the exhaustive net (min(m, n) ≤ 3), branch-and-bound (node
// limit 3000), SOS level one (m·n ≤ 16, every third instance), the
// eigenvalue-only extension bound (every third instance) and SOS level two
// (m·n ≤ 9, every tenth instance).
func TestNeverLies(t *testing.T) {
	count := *neverLiesN
	if count <= 0 {
		count = 1500
		if testing.Short() {
			count = 150
		}
	}
	ctx := context.Background()
	checked := 0
	for i := 0; i < count; i++ {
		in := randomInstance(i)
		w, err := subspace.New(context.Background(), in.Basis, subspace.Options{})
		if err != nil {
			t.Fatalf("instance %d (%s): %v", i, in.Name, err)
		}
		m, n := w.Rows(), w.Cols()
		searchers := []rankone.Searcher{
			rankone.Flattening{}, &rankone.ALS{}, &rankone.Power{}, &rankone.TrustRegion{},
			&rankone.MultiStart{Starts: 4, Seed: uint64(i)}, &rankone.Portfolio{}, &rankone.AllPoints{Seed: uint64(i)},
			&net.BranchBound{Gap: 1e-3, MaxNodes: 3000},
		}
		if min(m, n) <= 3 {
			searchers = append(searchers, &net.Exhaustive{Epsilon: 0.2})
		}
		if m*n <= 16 && i%3 == 0 {
			searchers = append(searchers, &sos.Bound{})
		}
		if m*n <= 9 && i%10 == 0 {
			searchers = append(searchers, &sos.LevelTwo{})
		}
		if i%3 == 1 {
			searchers = append(searchers, &sos.TwoCopy{})
		}
		if m*n <= 16 && i%3 == 2 {
			searchers = append(searchers, &sos.FirstOrder{MaxIter: 200})
		}
		if m*n <= 9 && i%10 == 5 {
			searchers = append(searchers, &sos.LevelTwoFirstOrder{MaxIter: 200})
		}
		bs := intervals(ctx, w, searchers)
		if i%3 == 0 {
			if hb, err := sos.EigenBound(context.Background(), w); err == nil {
				// d* ≥ √(1 − hb), rounded downwards.
				bs = append(bs, bound{"eigen-bound", accurate.SqrtDown(accurate.Down(1 - hb)), 1})
			}
		}
		slack := math.Inf(1)
		if !math.IsNaN(in.Optimum) {
			slack = searchtest.Slack(t, in.Basis, w)
			if math.IsNaN(slack) {
				t.Fatalf("instance %d (%s): slack is NaN (the stored basis' backward error is not a number)", i, in.Name)
			}
		}
		if msg := inconsistent(bs); msg != "" {
			t.Fatalf("instance %d (%s): %s", i, in.Name, msg)
		}
		for _, a := range bs {
			if !math.IsNaN(in.Optimum) && !math.IsInf(slack, 0) {
				if a.lower > in.Optimum+slack || a.upper < in.Optimum-slack {
					t.Fatalf("instance %d (%s): %s gives [%v, %v], d* = %v (slack %g)", i, in.Name, a.name, a.lower, a.upper, in.Optimum, slack)
				}
			}
			if in.Bound > 0 && a.lower > in.Bound {
				t.Fatalf("instance %d (%s): Lower %v of %s exceeds the known bound d* ≤ %v", i, in.Name, a.lower, a.name, in.Bound)
			}
		}
		checked += len(bs)
	}
	t.Logf("%d instances, %d certified intervals compared pairwise", count, checked)
}
