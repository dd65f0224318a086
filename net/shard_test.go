package net

import (
	"context"
	"errors"
	"math"
	"slices"
	"testing"

	"github.com/segre-lab/segre/rankone"
	"github.com/segre-lab/segre/rankone/suite"
	"github.com/segre-lab/segre/subspace"
)

// runParts runs all n parts of a sharded search and returns their results
// and covers.
func runParts(t *testing.T, w *subspace.Subspace, n int, gap float64) ([]rankone.Result, []*Cover) {
	t.Helper()
	res := make([]rankone.Result, n)
	covers := make([]*Cover, n)
	for i := 0; i < n; i++ {
		covers[i] = &Cover{}
		var err error
		res[i], err = (&BranchBound{Gap: gap, Workers: 2, Record: covers[i], Shard: Shard{Index: i, Count: n}}).Search(context.Background(), w)
		if err != nil {
			t.Fatalf("part %d of %d: %v", i, n, err)
		}
	}
	return res, covers
}

// The parts of a sharded run, joined, prove the whole run's bound to the
// digits its gap allows. Derived here: every bound checked is a proven
// bound on h* (the lemma on CheckCover, with the parts' tiling), so it is
// at least h̲, the best incumbent value any run certified (ValueLower of its
// Upper); every run stops once its Λ is within Gap of an incumbent, and its
// leaves re-check to at most Λ·(1 + 2·Gap) (the expectation stated on
// TestCoverRoundTrip), so every bound lies in [h̲, h̲·(1 + 2·Gap)/(1 − Gap)]
// up to the 1e-12 by which levels are raised, and two of them differ by at
// most that width. Also: the parts' initial cells partition all of them,
// each part passes CheckPart, the joined cover's CheckCover is the largest
// part level up to those steps, and parts of two or more report no Lower.
func TestShardedMatchesWhole(t *testing.T) {
	ctx := context.Background()
	const gap = 1e-6
	for _, in := range []suite.Instance{suite.Random(3, 6, 9, 1), suite.Random(2, 7, 5, 2), suite.Planted(3, 5, 4, 3)} {
		t.Run(in.Name, func(t *testing.T) {
			w := suite.MustNew(t, in)
			flat, _ := rankone.FlatteningBound(ctx, w)
			whole, wc := runCover(t, &BranchBound{Gap: gap, Workers: 2}, w)
			hWhole, err := CheckCover(ctx, w, &wc, flat)
			if err != nil {
				t.Fatal(err)
			}
			upper := whole.Upper
			type joined struct {
				n int
				h float64
			}
			var got []joined
			for _, n := range []int{1, 2, 3} {
				res, covers := runParts(t, w, n, gap)
				var maxLevel float64
				var roots []int
				for i, c := range covers {
					if n > 1 && res[i].Lower != 0 {
						t.Errorf("N = %d, part %d: Lower %v, want 0 (a part proves none alone)", n, i, res[i].Lower)
					}
					upper = math.Min(upper, res[i].Upper)
					u, err := CheckPart(ctx, w, c, flat)
					if err != nil {
						t.Fatalf("N = %d, part %d: %v", n, i, err)
					}
					maxLevel = math.Max(maxLevel, u)
					roots = append(roots, c.Part.Roots...)
				}
				slices.Sort(roots)
				if len(roots) != covers[0].Part.InitialCells(covers[0].D) || slices.Compact(roots)[len(roots)-1] != len(roots)-1 {
					t.Errorf("N = %d: the parts' initial cells %v do not partition all of them", n, roots)
				}
				j, err := JoinParts(covers)
				if err != nil {
					t.Fatalf("N = %d: %v", n, err)
				}
				h, err := CheckCover(ctx, w, j, flat)
				if err != nil {
					t.Fatalf("N = %d: joined: %v", n, err)
				}
				if h > maxLevel*(1+1e-12) {
					t.Errorf("N = %d: joined cover re-checks to %v, above the largest part level %v", n, h, maxLevel)
				}
				got = append(got, joined{n, h})
			}
			hLow := rankone.ValueLower(upper)
			top := hLow * (1 + 2*gap) / (1 - gap) * (1 + 1e-12)
			for _, g := range append(got, joined{0, hWhole}) {
				if g.h < hLow || g.h > top {
					t.Errorf("N = %d (0: whole run): bound %v outside [%v, %v]", g.n, g.h, hLow, top)
				}
			}
			t.Logf("whole %v, sharded %v", hWhole, got)
		})
	}
}

// Parts that do not make a whole are refused by JoinParts, and a part whose
// cells or description were changed is refused by CheckPart, each with
// ErrCover and a message naming the problem.
func TestPartsRefused(t *testing.T) {
	ctx := context.Background()
	w := suite.MustNew(t, suite.Random(3, 5, 7, 2))
	_, covers := runParts(t, w, 3, 1e-5)
	for i, c := range covers {
		if _, err := CheckPart(ctx, w, c, 1); err != nil {
			t.Fatalf("honest part %d: %v", i, err)
		}
	}
	clonePart := func(c *Cover) *Cover {
		out := cloneCover(*c)
		out.Part.Roots = slices.Clone(c.Part.Roots)
		return &out
	}
	for _, tc := range []struct {
		name  string
		parts func() []*Cover
	}{
		{"missing part", func() []*Cover { return []*Cover{covers[0], covers[2]} }},
		{"duplicated part", func() []*Cover { return []*Cover{covers[0], covers[1], covers[1], covers[2]} }},
		{"no parts", func() []*Cover { return nil }},
		{"a whole cover", func() []*Cover { c := clonePart(covers[1]); c.Part = Part{}; return []*Cover{covers[0], c, covers[2]} }},
		{"different count", func() []*Cover { c := clonePart(covers[1]); c.Part.Count = 4; return []*Cover{covers[0], c, covers[2]} }},
		{"different level", func() []*Cover { c := clonePart(covers[1]); c.Part.Level = 1; return []*Cover{covers[0], c, covers[2]} }},
		{"initial cell twice", func() []*Cover {
			c := clonePart(covers[1])
			c.Part.Roots = append(c.Part.Roots, covers[0].Part.Roots[0])
			slices.Sort(c.Part.Roots)
			return []*Cover{covers[0], c, covers[2]}
		}},
		{"initial cell in no part", func() []*Cover {
			c := clonePart(covers[1])
			c.Part.Roots = c.Part.Roots[1:]
			return []*Cover{covers[0], c, covers[2]}
		}},
	} {
		if _, err := JoinParts(tc.parts()); !errors.Is(err, ErrCover) {
			t.Errorf("JoinParts, %s: err %v, want ErrCover", tc.name, err)
		} else {
			t.Logf("%s: %v", tc.name, err)
		}
	}
	p := covers[1]
	other := covers[0]
	for _, tc := range []struct {
		name string
		edit func(c *Cover)
	}{
		{"cell removed", func(c *Cover) { c.Cells = c.Cells[1:] }},
		{"another part's cell added", func(c *Cover) { c.Cells = append(c.Cells, other.Cells[0]) }},
		{"initial cell dropped from the list", func(c *Cover) { c.Part.Roots = c.Part.Roots[1:] }},
		{"initial cells out of order", func(c *Cover) {
			c.Part.Roots[0], c.Part.Roots[1] = c.Part.Roots[1], c.Part.Roots[0]
		}},
		{"initial cell out of range", func(c *Cover) { c.Part.Roots[len(c.Part.Roots)-1] = c.Part.InitialCells(c.D) }},
		{"index out of range", func(c *Cover) { c.Part.Index = c.Part.Count }},
		{"level above the cells", func(c *Cover) { c.Part.Level = 40 }},
		{"negative level", func(c *Cover) { c.Part.Level = -1 }},
		{"not a part", func(c *Cover) { c.Part = Part{} }},
	} {
		c := clonePart(p)
		tc.edit(c)
		if _, err := CheckPart(ctx, w, c, 1); !errors.Is(err, ErrCover) {
			t.Errorf("CheckPart, %s: err %v, want ErrCover", tc.name, err)
		} else {
			t.Logf("%s: %v", tc.name, err)
		}
	}
	if _, err := CheckCover(ctx, w, p, 1); !errors.Is(err, ErrCover) {
		t.Errorf("CheckCover of a part: err %v, want ErrCover", err)
	}
	if _, err := (&BranchBound{Shard: Shard{Index: 3, Count: 3}}).Search(ctx, w); !errors.Is(err, rankone.ErrOption) {
		t.Errorf("Shard 3 of 3: err %v, want ErrOption", err)
	}
}

// More parts than initial cells leave parts empty (d = 2: 2·4 = 8 initial
// cells; d = 1: the single point, part 0's): an empty part checks to 0
// (nothing to bound) and the parts still join into a cover that re-checks
// below the run's certified Upper (the duality oracle) — and, for d = 1,
// to the one-matrix span's d* by Eckart–Young (suite.OneMatrix's optimum,
// from gonum's SVD), the point being the whole sphere up to sign.
func TestEmptyParts(t *testing.T) {
	ctx := context.Background()
	for _, tc := range []struct {
		in    suite.Instance
		n     int
		exact bool // d* known and the bound exact up to rounding
	}{{suite.Random(2, 6, 5, 3), 10, false}, {suite.OneMatrix(1, 5, 1), 3, true}} {
		w := suite.MustNew(t, tc.in)
		res, covers := runParts(t, w, tc.n, 1e-6)
		empty := 0
		upper := math.Inf(1)
		for i, c := range covers {
			upper = math.Min(upper, res[i].Upper)
			if len(c.Cells) > 0 {
				continue
			}
			empty++
			if u, err := CheckPart(ctx, w, c, 1); err != nil || u != 0 {
				t.Errorf("%s: empty part %d: %v, %v", tc.in.Name, i, u, err)
			}
		}
		if empty == 0 {
			t.Errorf("%s: no empty part among %d", tc.in.Name, tc.n)
		}
		j, err := JoinParts(covers)
		if err != nil {
			t.Fatal(err)
		}
		h, err := CheckCover(ctx, w, j, 1)
		if err != nil {
			t.Fatal(err)
		}
		lo := rankone.DistanceLower(h)
		if lo > upper || tc.exact && (lo > tc.in.Optimum || lo < tc.in.Optimum*(1-1e-6)) {
			t.Errorf("%s: joined lower %v, Upper %v, d* %v", tc.in.Name, lo, upper, tc.in.Optimum)
		}
	}
}

// The partition deals the costliest cells first to the least loaded part
// (derived by hand: costs 5, 4, 3, 3, 1 into two parts give {5, 3} and
// {4, 3, 1}, loads 8 and 8), ties by rank.
func TestPartition(t *testing.T) {
	// 5 (item 1) → part 0, loads (5, 0); 4 (item 3) → part 1, (5, 4);
	// 3 (item 0, the smaller rank) → part 1, (5, 7); 3 (item 4) → part 0,
	// (8, 7); 1 (item 2) → part 1, (8, 8).
	got := partition([]float64{3, 5, 1, 4, 3}, []int{0, 1, 2, 3, 4}, 2)
	if want := []int{1, 0, 1, 1, 0}; !slices.Equal(got, want) {
		t.Errorf("partition = %v, want %v", got, want)
	}
}
