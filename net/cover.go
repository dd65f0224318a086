package net

import (
	"context"
	"encoding/binary"
	"errors"
	"fmt"
	"math"
	"runtime"

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
type Cover struct {
	D     int  // dimension of the net side's coordinates (after the phase reduction; side.d)
	OnX   bool // the cells are over x (else over y)
	Cells []CoverCell
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

// coverIterations caps the iteration of CheckCover; each iterate is valid,
// so stopping early only weakens the bound. The iteration contracts by about
// (1 + r²)/2 a step near its limit (derived on CheckCover), so 200 steps are
// far more than it ever needs.
const coverIterations = 200

// CheckCover re-verifies a cover for w, searching nothing: it checks that the
// cells tile every face exactly once, recomputes each cell's proven f̄ and
// radius r, and returns the proven bound hUpper ≥ h* of the iteration below.
// lambda0 must be a proven bound ≥ h* (for example the flattening bound of
// rankone.FlatteningBound, or 1, which always holds); values above 1 are
// replaced by 1. The cover and w are not modified.
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
// doc), and f̄ = side.bound(c, Guess) = λ̄max(H(c))/‖c‖² rounded upwards,
// where λ̄max is the verified bound started from Guess and ‖c‖² is taken
// rounded downwards (accurate.SumSqLower): since H is quadratic in c,
// f̄ ≥ λmax(H(ĉ)). These are the search's own formulas, and with the
// search's Guess they give its f̄ bit for bit. Then for every proven
// Λ ≥ h*, max h over the cell ≤ cellBound(f̄, r, Λ).
//
// Iteration (derived here). Let U₀ = min(lambda0, 1) ≥ h* and
// U_{k+1} = min(U_k, max_c cellBound(f̄_c, r_c, U_k)). If U_k ≥ h*, each
// cell's bound with Λ = U_k is valid, so h on every cell is at most the
// largest of them, and h* (reached in some cell, the cells covering the
// sphere) is at most U_{k+1}: by induction every iterate is proven. The
// iteration stops as soon as an iterate does not decrease (or after 200
// steps: any iterate is valid). For one cell, ψ(Λ) = (√f̄ + r√(Λ − f̄))²
// exceeds Λ on (f̄, Λ_c) and is below it above Λ_c = f̄(1 + 4r²/(1 − r²)²),
// with slope (1 + r²)/2 at Λ_c; so from U₀ above the largest Λ_c the
// iterates decrease geometrically to it, and from U₀ below it they stay at
// U₀. A run refines its cells only as far as its own Λ (starting from the
// flattening bound) needs, so its cover re-checks best from the same
// lambda0; from a larger one the bound may stop at a larger cell fixed
// point.
//
// Cost: the per-cell bounds run in parallel (rankone.ParallelFor, results
// in slots, reduced in index order, so the result does not depend on the
// number of workers); memory is O(number of cells · D) for the map and the
// slots, plus one side (its block form, as for the search).
//
// It returns an error wrapping ErrCover naming the first problem found
// (wrong D or side for w, an empty cover, a face out of range, a box of the
// wrong length, outside [−1, 1] or not dyadic, unequal widths, a cell
// repeated or inside another, a gap in the tiling, lambda0 NaN or negative),
// and ctx.Err() when ctx is done before the check ends. It panics if w or
// c is nil.
func CheckCover(ctx context.Context, w *subspace.Subspace, c *Cover, lambda0 float64) (hUpper float64, err error) {
	if err := ctx.Err(); err != nil {
		return 0, err
	}
	sd := newSideShape(w)
	if c.D != sd.d {
		return 0, fmt.Errorf("%w: D = %d, but the subspace's net side has dimension %d", ErrCover, c.D, sd.d)
	}
	if c.OnX != sd.onX {
		return 0, fmt.Errorf("%w: OnX = %v, but branch-and-bound covers the %s side of this subspace", ErrCover, c.OnX, sideName(sd.onX))
	}
	if len(c.Cells) == 0 {
		return 0, fmt.Errorf("%w: no cells", ErrCover)
	}
	if math.IsNaN(lambda0) || lambda0 < 0 {
		return 0, fmt.Errorf("%w: lambda0 = %v is not a bound on h* ≥ 0", ErrCover, lambda0)
	}
	if err := checkTiling(ctx, c); err != nil {
		return 0, err
	}

	// The proven f̄ and r of every cell, into slots.
	s := newSide(w)
	d, n := c.D, len(c.Cells)
	fbar, rad := make([]float64, n), make([]float64, n)
	workers := runtime.GOMAXPROCS(0)
	bufs := make([][]float64, workers)
	for k := range bufs {
		bufs[k] = make([]float64, d)
	}
	err = rankone.ParallelFor(ctx, n, workers, func(k, i int) {
		cc := &c.Cells[i]
		cl := cell{face: cc.Face, lo: cc.Lo, hi: cc.Hi}
		cl.centre(bufs[k], d)
		fbar[i] = s.bound(bufs[k], cc.Guess)
		rad[i] = cl.radius()
	})
	if err != nil {
		return 0, err
	}

	u := math.Min(lambda0, 1)
	for it := 0; it < coverIterations; it++ {
		if err := ctx.Err(); err != nil {
			return 0, err
		}
		var t float64
		for i := range fbar {
			t = math.Max(t, cellBound(fbar[i], rad[i], u))
		}
		if !(t < u) {
			break
		}
		u = t
	}
	return u, nil
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
	d := c.D
	k := d - 1 // free coordinates of a face
	n := len(c.Cells)
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
			l = 0 // D = 1: the face is the single point, level 0
		}
		level[i] = l
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
		for up := 1; up <= level[i]; up++ {
			key = cellKey(key[:0], c.Cells[i].Face, level[i]-up, idx[i*k:(i+1)*k], up)
			if j, in := seen[string(key)]; in {
				return fmt.Errorf("%w: cell %d lies inside cell %d (overlap)", ErrCover, i, j)
			}
		}
	}

	// Gaps: with disjoint interiors, the volumes must sum to 2^k per face,
	// counted in units of the deepest level and carried upwards exactly.
	count := make([]int, d*(maxCoverLevel+1))
	for i := range c.Cells {
		count[c.Cells[i].Face*(maxCoverLevel+1)+level[i]]++
	}
	for f := 0; f < d; f++ {
		units := 0 // in cells of the current level
		for l := maxCoverLevel; l >= 1; l-- {
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
		if units+count[f*(maxCoverLevel+1)] != 1 {
			return gapError(f, 0)
		}
	}
	return nil
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
