package net

import (
	"container/heap"
	"context"
	"fmt"
	"math"
	"runtime"
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
// result does not depend on Workers.
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
}

var _ rankone.Searcher = (*BranchBound)(nil)

// Name returns "branch-and-bound".
func (b *BranchBound) Name() string { return "branch-and-bound" }

// cellBound returns the bound on max h over a cell (see BranchBound):
// ψ = (√f̄ + r√(Λ − f̄))² when f̄ ≤ Λ/(1+r²), else Λ(1 + r²), and never
// more than Λ.
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

// children bisects every coordinate of the box.
func (cl *cell) children() []*cell {
	k := len(cl.lo)
	out := make([]*cell, 0, 1<<k)
	for mask := 0; mask < 1<<k; mask++ {
		c := &cell{face: cl.face, lo: make([]float64, k), hi: make([]float64, k), vec: cl.vec}
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

// Search implements rankone.Searcher.
func (b *BranchBound) Search(ctx context.Context, w *subspace.Subspace) (rankone.Result, error) {
	if err := rankone.CheckSettings("BranchBound", []rankone.Setting{{Name: "Gap", Value: b.Gap}, {Name: "AbsGap", Value: b.AbsGap},
		{Name: "MaxNodes", Value: float64(b.MaxNodes)}, {Name: "MaxFrontier", Value: float64(b.MaxFrontier)}, {Name: "Workers", Value: float64(b.Workers)}}...); err != nil {
		return rankone.TrivialResult(w, b.Name()), err
	}
	begin := time.Now()
	gap := b.Gap
	if gap == 0 {
		gap = 1e-6
	}
	if !(gap > 0 && gap < 1) {
		return rankone.TrivialResult(w, b.Name()), fmt.Errorf("%w: BranchBound.Gap = %v, want 0 < Gap < 1", rankone.ErrOption, gap)
	}
	maxNodes := b.MaxNodes
	if maxNodes <= 0 {
		maxNodes = 5e7
	}
	maxFront := b.MaxFrontier
	if maxFront <= 0 {
		maxFront = 1 << 21
	}
	// The frontier may use at most half the subspace's memory limit: a cell
	// holds its box (2(d−1) floats), a float32 warm start of the exact side
	// (p entries) and about 160 bytes of fields, slice headers and heap slot.
	{
		d, p := min(w.Rows(), w.Cols()), max(w.Rows(), w.Cols())
		cellBytes := int64(160 + 16*(d-1) + 4*p)
		maxFront = int(min(int64(maxFront), w.MemoryLimit()/2/cellBytes))
	}
	workers := b.Workers
	if workers <= 0 {
		workers = runtime.GOMAXPROCS(0)
	}
	l := b.Local
	if l == nil {
		l = &rankone.TrustRegion{}
	}
	gate := rankone.NewThrottle(b.Progress)
	sd := newSide(w)
	d := sd.d
	res := rankone.Result{FoundBy: b.Name(), Starts: 1}

	// Incumbent from the local method's default start; Λ from the flattening.
	inc, err := (&rankone.MultiStart{Method: l, Starts: 4, Workers: 1}).Search(ctx, w)
	if err != nil {
		return inc, err
	}
	res.X, res.Y, res.Upper, res.Value = inc.X, inc.Y, inc.Upper, inc.Value
	res.Evaluations += inc.Evaluations
	hLow := rankone.ValueLower(res.Upper)
	lam, _ := rankone.FlatteningBound(ctx, w)
	lam = math.Min(lam, 1)
	bestEst := res.Value

	// Evaluate cells, in parallel, into their own slots. Once ctx is done
	// the remaining cells are skipped and the caller abandons the batch:
	// the bound lam is valid without it (it bounds h over the parents, which
	// were popped with keys counted in lam), so a deadline waits for at
	// most one cell per worker.
	sides := make([]side, workers)
	cbuf := make([][]float64, workers)
	for k := range sides {
		sides[k] = side{w: w, onX: sd.onX, d: d, p: sd.p, form: sd.form}
		cbuf[k] = make([]float64, d)
	}
	eval := func(cells []*cell, vecs [][]float64) {
		rankone.ParallelFor(ctx, len(cells), workers, func(k, i int) {
			s, c := &sides[k], cbuf[k]
			cl := cells[i]
			cl.centre(c, d)
			v := make([]float64, sd.p)
			for j, a := range cl.vec {
				v[j] = float64(a)
			}
			cl.est, cl.fbar = s.value(c, v)
			cl.vec = make([]float32, sd.p)
			for j, a := range v {
				cl.vec[j] = float32(a)
			}
			cl.r = cl.radius()
			vecs[i] = v
		})
	}

	var front cellHeap
	sinceFull := 0 // cells evaluated since the last full re-bounding pass
	nodes := 0
	maxPruned := 0.0
	// A cell whose key is at most thresh cannot beat the incumbent by the
	// requested gap: it is pruned, and its key joins maxPruned (the bound
	// keeps counting it). rekey bounds a cell with the current Λ.
	var thresh float64
	pruned := func(c *cell) bool {
		if c.key > thresh {
			return false
		}
		maxPruned = math.Max(maxPruned, c.key)
		return true
	}
	rekey := func(c *cell) { c.key, c.lam = cellBound(c.fbar, c.r, lam), lam }
	status := rankone.LimitReached
	limit := rankone.NoLimit // which budget stopped a search that did not reach its gap
	if d == 1 {
		// S^0 is the point ±1: s(1)² is the exact answer, no cells needed.
		c := &cell{face: 0}
		vecs := make([][]float64, 1)
		eval([]*cell{c}, vecs)
		if ctx.Err() != nil {
			// The cell may be unevaluated: keep the flattening's lam.
			status = rankone.Cancelled
		} else {
			nodes = 1
			lam = math.Min(lam, c.fbar)
			x, y := sd.witness([]float64{1}, vecs[0])
			if u, err := rankone.Verify(w, x, y); err == nil && u < res.Upper {
				res.X, res.Y, res.Upper = x, y, u
			}
			status = rankone.GapReached
		}
	} else {
		// Initial cells: each face split into 4 per coordinate (2 when that
		// would not fit); refuse sizes whose first split cannot fit.
		per := int64(1) << (d - 1)
		if d > 20 || int64(d)*per > int64(maxFront) {
			return res, fmt.Errorf("%w: min(m, n) = %d needs %d cells per split, frontier limit %d", ErrTooLarge, d, int64(d)*per, maxFront)
		}
		deep := int64(d)*per*per <= int64(maxFront)/4
		var init []*cell
		for f := 0; f < d; f++ {
			root := &cell{face: f, lo: make([]float64, d-1), hi: make([]float64, d-1)}
			for j := range root.lo {
				root.lo[j], root.hi[j] = -1, 1
			}
			for _, c := range root.children() {
				if deep {
					init = append(init, c.children()...)
				} else {
					init = append(init, c)
				}
			}
		}
		const batch = 16
		pending := init
		for {
			vecs := make([][]float64, len(pending))
			eval(pending, vecs)
			if ctx.Err() != nil {
				status = rankone.Cancelled
				break
			}
			nodes += len(pending)
			// Candidates in order: raise the incumbent.
			bi := -1
			for i, c := range pending {
				rekey(c)
				if c.est > bestEst*(1+1e-12) && (bi < 0 || c.est > pending[bi].est) {
					bi = i
				}
			}
			if bi >= 0 {
				bestEst = pending[bi].est
				cpt := make([]float64, d)
				pending[bi].centre(cpt, d)
				x, y := sd.witness(cpt, vecs[bi])
				px, py, u, st := rankone.Polish(ctx, w, l, x, y)
				res.Evaluations += st.Evaluations
				res.Iterations += st.Iterations
				if u < res.Upper {
					res.X, res.Y, res.Upper, res.Value = px, py, u, st.Value
					hLow = rankone.ValueLower(u)
					bestEst = math.Max(bestEst, st.Value)
				}
			}
			thresh = hLow / (1 - gap)
			for _, c := range pending {
				if !pruned(c) {
					heap.Push(&front, c)
				}
			}
			// Global bound: the largest key over live and pruned cells. Every
			// key bounds h on its cell; one computed with an older (larger) Λ
			// is valid but loose. Each batch re-bounds at most 64 stale cells
			// at the top with the current Λ and lowers Λ to the top key. Every
			// time the cells evaluated since the last full pass reach the
			// frontier's size N, a full pass re-bounds every cell, iterating
			// Λ ↦ max(pruned, max_c bound(c, Λ)) up to three times (each value
			// valid, so the iteration may stop anywhere), then heapifies once:
			// O(N) work per N evaluations. The schedule counts cells, not time,
			// so the result does not depend on the machine. (Re-bounding
			// every stale cell after each change of Λ, as a plain lazy heap
			// would, costs O(N log N) per batch once N is large and the keys
			// are close: seen to stall a search for seconds.)
			for k := 0; k < 64 && len(front) > 0 && front[0].lam > lam; k++ {
				c := heap.Pop(&front).(*cell)
				if rekey(c); !pruned(c) {
					heap.Push(&front, c)
				}
			}
			lam = math.Min(lam, topBound(front, maxPruned))
			sinceFull += len(pending)
			if sinceFull >= len(front) {
				sinceFull = 0
				for pass := 0; pass < 3 && ctx.Err() == nil; pass++ {
					t := maxPruned
					for _, c := range front {
						t = math.Max(t, cellBound(c.fbar, c.r, lam))
					}
					settled := t >= lam*(1-1e-12)
					lam = math.Min(lam, t)
					if settled {
						break
					}
				}
				keep := front[:0]
				for _, c := range front {
					if rekey(c); !pruned(c) {
						keep = append(keep, c)
					}
				}
				clear(front[len(keep):])
				front = keep
				heap.Init(&front)
				lam = math.Min(lam, topBound(front, maxPruned))
			}
			gate.Report(rankone.Progress{Searcher: b.Name(), Nodes: nodes, Frontier: len(front),
				Upper: res.Upper, Lower: rankone.DistanceLower(lam)})
			if done(lam, hLow, gap, res.Upper, b.AbsGap) {
				status = rankone.GapReached
				break
			}
			if ctx.Err() != nil {
				status = rankone.Cancelled
				break
			}
			if nodes >= maxNodes {
				limit = rankone.NodeLimit
				break
			}
			if len(front) >= maxFront {
				limit = rankone.FrontierLimit
				break
			}
			// Next batch: pop the best cells; re-bound with the current Λ.
			pending = pending[:0:0]
			// A batch holds at most 16 splits and about 4096 cells, so that a
			// deadline is noticed promptly even for large d.
			putBack := 0
			for len(pending) < min(batch*(1<<(d-1)), max(1<<(d-1), 4096)) && len(front) > 0 {
				c := heap.Pop(&front).(*cell)
				if c.lam > lam {
					// Stale key: re-bound with the current Λ; if the cell is
					// no longer the best, put it back (lazy best-first, at
					// most 64 times a batch: see the global bound above).
					if rekey(c); pruned(c) {
						continue
					}
					if putBack < 64 && len(front) > 0 && c.key < front[0].key {
						putBack++
						heap.Push(&front, c)
						continue
					}
				}
				if pruned(c) {
					continue
				}
				pending = append(pending, c.children()...)
			}
			if len(pending) == 0 {
				lam = math.Min(lam, math.Max(maxPruned, hLow))
				status = rankone.GapReached
				break
			}
		}
	}
	res.Status = status
	if status == rankone.LimitReached {
		res.Limit = limit
	}
	res.Evaluations += nodes
	if lo := rankone.DistanceLower(lam); lo > 0 {
		res.Lower = lo
		res.LowerBy = fmt.Sprintf("branch-and-bound (%d cells)", nodes)
	}
	res.Elapsed = time.Since(begin)
	if err := ctx.Err(); err != nil {
		res.Status = rankone.Cancelled
		return res, err
	}
	return res, nil
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
