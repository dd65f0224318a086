package net

import (
	"context"
	"encoding/binary"
	"errors"
	"fmt"
	"math"
	"runtime"

	"gonum.org/v1/gonum/blas/blas64"

	"github.com/segre-lab/segre/internal/accurate"
	"github.com/segre-lab/segre/rankone"
	"github.com/segre-lab/segre/subspace"
)

// ErrCover is wrapped by the errors of CheckCover: the cover given is not
// one that proves anything for the subspace (its message names the first
// problem found).
var ErrCover = errors.New("net: invalid branch-and-bound cover")

// Cover is the set of leaf cells of a finished branch-and-bound run: every
// cell it pruned plus the frontier left at the end. The cells tile the faces
// of the cube [−1,1]^D (face j: coordinate j fixed at +1), seen radially, so
// their directions cover the sphere the run searched up to sign.
//
// For a complex subspace the sphere is the one left by the phase reduction
// (see SideDimension): D = 2·min(m, n) − 1 real coordinates, the imaginary
// part of the first coordinate of the net side being fixed at 0. The
// maximum of h over it is h* (derived on the side type), so a cover of it
// proves bounds on h* over C.
//
// A part of a sharded run (BranchBound.Shard) has Part.Count > 0: its cells
// tile only the initial cells listed in Part.Roots, and CheckPart checks
// it; JoinParts makes a whole cover of all the parts.
type Cover struct {
	D     int  // dimension of the net side's coordinates (after the phase reduction; side.d)
	OnX   bool // the cells are over x (else over y)
	Cells []CoverCell
	Part  Part // zero for a whole cover
}

// CoverCell is one leaf: face, box in the D−1 free coordinates of that face,
// and Guess, an estimate of λmax at the (unnormalised) centre used only as a
// starting point of the verified test (a wrong guess can only weaken the bound).
type CoverCell struct {
	Face   int
	Lo, Hi []float64
	Guess  float64
}

// maxCoverLevel is the deepest bisection level CheckCover accepts: the
// scaled corners 2^ℓ·Lo are then integers of magnitude at most 2^62, exact
// in int64.
const maxCoverLevel = 62

// coverIterations caps the fallback iteration of settle; each iterate that
// passes is valid, so stopping early only weakens the bound. The iteration
// contracts by about (1 + r²)/2 a step near its limit (derived on
// CheckCover), so 200 steps are far more than it ever needs.
const coverIterations = 200

// CheckCover re-verifies a cover for w, searching nothing: it checks that the
// cells tile every face exactly once, recomputes each cell's proven f̄ and
// radius r, and returns a proven bound hUpper ≥ h* (the smallest level U the
// cells are shown to be consistent with, see below), at most lambda0.
// lambda0 must be a proven bound ≥ h* (for example the flattening bound of
// rankone.FlatteningBound, or 1, which always holds); values above 1 are
// replaced by 1. The cover and w are not modified. A part of a sharded cover
// (Part.Count > 0) is refused: CheckPart checks those.
//
// Tiling (derived here). Each cell must be a dyadic box of uniform
// bisection: for one level ℓ ∈ [0, 62], every coordinate k of the D−1 free
// ones is [−1 + i_k·2^(1−ℓ), −1 + (i_k+1)·2^(1−ℓ)] with an integer
// 0 ≤ i_k < 2^ℓ. This is checked exactly: 2^ℓ·Lo_k and 2^ℓ·Hi_k are exact
// (scaling by a power of two), and must be integers A and A + 2 with
// A + 2^ℓ = 2i_k (ℓ is read from the float width Hi_k − Lo_k with
// math.Frexp, and only used as a candidate: a rounded width fails the
// integer test). Two dyadic intervals are nested or have disjoint
// interiors, so two such boxes (a product of intervals of one level each)
// either have disjoint interiors or one contains the other, and then its
// indices are those of the other shifted right by the level difference.
// With every (face, ℓ, i) stored in a map, walking each cell's ancestors
// finds any cell inside another, and a repeated key any duplicate; with
// neither, the cells of a face have pairwise disjoint interiors. Their
// volumes 2^((1−ℓ)(D−1)) then sum to the measure of their union (the
// boundaries have measure zero), counted exactly in integers level by level
// from the deepest (at each level the count carried up must be a multiple of
// 2^(D−1), else the total cannot be 2^(D−1)·(units of the level above)).
// If the sum is 2^(D−1), the volume of the face, the union (a finite union
// of closed boxes, hence closed) is the whole face: a point of the face
// outside it would have a neighbourhood in the face outside it, of positive
// measure. So the cells cover every face. Every unit vector u has a largest
// |u_j|, and u/u_j (a point of face j) or its negative lies in a cell; h is
// even in x and in y, so the directions of the cells cover the sphere up to
// a sign that does not change h.
//
// Cell bounds (derived on BranchBound). For each cell, c is its centre (the
// face point, cell.centre; dyadic, exact), r = cell.radius() bounds the
// distance from ĉ = c/‖c‖ to the direction of every point of the box
// (directions of face points are no farther apart than the points: package
// doc), and f̄ = λ̄max(H(c))/‖c‖² rounded upwards, where λ̄max is the
// verified bound started from Guess and ‖c‖² is taken rounded downwards
// (accurate.SumSqLower): since H is quadratic in c, f̄ ≥ λmax(H(ĉ)). These
// are the search's own formulas (the block form's matrix is summed in the
// same order, only its upper triangle, the part the verified test reads:
// checkBound), so with the search's Guess they give its f̄, bit for bit
// where the platform's BLAS adds without fused multiply-adds (amd64).
//
// One level, no iteration (derived here). For a cell write
// g(q, ρ, Λ) = (√q + ρ√(Λ − q))² and Φ(Λ) = max g(q, r, Λ) over
// 0 ≤ q ≤ min(f̄, Λ). BranchBound's derivation shows: for unit x in the cell
// and any unit y, with Λ_y = λmax(G(y)), h(x, y) ≤ g(ĉᵀG(y)ĉ, ‖x − ĉ‖, Λ_y)
// ≤ Φ(Λ_y) (g grows with ρ, and ĉᵀG(y)ĉ ≤ min(f̄, Λ_y)); and cellBound(f̄,
// r, Λ) ≥ Φ(Λ) for every Λ ≥ 0 (its two branches are the value at q = f̄
// when f̄ lies below the maximiser Λ/(1+r²) of g in q, and the maximum
// Λ(1+r²) of g otherwise, rounded upwards). Since g is homogeneous of degree
// one in (q, Λ), Φ(Λ) = Λ·φ(f̄/Λ) with φ(a) = max (√t + r√(1−t))² over
// 0 ≤ t ≤ min(a, 1): φ is nondecreasing, and strictly increasing on
// [0, 1/(1+r²)] when r > 0 (the derivative of the square is
// (√t + r√(1−t))(1/√t − r/√(1−t)) > 0 there), constant 1 + r² beyond.
// Lemma: if U > 0, r < 1, f̄ ≤ U and cellBound(f̄, r, U) ≤ U (the cell
// passes at U), then Φ(Λ) < Λ for every Λ > U. Proof: φ(f̄/U) = Φ(U)/U ≤ 1.
// If f̄ = 0, φ(f̄/Λ) = φ(0) = r² < 1. If f̄ > 0 and r > 0, φ(f̄/U) ≤ 1 <
// 1 + r² puts f̄/U in [0, 1/(1+r²)], where φ is strictly increasing, so
// φ(f̄/Λ) < φ(f̄/U) ≤ 1. If r = 0, φ(a) = min(a, 1) and φ(f̄/Λ) = f̄/Λ < 1
// because f̄ ≤ U < Λ (here f̄ ≤ U is needed: cellBound is then min(f̄, Λ)
// rounded, at most U even for f̄ > U). In each case Φ(Λ) = Λφ(f̄/Λ) < Λ.
// Now let (x*, y*) be a maximiser of h, so h* = h(x*, y*) ≤ Λ_{y*} ≤ h*:
// Λ_{y*} = h*. If every cell passes at one U and
// h* > U, the cell whose direction contains x* (up to sign) gives
// h* ≤ Φ(h*) < h*, a contradiction. So h* ≤ U: one evaluation of every
// cell's bound at one level U proves it, with no starting bound at all and
// no iteration over the cells. (This replaces the iteration
// U_{k+1} = max_c cellBound(f̄_c, r_c, U_k) from a proven U₀ used before,
// and ends where it did: an iterate that decreases, U_{k+1} < U_k, is a
// level that passes when every r < 1, since cellBound ≥ U_k(1 + r²) > U_k
// whenever f̄ > U_k.)
//
// The level is found by settle: each cell's own least passing level is
// about Λ_c = f̄(1 + 4r²/(1 − r²)²), the fixed point of ψ(Λ) =
// (√f̄ + r√(Λ − f̄))² (ψ exceeds Λ on (f̄, Λ_c) and is below it above Λ_c,
// with slope (1 + r²)/2 at Λ_c), so the candidate max_c Λ_c, computed in
// plain floating point, is tested and raised by relative steps
// 2^-52, 2^-50, … until every cell passes (the test is what proves; the
// candidate only aims it). If no level below lambda0 passes (a cell with
// r ≥ 1, or a cell whose level exceeds lambda0), settle falls back to
// iterating from lambda0 and keeps the last iterate that passes, or returns
// lambda0 itself, which holds by assumption. A run refines its cells only
// as far as its own Λ needs, so the level returned is about the run's Λ.
//
// Cost: the per-cell bounds run in parallel (rankone.ParallelFor, results
// in slots, so the result does not depend on the number of workers; each
// worker reuses one matrix buffer); the level is then one pass of cellBound
// over the cells, plus a few cheap passes that stop at the first failing
// cell. Memory is O(number of cells · D) for the map and the slots, plus one
// side (its block form, as for the search).
//
// It returns an error wrapping ErrCover naming the first problem found
// (wrong D or side for w, an empty cover, a part, a face out of range, a
// box of the wrong length, outside [−1, 1] or not dyadic, unequal widths, a
// cell repeated or inside another, a gap in the tiling, lambda0 NaN or
// negative), and ctx.Err() when ctx is done before the check ends. It
// panics if w or c is nil.
func CheckCover(ctx context.Context, w *subspace.Subspace, c *Cover, lambda0 float64) (hUpper float64, err error) {
	if err := checkShape(ctx, w, c, lambda0); err != nil {
		return 0, err
	}
	if c.Part.Count != 0 {
		return 0, fmt.Errorf("%w: the cover is part %d of %d: check it with CheckPart, or join the parts first", ErrCover, c.Part.Index, c.Part.Count)
	}
	if len(c.Cells) == 0 {
		return 0, fmt.Errorf("%w: no cells", ErrCover)
	}
	if err := checkTiling(ctx, c); err != nil {
		return 0, err
	}
	fbar, rad, err := cellBounds(ctx, w, c)
	if err != nil {
		return 0, err
	}
	return settle(ctx, fbar, rad, lambda0)
}

// checkShape checks what CheckCover and CheckPart need before the tiling:
// a live context, the side's dimension and name, a usable lambda0.
func checkShape(ctx context.Context, w *subspace.Subspace, c *Cover, lambda0 float64) error {
	if err := ctx.Err(); err != nil {
		return err
	}
	sd := newSideShape(w)
	if c.D != sd.d {
		return fmt.Errorf("%w: D = %d, but the subspace's net side has dimension %d", ErrCover, c.D, sd.d)
	}
	if c.OnX != sd.onX {
		return fmt.Errorf("%w: OnX = %v, but branch-and-bound covers the %s side of this subspace", ErrCover, c.OnX, sideName(sd.onX))
	}
	if math.IsNaN(lambda0) || lambda0 < 0 {
		return fmt.Errorf("%w: lambda0 = %v is not a bound on h* ≥ 0", ErrCover, lambda0)
	}
	return nil
}

// cellBounds returns the proven f̄ and r of every cell of c (see
// CheckCover), computed in parallel into slots.
func cellBounds(ctx context.Context, w *subspace.Subspace, c *Cover) (fbar, rad []float64, err error) {
	s := newSide(w)
	d, n := c.D, len(c.Cells)
	fbar, rad = make([]float64, n), make([]float64, n)
	var packed *upperForm
	if s.form != nil && 8*int64(len(s.form.blocks))/2 <= w.MemoryLimit()/4 {
		packed = newUpperForm(s.form)
	}
	workers := runtime.GOMAXPROCS(0)
	type buffers struct {
		centre, mat, acc []float64
		chol             cholWork // the verified test's workspace, reused across cells
	}
	bufs := make([]buffers, workers)
	for k := range bufs {
		bufs[k].centre = make([]float64, d)
		if s.form != nil {
			bufs[k].mat = make([]float64, s.p*s.p)
		}
		if packed != nil {
			bufs[k].acc = make([]float64, packed.t)
		}
	}
	err = rankone.ParallelFor(ctx, n, workers, func(k, i int) {
		cc := &c.Cells[i]
		cl := cell{face: cc.Face, lo: cc.Lo, hi: cc.Hi}
		cl.centre(bufs[k].centre, d)
		fbar[i] = s.checkBound(bufs[k].centre, cc.Guess, packed, bufs[k].mat, bufs[k].acc, &bufs[k].chol)
		rad[i] = cl.radius()
	})
	return fbar, rad, err
}

// checkBound is side.bound with the caller's buffers for the block form (no
// allocation of its own): the same proven bound, from the same sums in the
// same order, computed only in the upper triangle the verified test reads
// (through packed, the blocks' packed upper triangles, when given; else
// BlockForm.assembleUpper). buf is p×p, acc holds packed.t entries, w the
// verified test's workspace (bit for bit the allocating test's bound).
func (s *side) checkBound(c []float64, raw float64, packed *upperForm, buf, acc []float64, w *cholWork) float64 {
	if s.form == nil {
		return s.bound(c, raw)
	}
	c = s.lift(c)
	var a []float64
	var delta float64
	if packed != nil {
		a, delta = packed.assemble(c, buf, acc)
	} else {
		a, delta = s.form.assembleUpper(c, buf)
	}
	return s.normalised(c, s.form.upperWith(c, a, delta, sumSqEst(c), raw, w))
}

// upperForm holds the upper triangles (j ≥ i) of a block form's blocks,
// each packed row by row into t = p(p+1)/2 entries, so that a cell's matrix
// is summed by gonum's Axpy over contiguous vectors (vectorised on amd64).
// The entries and the operations on each are those of BlockForm.assemble
// (for each block in order, a += c_a c_b·M̂_ab, the Axpy kernel multiplying
// and then adding), so the upper triangle is assemble's, bit for bit. It
// takes about half the block form's memory, and cellBounds builds it only
// when that is at most a quarter of the subspace's memory limit.
type upperForm struct {
	f      *BlockForm
	t      int
	packed []float64 // block (a, b) at (a·d + b)·t
}

func newUpperForm(f *BlockForm) *upperForm {
	p, d := f.p, f.d
	u := &upperForm{f: f, t: p * (p + 1) / 2}
	u.packed = make([]float64, 0, d*d*u.t)
	for ab := 0; ab < d*d; ab++ {
		blk := f.blocks[ab*p*p : (ab+1)*p*p]
		for r := 0; r < p; r++ {
			u.packed = append(u.packed, blk[r*p+r:(r+1)*p]...)
		}
	}
	return u
}

// assemble is BlockForm.assembleUpper through the packed triangles: the
// sums in acc, then copied into the upper triangle of buf (whose lower
// triangle it leaves as it is); δ as derived on BlockForm.MaxEig.
func (u *upperForm) assemble(c, buf, acc []float64) (a []float64, delta float64) {
	f := u.f
	d, p, t := f.d, f.p, u.t
	acc = acc[:t]
	clear(acc)
	for i := 0; i < d; i++ {
		for j := 0; j < d; j++ {
			cij := c[i] * c[j]
			if cij == 0 {
				continue
			}
			blas64.Axpy(cij, blas64.Vector{N: t, Data: u.packed[(i*d+j)*t : (i*d+j+1)*t], Inc: 1}, blas64.Vector{N: t, Data: acc, Inc: 1})
			delta = accurate.AddUp(delta, accurate.MulUp(accurate.MulUp(math.Abs(c[i]), math.Abs(c[j])), f.errs[i*d+j]))
		}
	}
	a = buf[:p*p]
	k := 0
	for r := 0; r < p; r++ {
		k += copy(a[r*p+r:(r+1)*p], acc[k:k+p-r])
	}
	return a, accurate.MulUp(delta, 1.4143)
}

// assembleUpper is assemble writing only the upper triangle (j ≥ i) of A
// into buf (p×p, row-major), whose lower triangle it leaves as it is, and
// returning the same δ. Every entry is the same sequence of operations as
// assemble's: for each block in order, a += fl(c_a c_b · M̂_ab) with the
// product rounded before the sum (float64 forbids fusing it), which is what
// gonum's Axpy computes on amd64 (its kernel multiplies, then adds). The
// verified tests read only the upper triangle of a mat.SymDense, so the
// bound is assemble's own; δ is derived on MaxEig and bounds the error of
// this order of summation as of any other.
func (f *BlockForm) assembleUpper(c, buf []float64) (a []float64, delta float64) {
	d, p := f.d, f.p
	a = buf[:p*p]
	for i := 0; i < p; i++ {
		clear(a[i*p+i : (i+1)*p])
	}
	for i := 0; i < d; i++ {
		for j := 0; j < d; j++ {
			cij := c[i] * c[j]
			if cij == 0 {
				continue
			}
			blk := f.blocks[(i*d+j)*p*p : (i*d+j+1)*p*p]
			for r := 0; r < p; r++ {
				row, brow := a[r*p+r:(r+1)*p], blk[r*p+r:(r+1)*p]
				for t, v := range brow {
					row[t] += float64(cij * v)
				}
			}
			delta = accurate.AddUp(delta, accurate.MulUp(accurate.MulUp(math.Abs(c[i]), math.Abs(c[j])), f.errs[i*d+j]))
		}
	}
	return a, accurate.MulUp(delta, 1.4143)
}

// passes reports whether every cell passes at the level u (the condition
// of the lemma on CheckCover): u > 0, r < 1, f̄ ≤ u and
// cellBound(f̄, r, u) ≤ u. It stops at the first cell that fails.
func passes(fbar, rad []float64, u float64) bool {
	if !(u > 0) {
		return false
	}
	for i, f := range fbar {
		if !(rad[i] < 1) || !(f <= u) || !(cellBound(f, rad[i], u) <= u) {
			return false
		}
	}
	return true
}

// settle returns the smallest level it finds at which every cell passes
// (see CheckCover: then h* ≤ level, or, for a part, no maximiser lies in
// it), or min(lambda0, 1) when none below it does. It returns 0 for no
// cells (nothing to bound) and ctx.Err() when ctx is done.
func settle(ctx context.Context, fbar, rad []float64, lambda0 float64) (float64, error) {
	u0 := math.Min(lambda0, 1)
	if len(fbar) == 0 {
		return 0, nil
	}
	// The candidate: the largest per-cell fixed point, in plain arithmetic.
	var cand float64
	for i, f := range fbar {
		r2 := float64(rad[i] * rad[i]) // the candidate only aims the test; unfused all the same
		if !(r2 < 1) || math.IsNaN(f) {
			cand = math.Inf(1)
			break
		}
		cand = math.Max(cand, f*(1+4*r2/((1-r2)*(1-r2))))
	}
	if cand == 0 {
		cand = 0x1p-1000 // every f̄ is 0: any positive level may pass
	}
	for j := 0; j <= 26 && cand < u0; j++ {
		u := cand + math.Ldexp(cand, -52+2*j)
		if u >= u0 {
			break
		}
		if passes(fbar, rad, u) {
			return u, nil
		}
	}
	if err := ctx.Err(); err != nil {
		return 0, err
	}
	// Fallback: iterate from u0, keeping the last iterate that passes.
	best, u := u0, u0
	for it := 0; it < coverIterations; it++ {
		if err := ctx.Err(); err != nil {
			return 0, err
		}
		t := 0.0
		for i, f := range fbar {
			t = math.Max(t, cellBound(f, rad[i], u))
		}
		if t <= u && passes(fbar, rad, u) {
			best = u
		}
		if !(t < u) {
			break
		}
		u = t
	}
	return best, nil
}

// newSideShape returns the side newSide would choose, without its block
// form: only its dimensions and which side it covers.
func newSideShape(w *subspace.Subspace) side {
	s := side{w: w, onX: w.Rows() <= w.Cols()}
	s.d = newSideDims(w)
	return s
}

func sideName(onX bool) string {
	if onX {
		return "x"
	}
	return "y"
}

// checkTiling checks that the cells of c tile every face of [−1, 1]^D
// exactly once (see CheckCover for the argument) and returns an error
// wrapping ErrCover naming the first problem.
func checkTiling(ctx context.Context, c *Cover) error {
	return checkTilingOf(ctx, c, 0, nil, true)
}

// checkTilingOf checks that the cells of c tile exactly the union of the
// initial cells of level root whose ranks (rootRank) are listed in roots,
// or every face when whole is set (root must then be 0). Every cell must
// lie inside a listed initial cell (its level at least root, its ancestor
// of that level listed); with no overlaps, the volumes must add up, per
// face, to that face's listed initial cells: each initial cell holds at
// most its own volume of disjoint cells, so the sum is reached only if
// every one is covered (the argument on CheckCover, face by face).
func checkTilingOf(ctx context.Context, c *Cover, root int, roots []int, whole bool) error {
	d := c.D
	k := d - 1 // free coordinates of a face
	n := len(c.Cells)
	// Expected volume per face, in initial cells of level root.
	want := make([]int, d)
	var listed map[int]bool
	if whole {
		for f := range want {
			want[f] = 1
		}
	} else {
		listed = make(map[int]bool, len(roots))
		per := 1 << (root * k) // initial cells per face (rootCount checked it fits)
		for _, rk := range roots {
			listed[rk] = true
			want[rk/per]++
		}
	}
	// Per cell: its level and its index vector (k entries, flattened).
	level := make([]int, n)
	idx := make([]uint64, n*k)
	for i := range c.Cells {
		if i%4096 == 0 {
			if err := ctx.Err(); err != nil {
				return err
			}
		}
		cc := &c.Cells[i]
		if cc.Face < 0 || cc.Face >= d {
			return fmt.Errorf("%w: cell %d: face %d, want 0 ≤ face < %d", ErrCover, i, cc.Face, d)
		}
		if len(cc.Lo) != k || len(cc.Hi) != k {
			return fmt.Errorf("%w: cell %d: box of lengths %d and %d, want %d", ErrCover, i, len(cc.Lo), len(cc.Hi), k)
		}
		l := -1
		for j := 0; j < k; j++ {
			lo, hi := cc.Lo[j], cc.Hi[j]
			if !(lo >= -1 && hi <= 1 && lo < hi) {
				return fmt.Errorf("%w: cell %d: coordinate %d is [%v, %v], not an interval inside [−1, 1]", ErrCover, i, j, lo, hi)
			}
			lj, ij, ok := dyadic(lo, hi)
			if !ok {
				return fmt.Errorf("%w: cell %d: coordinate %d is [%v, %v], not a dyadic interval of the bisection of [−1, 1] (level ≤ %d)", ErrCover, i, j, lo, hi, maxCoverLevel)
			}
			if l >= 0 && lj != l {
				return fmt.Errorf("%w: cell %d: unequal widths (coordinate 0 has width 2^%d, coordinate %d 2^%d)", ErrCover, i, 1-l, j, 1-lj)
			}
			l = lj
			idx[i*k+j] = ij
		}
		if l < 0 {
			l = 0 // D = 1: the face is the single point, level 0 (and root 0)
		}
		level[i] = l
		if listed != nil {
			if l < root {
				return fmt.Errorf("%w: cell %d (level %d) is larger than the part's initial cells (level %d)", ErrCover, i, l, root)
			}
			if rk := rootRank(cc.Face, root, idx[i*k:(i+1)*k], l-root); !listed[rk] {
				return fmt.Errorf("%w: cell %d lies in initial cell %d, which is not one of this part's", ErrCover, i, rk)
			}
		}
	}

	// Overlap: every key once, then no cell's ancestor among the keys.
	seen := make(map[string]int, n)
	key := make([]byte, 0, 16+8*k)
	for i := range c.Cells {
		key = cellKey(key[:0], c.Cells[i].Face, level[i], idx[i*k:(i+1)*k], 0)
		if j, dup := seen[string(key)]; dup {
			return fmt.Errorf("%w: cell %d repeats cell %d (overlap)", ErrCover, i, j)
		}
		seen[string(key)] = i
	}
	for i := range c.Cells {
		if i%4096 == 0 {
			if err := ctx.Err(); err != nil {
				return err
			}
		}
		for up := 1; up <= level[i]-root; up++ {
			key = cellKey(key[:0], c.Cells[i].Face, level[i]-up, idx[i*k:(i+1)*k], up)
			if j, in := seen[string(key)]; in {
				return fmt.Errorf("%w: cell %d lies inside cell %d (overlap)", ErrCover, i, j)
			}
		}
	}

	// Gaps: with disjoint interiors, the volumes must sum to want[f] initial
	// cells per face, counted in units of the deepest level and carried
	// upwards exactly.
	count := make([]int, d*(maxCoverLevel+1))
	for i := range c.Cells {
		count[c.Cells[i].Face*(maxCoverLevel+1)+level[i]]++
	}
	for f := 0; f < d; f++ {
		units := 0 // in cells of the current level
		for l := maxCoverLevel; l > root; l-- {
			units += count[f*(maxCoverLevel+1)+l]
			// Carry to level l−1: 2^k cells of level l make one.
			if k >= 63 {
				if units != 0 {
					return gapError(f, l)
				}
				continue
			}
			if units&(1<<k-1) != 0 {
				return gapError(f, l)
			}
			units >>= k
		}
		if units+count[f*(maxCoverLevel+1)+root] != want[f] {
			return gapError(f, root)
		}
	}
	return nil
}

// rootRank returns the rank of the initial cell of level root that holds
// the cell with index vector idx, up levels below root, on the face face:
// face·(2^root)^k + Σ_j (idx_j >> up)·(2^root)^j, k = len(idx). This is
// the order in which Part.Roots names initial cells.
func rootRank(face, root int, idx []uint64, up int) int {
	per := 1 << root
	rank := 0
	for j := len(idx) - 1; j >= 0; j-- {
		rank = rank*per + int(idx[j]>>up)
	}
	return face*(1<<(root*len(idx))) + rank
}

func gapError(face, level int) error {
	return fmt.Errorf("%w: face %d: the cells leave a gap (their volumes do not add up to the face's; first seen at level %d)", ErrCover, face, level)
}

// dyadic reports whether [lo, hi] ⊂ [−1, 1] is an interval of the level-ℓ
// bisection of [−1, 1], [−1 + i·2^(1−ℓ), −1 + (i+1)·2^(1−ℓ)] with
// 0 ≤ ℓ ≤ maxCoverLevel, and returns ℓ and i. The test is exact: ℓ is
// read from the float width (exact or not) as a candidate, then
// a = 2^ℓ·lo and b = 2^ℓ·hi (exact: scaling by a power of two, no overflow
// for |lo|, |hi| ≤ 1) must be integers with b = a + 2 and a + 2^ℓ even and
// ≥ 0, i = (a + 2^ℓ)/2.
func dyadic(lo, hi float64) (level int, i uint64, ok bool) {
	frac, exp := math.Frexp(hi - lo) // hi − lo = frac·2^exp, frac = 1/2 for a power of two
	if frac != 0.5 {
		return 0, 0, false
	}
	level = 2 - exp // width 2^(exp−1) = 2^(1−ℓ)
	if level < 0 || level > maxCoverLevel {
		return 0, 0, false
	}
	a, b := math.Ldexp(lo, level), math.Ldexp(hi, level)
	if a != math.Trunc(a) || b != math.Trunc(b) {
		return 0, 0, false
	}
	ia, ib := int64(a), int64(b)
	off := int64(1) << level
	if ib != ia+2 || (ia+off)%2 != 0 || ia+off < 0 || ib > off {
		return 0, 0, false
	}
	return level, uint64((ia + off) / 2), true
}

// cellKey appends the map key of the ancestor `up` levels above the cell
// (face, level+up, idx): face, level, then each index shifted right by up.
func cellKey(dst []byte, face, level int, idx []uint64, up int) []byte {
	dst = binary.LittleEndian.AppendUint64(dst, uint64(face))
	dst = append(dst, byte(level))
	for _, v := range idx {
		dst = binary.LittleEndian.AppendUint64(dst, v>>up)
	}
	return dst
}
