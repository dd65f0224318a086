package net

import (
	"context"
	"math"
	"time"

	"github.com/segre-lab/segre/internal/accurate"
	"github.com/segre-lab/segre/rankone"
	"github.com/segre-lab/segre/subspace"
)

// BranchBound proves the global optimum to a requested gap by
// branch-and-bound over cells of the smaller side's sphere: boxes on the
// faces of the cube, seen radially.
//
// Cell bound (derived here). Let ĉ be the unit direction of a cell's centre,
// r ≥ ‖x − ĉ‖ for every unit x in the cell (the half-diagonal of the box:
// see the package doc), f̄ ≥ λmax(H(ĉ)) = max_y ĉᵀG(y)ĉ proven, and Λ ≥ h*
// any proven bound (h* = max_y λmax(G(y)), so λmax(G(y)) ≤ Λ for every y).
// For unit x in the cell, d = x − ĉ, ρ = ‖d‖ ≤ r, and G = G(y) ⪰ 0 with
// q = ĉᵀGĉ ∈ [0, f̄]:
// xᵀGx = q + 2dᵀGĉ + dᵀGd. Write d = d⊥ + (dᵀĉ)ĉ; since x and ĉ are unit,
// dᵀĉ = −ρ²/2, so 2dᵀGĉ = 2d⊥ᵀP⊥Gĉ − ρ²q, and for PSD G,
// ‖P⊥Gĉ‖² = ‖Gĉ‖² − q² ≤ λmax(G)q − q² ≤ q(Λ − q); also dᵀGd ≤ Λρ². Hence
//
//	xᵀGx ≤ q + 2ρ√(q(Λ − q)) + ρ²(Λ − q) = (√q + ρ√(Λ − q))².
//
// With q = Λcos²θ this is Λ(cosθ + ρ sinθ)², increasing in q up to
// q = Λ/(1+ρ²) where it reaches Λ(1+ρ²), and increasing in ρ. So the
// maximum of h over the cell is at most (√f̄ + r√(Λ − f̄))² if
// f̄ ≤ Λ/(1+r²), at most Λ(1+r²) otherwise, and at most Λ always. Near a
// nondegenerate maximiser f̄ ≈ Λ and the first-order term vanishes, so cells
// need only shrink like √gap, not like gap.
//
// The search keeps the cells in a max-heap (container/heap) keyed by their
// bound, splits the best cells (every face coordinate bisected), prunes cells
// whose bound cannot beat the incumbent by more than the requested gap, and
// polishes promising centres with a local method to raise the incumbent.
// The certified global bound is the largest bound over live and pruned
// cells; cell bounds computed with an older Λ remain valid. Cells are
// processed in fixed batches whose results are merged in order, so the
// result does not depend on Workers. Within a batch the workers claim runs
// of consecutive cells and evaluate each with their own reusable buffers
// (nothing is allocated per cell but its children's warm start), and they
// stay alive from batch to batch (see cellPool): with two workers a search
// runs about 1.9 times as fast as with one (BenchmarkWorkers).
//
// The zero value is ready to use.
type BranchBound struct {
	// Gap is the requested relative gap on h*: the search stops when
	// hUpper − hLower ≤ Gap·hUpper. Zero means 1e-6.
	Gap float64
	// AbsGap, if positive, also stops the search when Upper − Lower ≤ AbsGap
	// on d*. Zero means no absolute criterion.
	AbsGap float64
	// MaxNodes bounds the cells evaluated; zero means 5e7.
	MaxNodes int
	// MaxFrontier bounds the cells kept waiting (memory); zero means 1<<21.
	// It is further capped so that the frontier stays within half the
	// subspace's MemoryLimit.
	MaxFrontier int
	// Workers is the number of goroutines; zero means GOMAXPROCS.
	Workers int
	// Local polishes promising cell centres; nil means &rankone.TrustRegion{}.
	Local rankone.Local
	// Progress, if set, is called at most every 200 ms with nodes processed,
	// frontier size and the current bounds.
	Progress func(rankone.Progress)
	// Record, if non-nil, receives the cover of the run (see Cover) when the
	// search ends without cancellation (gap reached or a limit); after a
	// cancelled search it is left empty (Cells nil). CheckCover re-checks
	// it. Every leaf is kept (about 80 + 16(D−1) bytes each, its box shared
	// with the search), so the record grows with the cells evaluated: it is
	// bounded by MaxNodes, not by MaxFrontier or the subspace's MemoryLimit.
	// A sharded run's record is a part (Cover.Part; CheckPart checks it).
	Record *Cover
	// Shard, if Count > 0, runs only part Index of Count of a deterministic
	// partition of the initial cells (see Shard for the partition and why a
	// part's bound is proven without the others). With Count ≥ 2 the Result
	// proves no Lower (0): the part's own level is checked by CheckPart and
	// the parts are joined by JoinParts. Zero means the whole sphere.
	Shard Shard
	// Budget, if positive, ends the search after the first batch that
	// finishes once Budget has elapsed, as a limit (status LimitReached,
	// rankone.TimeLimit) rather than a cancellation, so that Record keeps
	// its cover. Zero means no budget beyond the context.
	Budget time.Duration
}

var _ rankone.Searcher = (*BranchBound)(nil)

// Name returns "branch-and-bound".
func (b *BranchBound) Name() string { return "branch-and-bound" }

// cellBound returns the bound on max h over a cell (see BranchBound):
// ψ = (√f̄ + r√(Λ − f̄))² when f̄ ≤ Λ/(1+r²), else Λ(1 + r²) (which can
// exceed Λ: such a key proves nothing new, and the global bound keeps the
// smaller Λ).
func cellBound(fbar, r, lam float64) float64 {
	if fbar > lam {
		fbar = lam
	}
	if fbar < 0 {
		fbar = 0
	}
	rr := accurate.MulUp(r, r)
	// A lower estimate of Λ/(1+r²); below it ψ is increasing in q.
	qStar := lam / (1 + float64(r*r)) * (1 - 1e-12)
	b := accurate.MulUp(lam, accurate.AddUp(1, rr))
	if fbar <= qStar {
		t := accurate.AddUp(accurate.SqrtUp(fbar), accurate.MulUp(r, accurate.SqrtUp(accurate.Up(lam-fbar))))
		b = math.Min(b, accurate.MulUp(t, t))
	}
	return b
}

type cell struct {
	face   int
	lo, hi []float64 // box in the d−1 free face coordinates
	fbar   float64   // proven upper bound of λmax at the centre direction
	est    float64
	guess  float64 // the estimate of λmax(H(c)) at the unnormalised centre c that proved fbar
	r      float64
	key    float64
	vec    []float32 // best exact-side vector at the centre: the children's warm start
	lam    float64   // the Λ its key was computed with
}

type cellHeap []*cell

func (h cellHeap) Len() int { return len(h) }
func (h cellHeap) Less(i, j int) bool {
	if h[i].key != h[j].key {
		return h[i].key > h[j].key
	}
	return h[i].est > h[j].est
}
func (h cellHeap) Swap(i, j int) { h[i], h[j] = h[j], h[i] }
func (h *cellHeap) Push(x any)   { *h = append(*h, x.(*cell)) }
func (h *cellHeap) Pop() any {
	old := *h
	c := old[len(old)-1]
	*h = old[:len(old)-1]
	return c
}

// centre writes the face point of a cell's centre into c (length d).
func (cl *cell) centre(c []float64, d int) {
	k := 0
	for j := 0; j < d; j++ {
		if j == cl.face {
			c[j] = 1
			continue
		}
		c[j] = (cl.lo[k] + cl.hi[k]) / 2 // dyadic: exact
		k++
	}
}

// radius returns an upper bound on the half-diagonal of the box.
func (cl *cell) radius() float64 {
	var s float64
	for k := range cl.lo {
		h := (cl.hi[k] - cl.lo[k]) / 2 // exact
		s += float64(h * h)
	}
	return accurate.SqrtUp(accurate.UpperRel(s, len(cl.lo)+1))
}

// children bisects every coordinate of the box. Each child's box is one
// allocation (lo and hi capped halves of it), shared with the recorded
// cover and never modified.
func (cl *cell) children() []*cell {
	k := len(cl.lo)
	out := make([]*cell, 0, 1<<k)
	for mask := 0; mask < 1<<k; mask++ {
		box := make([]float64, 2*k)
		c := &cell{face: cl.face, lo: box[:k:k], hi: box[k:], vec: cl.vec}
		for j := 0; j < k; j++ {
			mid := (cl.lo[j] + cl.hi[j]) / 2
			if mask&(1<<j) == 0 {
				c.lo[j], c.hi[j] = cl.lo[j], mid
			} else {
				c.lo[j], c.hi[j] = mid, cl.hi[j]
			}
		}
		out = append(out, c)
	}
	return out
}

// Search implements rankone.Searcher. The loop is plain: set up the run
// (settings, incumbent, Λ, first batch), then step (evaluate, merge and
// re-bound a batch) and test for stop until either ends the search.
func (b *BranchBound) Search(ctx context.Context, w *subspace.Subspace) (rankone.Result, error) {
	r := &bbRun{b: b, w: w, record: b.Record != nil}
	defer r.close()
	if b.Record != nil {
		*b.Record = Cover{}
	}
	if err := r.setup(ctx); err != nil {
		return r.res, err
	}
	for r.step(ctx) {
		if r.stop(ctx) {
			break
		}
	}
	res, err := r.result(ctx)
	if b.Record != nil && err == nil && res.Status != rankone.Cancelled {
		*b.Record = r.cover()
	}
	return res, err
}

// topBound is the largest key over the frontier and the pruned cells: a
// valid bound on h* (each key bounds its cell; the cells cover the sphere).
func topBound(front cellHeap, maxPruned float64) float64 {
	if len(front) > 0 {
		return math.Max(maxPruned, front[0].key)
	}
	return maxPruned
}

// done reports whether the requested gap is reached.
func done(hUp, hLow, gap, upper, absGap float64) bool {
	if hUp-hLow <= gap*hUp {
		return true
	}
	return absGap > 0 && upper-rankone.DistanceLower(hUp) <= absGap
}
