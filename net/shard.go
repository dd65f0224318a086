package net

import (
	"cmp"
	"context"
	"fmt"
	"math"
	"slices"

	"github.com/segre-lab/segre/subspace"
)

// Shard selects one part of a deterministic partition of branch-and-bound's
// initial cells (BranchBound.Shard): part Index of Count, 0 ≤ Index < Count.
// The zero value (Count 0) means the whole sphere, no partition.
//
// Why a part may run on its own (derived here). A whole run bounds each cell
// with a proven Λ ≥ h* (BranchBound: the cell bound needs Λ ≥ λmax(G(y))
// for every y), lowering Λ to the largest key over all cells. A part sees
// only its cells: the largest of its keys bounds h over its cells only if
// Λ ≥ h*, and h* may be reached in another part, so it is not a bound on h*
// and is never reported as one (a part's Result has Lower = 0 unless
// Count = 1, and its progress reports no Lower). What a part proves does
// not need a global Λ: by the lemma on CheckCover, if every cell of a set
// passes at a level U (U > 0, r < 1, f̄ ≤ U, cellBound(f̄, r, U) ≤ U), no
// maximiser of h has its direction in those cells unless h* ≤ U. CheckPart
// recomputes the smallest such level U_i from the part's leaves alone. The
// initial cells of all parts tile the faces, so some part holds a
// maximiser, and h* ≤ max_i U_i: joining the parts (JoinParts) proves the
// whole bound, and CheckCover on the joined cover finds the same level (the
// largest part's, up to the few ulps by which its candidate is raised).
//
// The search of a part is a whole run restricted to its initial cells: Λ
// starts at the flattening bound (a true bound on h*) and is lowered to the
// part's own largest key. When the maximiser lies in another part this Λ
// may fall below h*, and then its keys are not bounds on h over their cells
// — but the search uses them only to choose what to split and when to
// stop; what the part proves is only what CheckPart recomputes. A part stops
// when its Λ is within the gap of the incumbent, as a whole run does, and
// the incumbent is the same local search over the whole sphere in every
// part (raised by polishing in any part), so every part's level, and the
// joined bound, meet the gap of the best incumbent.
//
// The partition. The initial cells are every face bisected to level L in
// each coordinate, L = 2 (as a whole run lays them out by default) unless
// d·4^(d−1) > 2^19, then L = 1; their ranks are given by rootRank. Every
// part first raises the incumbent by the local method from the centres of
// the initial cells of largest f̄ (polishRoots: the same points in every
// part, whichever part holds them), then predicts the cost of each initial
// cell c as δ_c^(−(d−1)/2), δ_c = max(1 − f̄_c/h̲, 2^−20), h̲ the
// incumbent's value. The prediction (derived here; a model, not a bound): a
// cell is split until its descendants pass, which near the fixed point needs
// Λ_c = f̄(1 + 4r²/(1 − r²)²) ≤ h̲, i.e. r² below about δ/4 for a
// descendant whose centre value is about f̄_c; an initial cell of radius r₀
// then has about (2r₀/√δ)^(d−1) ∝ δ^(−(d−1)/2) leaves. The cell that holds
// the incumbent's direction (incumbentRoot) also holds the chain of ever
// smaller cells around the maximiser, down to the gap, which the model does
// not see: it is predicted a third of the total (at least half of all the
// others together), the middle of the shares measured for that cell — 23%
// to 47% of all leaves on Gaussian subspaces of dimension mn/2 of 3×8,
// 3×16, 3×32 and 4×8. The cells are then dealt longest-predicted-first
// (Graham, "Bounds on multiprocessing timing anomalies", SIAM J. Appl. Math.
// 17, 1969): in decreasing predicted cost (ties by rank), each to the part
// with the smallest predicted load so far (ties to the smaller index).
// Measured on those four instances: the parts' leaves add up to the whole
// run's within 4%, and the longest part holds 1.06–1.18 times the
// mean for N = 2, 1.16–1.41 for N = 3; no partition of initial cells can
// make a part shorter than the incumbent's cell, so for N = 8 the longest
// part is that cell (1.9 to 3.6 times the mean).
//
// Everything here is deterministic for the same binary on the same
// architecture (the same floats): the stored basis, the incumbent and f̄.
// Each part records its initial cells (Part.Roots), and JoinParts refuses
// parts whose lists do not partition the initial cells, so parts cut by
// different partitions are caught, never merged.
type Shard struct {
	Index, Count int
}

// Part says which part of a sharded run a cover is (Cover.Part). Its zero
// value (Count 0) is a whole cover.
type Part struct {
	Index, Count int
	// Level is the bisection level of the initial cells the partition
	// splits (0 for d = 1).
	Level int
	// Roots are the ranks (see InitialCells) of this part's initial cells,
	// increasing; its cells tile exactly these.
	Roots []int
}

// InitialCells returns the number of initial cells of the partition for a
// side of dimension d: d faces of 2^(Level·(d−1)) cells each. The initial
// cell of rank t lies on face t / 2^(Level·(d−1)), and its index in free
// coordinate j (in [0, 2^Level)) is digit j of t mod 2^(Level·(d−1)) in base
// 2^Level, digit 0 the least significant.
func (p Part) InitialCells(d int) int {
	return d << (p.Level * (d - 1))
}

// shardLevel is the level of the initial cells of a sharded run on a side
// of dimension d (see Shard): fixed by d alone, so that every part lays out
// the same cells whatever its memory settings.
func shardLevel(d int) int {
	switch {
	case d <= 1:
		return 0
	case d > 20 || int64(d)<<(4*(d-1)) > 1<<19:
		return 1
	}
	return 2
}

// sharded reports whether the run covers a part (Shard.Count > 0), and
// partial whether that part is not the whole sphere (Count ≥ 2): then its
// Λ is not a bound on h*.
func (r *bbRun) sharded() bool { return r.b.Shard.Count > 0 }
func (r *bbRun) partial() bool { return r.b.Shard.Count > 1 }

// checkShard validates BranchBound.Shard.
func checkShard(s Shard) error {
	if s.Count < 0 || s.Count > 0 && (s.Index < 0 || s.Index >= s.Count) {
		return fmt.Errorf("BranchBound.Shard = part %d of %d, want 0 ≤ Index < Count", s.Index, s.Count)
	}
	return nil
}

// selectPart keeps, of the initial cells init (all faces at level
// shardLevel(d)), those the partition gives to this run's part (see Shard),
// and records them in r.part.
func (r *bbRun) selectPart(ctx context.Context, init []*cell) []*cell {
	d, k := r.d, r.d-1
	level := shardLevel(d)
	n := len(init)
	rank := make([]int, n)
	cost := make([]float64, n)
	s := r.sides[0] // a copy: its evaluation count is not the run's
	c, v := make([]float64, d), make([]float64, s.p)
	idx := make([]uint64, k)
	fbar := make([]float64, n)
	for i, cl := range init {
		for j := range idx {
			_, ij, _ := dyadic(cl.lo[j], cl.hi[j])
			idx[j] = ij
		}
		rank[i] = rootRank(cl.face, level, idx, 0)
		cl.centre(c, d)
		clear(v)
		_, fbar[i], _ = s.value(c, v)
	}
	r.polishRoots(ctx, init, fbar)
	href := r.hLow
	if !(href > 0) {
		href = slices.Max(fbar)
	}
	for i := range init {
		delta := 0x1p-20
		if href > 0 && fbar[i] < href {
			delta = math.Max(delta, 1-fbar[i]/href)
		}
		cost[i] = math.Pow(delta, -float64(k)/2)
		if math.IsNaN(cost[i]) {
			cost[i] = math.Inf(1) // a cell that cannot be bounded: the most work
		}
	}
	if t := r.incumbentRoot(level); t >= 0 {
		var others float64
		for i := range cost {
			if rank[i] != t {
				others += cost[i]
			}
		}
		for i := range cost {
			if rank[i] == t {
				cost[i] = math.Max(cost[i], others/2) // a third of the predicted total
			}
		}
	}
	owner := partition(cost, rank, r.b.Shard.Count)
	var keep []*cell
	var roots []int
	for i, cl := range init {
		if owner[i] == r.b.Shard.Index {
			keep = append(keep, cl)
			roots = append(roots, rank[i])
		}
	}
	slices.Sort(roots)
	r.part = Part{Index: r.b.Shard.Index, Count: r.b.Shard.Count, Level: level, Roots: roots}
	return keep
}

// polishRoots raises the incumbent, identically in every part, by the
// local method from the centres of the initial cells with the largest f̄
// (up to polishRoots of them, in decreasing f̄, ties by order), over all
// initial cells, not only the part's: a part that does not hold the
// maximiser would otherwise prove its cells against a lower incumbent than
// a whole run reaches, and refine them further than the whole run needs.
func (r *bbRun) polishRoots(ctx context.Context, init []*cell, fbar []float64) {
	order := make([]int, len(init))
	for i := range order {
		order[i] = i
	}
	slices.SortStableFunc(order, func(a, b int) int { return cmp.Compare(fbar[b], fbar[a]) })
	s := r.sides[0]
	c, v := make([]float64, r.d), make([]float64, s.p)
	for _, i := range order[:min(len(order), polishedRoots)] {
		if ctx.Err() != nil {
			return
		}
		init[i].centre(c, r.d)
		clear(v)
		est, _, _ := s.value(c, v)
		best := r.bestEst
		r.polish(ctx, &cell{face: init[i].face, lo: init[i].lo, hi: init[i].hi, est: est}, v)
		r.bestEst = math.Max(best, r.bestEst)
	}
}

// polishedRoots is the number of initial cells polishRoots starts from.
const polishedRoots = 8

// incumbentRoot returns the rank of the initial cell (of the given level)
// that holds the direction of the incumbent's net-side vector, up to sign
// (for a complex subspace after the phase reduction: the vector turned by
// the phase that makes its first coordinate real, that coordinate's
// imaginary part then dropped), or -1 when there is no usable incumbent. It
// is a prediction only (see Shard): rounding at a cell's edge may pick its
// neighbour.
func (r *bbRun) incumbentRoot(level int) int {
	u := r.res.X
	if !r.sd.onX {
		u = r.res.Y
	}
	v := append([]float64(nil), u...)
	if r.sd.fixed > 0 {
		h := len(v) / 2
		if h == 0 {
			return -1
		}
		// (v[:h] + i·v[h:])·conj(x₁)/|x₁|, x₁ = v[0] + i·v[h].
		if n := math.Hypot(v[0], v[h]); n > 0 {
			ca, cb := v[0]/n, -v[h]/n
			for j := 0; j < h; j++ {
				re, im := v[j], v[h+j]
				v[j], v[h+j] = float64(re*ca)-float64(im*cb), float64(re*cb)+float64(im*ca)
			}
		}
		v = append(v[:h], v[h+1:]...)
	}
	if len(v) != r.d {
		return -1
	}
	face := 0
	for j := range v {
		if math.Abs(v[j]) > math.Abs(v[face]) {
			face = j
		}
	}
	if !(math.Abs(v[face]) > 0) {
		return -1
	}
	per := 1 << level
	idx := make([]uint64, 0, r.d-1)
	for j := range v {
		if j == face {
			continue
		}
		i := int(math.Floor((v[j]/v[face] + 1) / 2 * float64(per)))
		idx = append(idx, uint64(min(max(i, 0), per-1)))
	}
	return rootRank(face, level, idx, 0)
}

// partition deals n items of predicted costs cost to parts
// longest-predicted-first: in decreasing cost (ties by increasing rank),
// each to the part with the smallest load so far (ties to the smaller
// part). It returns each item's part.
func partition(cost []float64, rank []int, parts int) []int {
	order := make([]int, len(cost))
	for i := range order {
		order[i] = i
	}
	slices.SortStableFunc(order, func(a, b int) int {
		if c := cmp.Compare(cost[b], cost[a]); c != 0 {
			return c
		}
		return cmp.Compare(rank[a], rank[b])
	})
	load := make([]float64, parts)
	owner := make([]int, len(cost))
	for _, i := range order {
		best := 0
		for p := 1; p < parts; p++ {
			if load[p] < load[best] {
				best = p
			}
		}
		owner[i] = best
		load[best] += cost[i]
	}
	return owner
}

// checkPart validates a part's description against the side dimension d:
// 0 ≤ Index < Count, a level whose initial cells can be counted, and
// increasing ranks in range.
func checkPart(d int, p Part) error {
	if p.Count < 1 || p.Index < 0 || p.Index >= p.Count {
		return fmt.Errorf("%w: part %d of %d", ErrCover, p.Index, p.Count)
	}
	if p.Level < 0 || d == 1 && p.Level != 0 || p.Level*(d-1) > 40 {
		return fmt.Errorf("%w: initial cells of level %d on a side of dimension %d", ErrCover, p.Level, d)
	}
	total := p.InitialCells(d)
	for i, t := range p.Roots {
		if t < 0 || t >= total {
			return fmt.Errorf("%w: initial cell %d: there are %d", ErrCover, t, total)
		}
		if i > 0 && t <= p.Roots[i-1] {
			return fmt.Errorf("%w: the part's initial cells are not listed in increasing order (%d after %d)", ErrCover, t, p.Roots[i-1])
		}
	}
	return nil
}

// CheckPart re-verifies a part of a sharded cover for w, searching nothing:
// that its cells tile exactly the initial cells it lists (Part.Roots), and
// the smallest level U at which all of them pass (see CheckCover: the
// lemma there). It returns U, proven in this sense: either h* ≤ U, or no
// maximiser of h has its direction in this part's initial cells. U is at
// most lambda0, a proven bound ≥ h* as for CheckCover (then the statement
// holds trivially); a part with no cells (and no initial cells) returns 0.
// The parts of one partition that pass their checks prove h* ≤ the largest
// of their levels (see Shard). The cover and w are not modified.
//
// It returns an error wrapping ErrCover naming the first problem (as
// CheckCover, and: not a part, a part index or level out of range, initial
// cells out of range or out of order, a cell larger than the initial cells
// or outside the listed ones), and ctx.Err() when ctx is done. It panics if
// w or c is nil.
func CheckPart(ctx context.Context, w *subspace.Subspace, c *Cover, lambda0 float64) (bound float64, err error) {
	if err := checkShape(ctx, w, c, lambda0); err != nil {
		return 0, err
	}
	if c.Part.Count == 0 {
		return 0, fmt.Errorf("%w: the cover is not a part (check it with CheckCover)", ErrCover)
	}
	if err := checkPart(c.D, c.Part); err != nil {
		return 0, err
	}
	if len(c.Cells) == 0 {
		if len(c.Part.Roots) > 0 {
			return 0, fmt.Errorf("%w: no cells, but %d initial cells listed", ErrCover, len(c.Part.Roots))
		}
		return 0, nil // an empty part: nothing to bound
	}
	if err := checkTilingOf(ctx, c, c.Part.Level, c.Part.Roots, false); err != nil {
		return 0, err
	}
	fbar, rad, err := cellBounds(ctx, w, c)
	if err != nil {
		return 0, err
	}
	return settle(ctx, fbar, rad, lambda0)
}

// JoinParts joins the covers of all parts of one sharded run into one whole
// cover (cells in part order; boxes shared, not copied), after checking
// that they belong together: the same side (D, OnX), the same partition
// (Count, Level), every part index exactly once, and initial cells that
// partition all of them (each listed by exactly one part). It does not
// check the cells (CheckPart does, part by part; CheckCover on the result
// does it for the whole). The parts are not modified.
//
// It returns an error wrapping ErrCover that names the first problem: a
// missing or repeated part, parts of different sides or partitions, an
// initial cell in no part or in two.
func JoinParts(parts []*Cover) (*Cover, error) {
	if len(parts) == 0 {
		return nil, fmt.Errorf("%w: no parts", ErrCover)
	}
	p0 := parts[0]
	for i, c := range parts {
		if c.Part.Count == 0 {
			return nil, fmt.Errorf("%w: cover %d is not a part of a sharded run", ErrCover, i)
		}
		if c.D != p0.D || c.OnX != p0.OnX {
			return nil, fmt.Errorf("%w: the parts cover different sides (part %d: D = %d on %s, part %d: D = %d on %s)",
				ErrCover, p0.Part.Index, p0.D, sideName(p0.OnX), c.Part.Index, c.D, sideName(c.OnX))
		}
		if c.Part.Count != p0.Part.Count || c.Part.Level != p0.Part.Level {
			return nil, fmt.Errorf("%w: the parts come from different partitions (part %d is one of %d at level %d, part %d one of %d at level %d)",
				ErrCover, p0.Part.Index, p0.Part.Count, p0.Part.Level, c.Part.Index, c.Part.Count, c.Part.Level)
		}
		if err := checkPart(c.D, c.Part); err != nil {
			return nil, err
		}
	}
	count := p0.Part.Count
	byIndex := make([]*Cover, count)
	for _, c := range parts {
		if byIndex[c.Part.Index] != nil {
			return nil, fmt.Errorf("%w: part %d of %d is given twice", ErrCover, c.Part.Index, count)
		}
		byIndex[c.Part.Index] = c
	}
	var missing []int
	for i, c := range byIndex {
		if c == nil {
			missing = append(missing, i)
		}
	}
	if len(missing) > 0 {
		return nil, fmt.Errorf("%w: %s of %d missing (give all %d parts)", ErrCover, partList(missing), count, count)
	}
	total := p0.Part.InitialCells(p0.D)
	listed := 0
	for _, c := range byIndex {
		listed += len(c.Part.Roots)
	}
	owner := make(map[int]int, listed)
	out := &Cover{D: p0.D, OnX: p0.OnX}
	for _, c := range byIndex {
		for _, t := range c.Part.Roots {
			if o, dup := owner[t]; dup {
				return nil, fmt.Errorf("%w: initial cell %d is in parts %d and %d (the parts were cut by different partitions)", ErrCover, t, o, c.Part.Index)
			}
			owner[t] = c.Part.Index
		}
		out.Cells = append(out.Cells, c.Cells...)
	}
	if len(owner) != total {
		t := 0
		for ; ; t++ {
			if _, in := owner[t]; !in {
				break
			}
		}
		return nil, fmt.Errorf("%w: initial cell %d is in no part (the parts were cut by different partitions)", ErrCover, t)
	}
	return out, nil
}

// partList writes [2] as "part 2" and [1, 2, 5] as "parts 1, 2 and 5".
func partList(v []int) string {
	s := "part "
	if len(v) > 1 {
		s = "parts "
	}
	for i, x := range v {
		switch {
		case i == 0:
		case i == len(v)-1:
			s += " and "
		default:
			s += ", "
		}
		s += fmt.Sprint(x)
	}
	return s
}
