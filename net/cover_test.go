package net

import (
	"context"
	"errors"
	"math"
	"math/rand/v2"
	"runtime"
	"sync/atomic"
	"testing"
	"time"

	"github.com/segre-lab/segre/internal/reference"
	"github.com/segre-lab/segre/rankone"
	"github.com/segre-lab/segre/rankone/suite"
	"github.com/segre-lab/segre/subspace"
)

// coverCase is an instance for the cover tests: its subspace and the d*
// known for it (NaN if unknown).
type coverCase struct {
	name    string
	w       *subspace.Subspace
	optimum float64
}

func coverCases(t *testing.T) []coverCase {
	var out []coverCase
	for _, in := range []suite.Instance{
		suite.Random(2, 6, 6, 1),  // d* unknown
		suite.Random(3, 5, 7, 2),  // d* unknown
		suite.Planted(3, 6, 4, 2), // d* = 0 (planted rank-one point, derived in the suite)
		suite.OneMatrix(3, 5, 1),  // d* exact by Eckart–Young (Eckart & Young, Psychometrika 1, 1936; gonum's SVD)
	} {
		out = append(out, coverCase{in.Name, suite.MustNew(t, in), in.Optimum})
	}
	// The complex one-matrix span: d* over C exact by Eckart–Young for the
	// unitary SVD (singular values from gonum's SVD of the real embedding);
	// its side has the phase reduction (D = 2·2 − 1 = 3). Branch-and-bound
	// works in real coordinates, where h is the realified h” and its
	// distance d” = √((1 + d*²)/2) (derived in package subspace,
	// d*² = 2d”² − 1; suite.ComplexInstance.Realified).
	cin := suite.ComplexOneMatrix(2, 3, 1)
	out = append(out, coverCase{cin.Name, suite.MustNewComplex(t, cin), cin.Realified().Optimum})
	return out
}

// runCover runs branch-and-bound with a record and returns the result and
// the cover.
func runCover(t *testing.T, b *BranchBound, w *subspace.Subspace) (rankone.Result, Cover) {
	t.Helper()
	var c Cover
	b.Record = &c
	res, err := b.Search(context.Background(), w)
	if err != nil {
		t.Fatal(err)
	}
	return res, c
}

// Round trip: the cover of a finished run re-checks, from lambda0 = 1 and
// from the flattening bound, to a bound hUpper that
//   - never contradicts d*: DistanceLower(hUpper) ≤ d* where d* is known,
//     and ≤ the run's certified Upper always (the duality oracle: a lower
//     bound never exceeds a certified upper bound);
//   - agrees with the run's Λ_run (recovered from its Lower = √(1 − Λ_run)
//     rounded down as Λ_run ≤ 1 − Lower² + 2⁻⁵⁰, the slack covering those
//     roundings) within a small factor on h, checked as follows.
//     From lambda0 = the flattening bound, where the run itself started,
//     hUpper ≤ Λ_run·(1 + 2·Gap): the check bounds the same leaves with the
//     same cell bounds (bit for bit on amd64) at the least level they all
//     pass, whereas the run keyed its cells with older, larger Λ and
//     stopped once within Gap (an expectation, not a theorem: a leaf's
//     fresh bound may exceed its parent's key). From any lambda0 (derived on
//     CheckCover), the level is at most the largest cell fixed point
//     Λ_c = f̄_c(1 + ρ_c), ρ_c = 4r_c²/(1 − r_c²)², raised by a few relative
//     rounding steps, and f̄_c ≤ h* up to the verified test's rounding-level
//     slack, so hUpper ≤ min(lambda0, Λ_run·(1 + ρ(r_max)))·(1 + 1e-9) with
//     r_max the largest leaf radius (the factor 1e-9 covers the slack of f̄
//     and those rounding steps).
func TestCoverRoundTrip(t *testing.T) {
	ctx := context.Background()
	for _, tc := range coverCases(t) {
		t.Run(tc.name, func(t *testing.T) {
			b := &BranchBound{Gap: 1e-4, Workers: 2}
			res, c := runCover(t, b, tc.w)
			if len(c.Cells) == 0 {
				t.Fatalf("status %v: empty record", res.Status)
			}
			if c.D != SideDimension(tc.w) {
				t.Errorf("D = %d, SideDimension %d", c.D, SideDimension(tc.w))
			}
			var rmax float64
			for _, cc := range c.Cells {
				rmax = math.Max(rmax, (&cell{lo: cc.Lo, hi: cc.Hi}).radius())
			}
			rho := math.Inf(1)
			if rmax < 1 {
				rho = 4 * rmax * rmax / ((1 - rmax*rmax) * (1 - rmax*rmax))
			}
			flat, _ := rankone.FlatteningBound(ctx, tc.w)
			lamRun := 1 - res.Lower*res.Lower + 0x1p-50
			for _, l0 := range []float64{1, flat} {
				h, err := CheckCover(ctx, tc.w, &c, l0)
				if err != nil {
					t.Fatalf("lambda0 %v: %v", l0, err)
				}
				lo := rankone.DistanceLower(h)
				t.Logf("lambda0 %v: %d cells, check's lower %v, run's [%v, %v]", l0, len(c.Cells), lo, res.Lower, res.Upper)
				if !math.IsNaN(tc.optimum) && lo > tc.optimum {
					t.Errorf("lambda0 %v: DistanceLower(%v) = %v > d* = %v", l0, h, lo, tc.optimum)
				}
				if lo > res.Upper {
					t.Errorf("lambda0 %v: lower %v > the run's Upper %v", l0, lo, res.Upper)
				}
				if lim := math.Min(l0, lamRun*(1+rho)) * (1 + 1e-9); h > lim {
					t.Errorf("lambda0 %v: hUpper %v > %v (Λ_run ≤ %v, r_max %v)", l0, h, lim, lamRun, rmax)
				}
				if l0 == flat && h > lamRun*(1+2*b.Gap) {
					t.Errorf("from the flattening bound: hUpper %v > Λ_run·(1 + 2·Gap), Λ_run ≤ %v", h, lamRun)
				}
			}
		})
	}
}

// A run stopped by its cell budget still records a cover (leaves plus the
// frontier), and it re-checks to a bound that never exceeds the run's
// certified Upper (the duality oracle).
func TestCoverAfterNodeLimit(t *testing.T) {
	w := suite.MustNew(t, suite.Random(3, 5, 7, 2))
	res, c := runCover(t, &BranchBound{Gap: 1e-9, MaxNodes: 200, Workers: 2}, w)
	if res.Status != rankone.LimitReached {
		t.Fatalf("status %v: the budget did not stop the run", res.Status)
	}
	flat, _ := rankone.FlatteningBound(context.Background(), w)
	h, err := CheckCover(context.Background(), w, &c, flat)
	if err != nil {
		t.Fatal(err)
	}
	if lo := rankone.DistanceLower(h); lo > res.Upper {
		t.Errorf("DistanceLower(%v) = %v > the run's Upper %v", h, lo, res.Upper)
	}
}

// cloneCover copies the cells and their boxes, so that tampering leaves the
// original alone.
func cloneCover(c Cover) Cover {
	out := c
	out.Cells = make([]CoverCell, len(c.Cells))
	for i, cc := range c.Cells {
		out.Cells[i] = CoverCell{Face: cc.Face, Lo: append([]float64(nil), cc.Lo...), Hi: append([]float64(nil), cc.Hi...), Guess: cc.Guess}
	}
	return out
}

// Tampered covers are refused with ErrCover (each tampering breaks one of
// the conditions derived on CheckCover), and tampered guesses are not: they
// only feed the verified test's start, so the bound stays valid (Eckart–Young
// d* of the one-matrix span) and, for guesses raised above the estimates,
// no better than the honest one (a larger shift gives a larger proven bound,
// and cellBound is nondecreasing in f̄).
func TestCoverTampering(t *testing.T) {
	ctx := context.Background()
	in := suite.OneMatrix(3, 5, 1)
	w := suite.MustNew(t, in)
	_, good := runCover(t, &BranchBound{Gap: 1e-4, Workers: 2}, w)
	if len(good.Cells) < 3 {
		t.Fatalf("only %d cells", len(good.Cells))
	}
	honest, err := CheckCover(ctx, w, &good, 1)
	if err != nil {
		t.Fatal(err)
	}
	// A cell with a box above level 0 (all are, D = 3 starts at level ≥ 1).
	i := len(good.Cells) / 2
	width := good.Cells[i].Hi[0] - good.Cells[i].Lo[0]
	for _, tm := range []struct {
		name string
		edit func(c *Cover)
	}{
		{"removed cell", func(c *Cover) { c.Cells = append(c.Cells[:i], c.Cells[i+1:]...) }},
		{"duplicated cell", func(c *Cover) { c.Cells = append(c.Cells, c.Cells[i]) }},
		{"Lo moved by a quarter width", func(c *Cover) { c.Cells[i].Lo[0] += width / 4 }},
		{"Lo moved by half the width", func(c *Cover) { c.Cells[i].Lo[0] += width / 2 }},
		{"cell moved by its width", func(c *Cover) {
			cc := &c.Cells[i]
			if cc.Lo[1] > -1 {
				cc.Lo[1], cc.Hi[1] = cc.Lo[1]-width, cc.Hi[1]-width
			} else {
				cc.Lo[1], cc.Hi[1] = cc.Lo[1]+width, cc.Hi[1]+width
			}
		}},
		{"non-dyadic width", func(c *Cover) { c.Cells[i].Hi[0] = c.Cells[i].Lo[0] + 0.3*width }},
		{"unequal widths", func(c *Cover) {
			// Halve coordinate 0 only: a dyadic interval, but of another level.
			c.Cells[i].Hi[0] = c.Cells[i].Lo[0] + width/2
		}},
		{"box outside [−1, 1]", func(c *Cover) { c.Cells[i].Hi[0], c.Cells[i].Lo[0] = 1+width, 1 }},
		{"NaN corner", func(c *Cover) { c.Cells[i].Lo[0] = math.NaN() }},
		{"short box", func(c *Cover) { c.Cells[i].Lo = c.Cells[i].Lo[:1] }},
		{"face out of range", func(c *Cover) { c.Cells[i].Face = c.D }},
		{"negative face", func(c *Cover) { c.Cells[i].Face = -1 }},
		{"face changed", func(c *Cover) { c.Cells[i].Face = (c.Cells[i].Face + 1) % c.D }},
		{"D mismatched", func(c *Cover) { c.D++ }},
		{"side mismatched", func(c *Cover) { c.OnX = !c.OnX }},
		{"empty cover", func(c *Cover) { c.Cells = nil }},
	} {
		c := cloneCover(good)
		tm.edit(&c)
		if _, err := CheckCover(ctx, w, &c, 1); !errors.Is(err, ErrCover) {
			t.Errorf("%s: err %v, want ErrCover", tm.name, err)
		} else {
			t.Logf("%s: %v", tm.name, err)
		}
	}
	// Guesses: never an error, always valid; raised ones never help.
	for _, g := range []struct {
		name   string
		f      func(float64) float64
		weaker bool
	}{
		{"raised", func(v float64) float64 { return 1.5*v + 0.1 }, true},
		{"zero", func(float64) float64 { return 0 }, false},
		{"negative", func(v float64) float64 { return -v - 1 }, false},
		{"NaN", func(float64) float64 { return math.NaN() }, false},
		{"+Inf", func(float64) float64 { return math.Inf(1) }, false},
		{"huge", func(float64) float64 { return 1e300 }, false},
	} {
		c := cloneCover(good)
		for k := range c.Cells {
			c.Cells[k].Guess = g.f(c.Cells[k].Guess)
		}
		h, err := CheckCover(ctx, w, &c, 1)
		if err != nil {
			t.Errorf("guess %s: %v", g.name, err)
			continue
		}
		if lo := rankone.DistanceLower(h); lo > in.Optimum {
			t.Errorf("guess %s: DistanceLower(%v) = %v > d* = %v", g.name, h, lo, in.Optimum)
		}
		if g.weaker && h < honest {
			t.Errorf("guess %s: bound %v better than the honest %v", g.name, h, honest)
		}
	}
	// Invalid lambda0.
	for _, l0 := range []float64{math.NaN(), -0.5} {
		if _, err := CheckCover(ctx, w, &good, l0); !errors.Is(err, ErrCover) {
			t.Errorf("lambda0 %v: err %v, want ErrCover", l0, err)
		}
	}
	// A done context.
	cctx, cancel := context.WithCancel(ctx)
	cancel()
	if _, err := CheckCover(cctx, w, &good, 1); !errors.Is(err, context.Canceled) {
		t.Errorf("cancelled check: err %v", err)
	}
}

// The tiling test on hand-made covers (derived here: the level-1 split of
// the faces of [−1, 1]^3, each face four quarter boxes, and one of them split
// again), without any subspace.
func TestCheckTilingByHand(t *testing.T) {
	ctx := context.Background()
	var cells []CoverCell
	for f := 0; f < 3; f++ {
		for _, lo := range [][2]float64{{-1, -1}, {-1, 0}, {0, -1}, {0, 0}} {
			if f == 2 && lo == [2]float64{0, 0} {
				for _, q := range [][2]float64{{0, 0}, {0, 0.5}, {0.5, 0}, {0.5, 0.5}} {
					cells = append(cells, CoverCell{Face: f, Lo: []float64{q[0], q[1]}, Hi: []float64{q[0] + 0.5, q[1] + 0.5}})
				}
				continue
			}
			cells = append(cells, CoverCell{Face: f, Lo: []float64{lo[0], lo[1]}, Hi: []float64{lo[0] + 1, lo[1] + 1}})
		}
	}
	good := Cover{D: 3, Cells: cells}
	if err := checkTiling(ctx, &good); err != nil {
		t.Fatal(err)
	}
	// Adding the parent of the split quarter overlaps its children.
	c := cloneCover(good)
	c.Cells = append(c.Cells, CoverCell{Face: 2, Lo: []float64{0, 0}, Hi: []float64{1, 1}})
	if err := checkTiling(ctx, &c); !errors.Is(err, ErrCover) {
		t.Errorf("parent and children: err %v", err)
	}
	// Replacing a level-1 box by three of its four children leaves a gap.
	c = cloneCover(good)
	c.Cells = c.Cells[1:]
	for _, q := range [][2]float64{{-1, -1}, {-1, -0.5}, {-0.5, -1}} {
		c.Cells = append(c.Cells, CoverCell{Face: 0, Lo: []float64{q[0], q[1]}, Hi: []float64{q[0] + 0.5, q[1] + 0.5}})
	}
	if err := checkTiling(ctx, &c); !errors.Is(err, ErrCover) {
		t.Errorf("three children: err %v", err)
	}
	// D = 1: one point cell; two are an overlap.
	one := Cover{D: 1, Cells: []CoverCell{{}}}
	if err := checkTiling(ctx, &one); err != nil {
		t.Errorf("D = 1: %v", err)
	}
	one.Cells = append(one.Cells, CoverCell{})
	if err := checkTiling(ctx, &one); !errors.Is(err, ErrCover) {
		t.Errorf("D = 1, two cells: err %v", err)
	}
}

// dyadic accepts exactly the intervals of the bisection of [−1, 1] (derived
// here: level ℓ, width 2^(1−ℓ), corners −1 + i·2^(1−ℓ)).
func TestDyadic(t *testing.T) {
	for _, c := range []struct {
		lo, hi float64
		ok     bool
		level  int
		i      uint64
	}{
		{-1, 1, true, 0, 0},
		{-1, 0, true, 1, 0},
		{0, 1, true, 1, 1},
		{0.5, 1, true, 2, 3},
		{-0.25, 0, true, 3, 3},
		{1 - 0x1p-40, 1, true, 41, 1<<41 - 1},
		{0, 0x1p-61, true, 62, 1 << 61},
		{-1, -1 + 0x1p-52, true, 53, 0},
		{0.25, 0.75, false, 0, 0}, // width a power of two, corner off the grid
		{0, 0.3, false, 0, 0},
		{-1, 0.5, false, 0, 0},
		{0, 0x1p-70, false, 0, 0}, // below the deepest level
		{-1.5, 0.5, false, 0, 0},
	} {
		l, i, ok := dyadic(c.lo, c.hi)
		if ok != c.ok || ok && (l != c.level || i != c.i) {
			t.Errorf("dyadic(%v, %v) = %d, %d, %v; want %d, %d, %v", c.lo, c.hi, l, i, ok, c.level, c.i, c.ok)
		}
	}
}

// side.bound recomputes value's proven bound bit for bit from value's raw
// estimate (derived: the same verified test, started from the same guess,
// on the same assembled matrix), on both storages (W stored for the random
// span, W⊥ for the hyperplane: k = mn − 1 > mn/2) and with and without the
// block form.
func TestSideBoundFromGuess(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 6))
	for _, in := range []suite.Instance{suite.Random(3, 5, 4, 1), suite.Hyperplane(3, 4, 1), suite.Random(5, 3, 6, 2)} {
		w := suite.MustNew(t, in)
		full := newSide(w)
		plain := full
		plain.form = nil
		for _, s := range []side{full, plain} {
			for trial := 0; trial < 5; trial++ {
				c := reference.RandUnit(rng, s.d)
				for j := range c {
					c[j] *= 1.7
				}
				v := make([]float64, s.p)
				_, up, raw := s.value(c, v)
				if b := s.bound(c, raw); b != up {
					t.Errorf("%s (form %v): bound %v, value's %v", in.Name, s.form != nil, b, up)
				}
			}
		}
	}
}

// countdown is a context whose Err reports context.Canceled from its n-th
// call on: a deterministic cancellation in the middle of a search.
type countdown struct {
	context.Context
	n atomic.Int64
}

func (c *countdown) Err() error {
	if c.n.Add(-1) < 0 {
		return context.Canceled
	}
	return nil
}

// A cancelled run leaves Record empty (the contract on BranchBound.Record),
// whether cancelled before it starts or in the middle of its batches, and
// even if the Cover held cells before.
func TestCoverCancelled(t *testing.T) {
	w := suite.MustNew(t, suite.Random(3, 5, 7, 2))
	stale := Cover{D: 3, Cells: []CoverCell{{Face: 0, Lo: []float64{-1, -1}, Hi: []float64{1, 1}}}}

	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	c := stale
	if _, err := (&BranchBound{Record: &c}).Search(ctx, w); err == nil {
		t.Fatal("cancelled search returned no error")
	}
	if c.Cells != nil {
		t.Errorf("cancelled before the start: %d cells recorded", len(c.Cells))
	}

	// Count the calls of Err a whole run makes, then cancel runs after a
	// quarter, half and nine tenths of them.
	b := &BranchBound{Gap: 1e-6, MaxNodes: 3000, Workers: 1}
	cd := &countdown{Context: context.Background()}
	cd.n.Store(math.MaxInt64)
	if _, err := b.Search(cd, w); err != nil {
		t.Fatal(err)
	}
	calls := math.MaxInt64 - cd.n.Load()
	for _, n := range []int64{calls / 4, calls / 2, calls * 9 / 10} {
		cd := &countdown{Context: context.Background()}
		cd.n.Store(n)
		c = stale
		b.Record = &c
		res, err := b.Search(cd, w)
		if err == nil {
			t.Errorf("n = %d of %d: the run ended before its cancellation (status %v)", n, calls, res.Status)
			continue
		}
		if res.Status != rankone.Cancelled {
			t.Errorf("n = %d: status %v", n, res.Status)
		}
		if c.Cells != nil {
			t.Errorf("n = %d: cancelled in the middle: %d cells recorded", n, len(c.Cells))
		}
	}
}

// The check's own assembly (checkBound: the upper triangle only, reused
// buffers, through the packed triangles or not) gives side.bound's proven
// f̄: bit for bit on amd64, where gonum's Axpy multiplies and then adds, as
// assembleUpper's explicitly rounded products do and as the packed path's
// Axpy does on the same entries (derived on BlockForm.assembleUpper and
// upperForm); elsewhere (a pure-Go Axpy the
// compiler may fuse) within a relative 1e-12 — derived: each entry of the
// two matrices differs by at most one rounding of each of the d² products,
// at most d²·u·max|M̂_ab| ≈ 9·1.1e-16 here, so λmax and the verified bound
// move by at most p times that, about 3e-14 ≪ 1e-12.
func TestCheckBoundMatchesSearch(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 8))
	for _, in := range []suite.Instance{suite.Random(3, 5, 4, 1), suite.Hyperplane(3, 4, 1), suite.Random(5, 3, 6, 2)} {
		w := suite.MustNew(t, in)
		s := newSide(w)
		if s.form == nil {
			t.Fatalf("%s: no block form", in.Name)
		}
		buf := make([]float64, s.p*s.p)
		packed := newUpperForm(s.form)
		acc := make([]float64, packed.t)
		var cw cholWork
		for trial := 0; trial < 10; trial++ {
			c := reference.RandUnit(rng, s.d)
			v := make([]float64, s.p)
			_, up, raw := s.value(c, v)
			for _, pk := range []*upperForm{packed, nil} {
				got := s.checkBound(c, raw, pk, buf, acc, &cw)
				switch {
				case runtime.GOARCH == "amd64" && got != up:
					t.Errorf("%s (packed %v): checkBound %v, value's bound %v (want bit for bit on amd64)", in.Name, pk != nil, got, up)
				case math.Abs(got-up) > 1e-12*math.Abs(up):
					t.Errorf("%s (packed %v): checkBound %v, value's bound %v", in.Name, pk != nil, got, up)
				}
			}
		}
	}
}

// oldIteration is the check's former fixed-point iteration (kept here as a
// reference): U₀ = min(lambda0, 1), U_{k+1} = max_c cellBound(f̄_c, r_c, U_k)
// while it decreases; every iterate is a proven bound by induction.
func oldIteration(fbar, rad []float64, lambda0 float64) float64 {
	u := math.Min(lambda0, 1)
	for it := 0; it < coverIterations; it++ {
		var t float64
		for i := range fbar {
			t = math.Max(t, cellBound(fbar[i], rad[i], u))
		}
		if !(t < u) {
			break
		}
		u = t
	}
	return u
}

// settle's level passes (the condition of the lemma on CheckCover holds at
// it for every cell), and it is the old iteration's end up to the few
// relative steps by which the candidate is raised (≤ 1e-12: derived on
// CheckCover, both approach the largest cell fixed point, the iteration
// from above by steps of ratio (1 + r²)/2, the candidate from its plain
// evaluation, both stopping within rounding of it). A cell with r ≥ 1 has no
// passing level: settle returns min(lambda0, 1) as the iteration does.
func TestSettle(t *testing.T) {
	ctx := context.Background()
	for _, tc := range coverCases(t) {
		t.Run(tc.name, func(t *testing.T) {
			_, c := runCover(t, &BranchBound{Gap: 1e-5, Workers: 2}, tc.w)
			fbar, rad, err := cellBounds(ctx, tc.w, &c)
			if err != nil {
				t.Fatal(err)
			}
			flat, _ := rankone.FlatteningBound(ctx, tc.w)
			for _, l0 := range []float64{1, flat} {
				u, err := settle(ctx, fbar, rad, l0)
				if err != nil {
					t.Fatal(err)
				}
				old := oldIteration(fbar, rad, l0)
				if u < math.Min(l0, 1) && !passes(fbar, rad, u) {
					t.Errorf("lambda0 %v: level %v does not pass", l0, u)
				}
				if u > old*(1+1e-12) || u < old*(1-1e-12) {
					t.Errorf("lambda0 %v: level %v, old iteration %v", l0, u, old)
				}
			}
		})
	}
	// One cell, by hand (derived here): r = 1/4, f̄ = 1/2: the fixed point of
	// ψ is Λ_c = f̄(1 + 4r²/(1 − r²)²) = 0.5·(1 + 0.25/0.87890625).
	want := 0.5 * (1 + 0.25/0.87890625)
	u, _ := settle(ctx, []float64{0.5}, []float64{0.25}, 1)
	if math.Abs(u-want) > 1e-13 || !passes([]float64{0.5}, []float64{0.25}, u) {
		t.Errorf("one cell: level %v, want %v", u, want)
	}
	if u, _ := settle(ctx, []float64{0.5, 0.1}, []float64{0.25, 1}, 0.9); u != 0.9 {
		t.Errorf("a cell with r = 1: level %v, want lambda0 0.9", u)
	}
}

// A run ended by its own time budget is a limit, not a cancellation: it
// keeps its cover (leaves and frontier), which re-checks to a bound that
// never exceeds the run's certified Upper (the duality oracle).
func TestBudgetKeepsCover(t *testing.T) {
	w := suite.MustNew(t, suite.Random(3, 5, 7, 2))
	res, c := runCover(t, &BranchBound{Gap: 1e-12, Budget: time.Nanosecond, Workers: 2}, w)
	if res.Status != rankone.LimitReached || res.Limit != rankone.TimeLimit {
		t.Fatalf("status %v, limit %v", res.Status, res.Limit)
	}
	h, err := CheckCover(context.Background(), w, &c, 1)
	if err != nil {
		t.Fatal(err)
	}
	if lo := rankone.DistanceLower(h); lo > res.Upper {
		t.Errorf("DistanceLower(%v) = %v > the run's Upper %v", h, lo, res.Upper)
	}
	if _, err := (&BranchBound{Budget: -time.Second}).Search(context.Background(), w); !errors.Is(err, rankone.ErrOption) {
		t.Errorf("negative Budget: %v", err)
	}
}
