package net

import (
	"container/heap"
	"context"
	"fmt"
	"math"
	"runtime"
	"time"

	"github.com/segre-lab/segre/rankone"
	"github.com/segre-lab/segre/subspace"
)

// bbRun is the state of one BranchBound search: the resolved settings, the
// incumbent, Λ (lam, a proven bound on h*), the frontier and the counters.
// Search drives it: setup, then step and stop until one of them ends it,
// then result. The context is passed to each method, never stored.
type bbRun struct {
	b     *BranchBound
	w     *subspace.Subspace
	begin time.Time

	// Settings with the zero values resolved (see BranchBound).
	gap      float64
	maxNodes int
	maxFront int
	workers  int
	local    rankone.Local
	gate     *rankone.Throttle

	sd    side
	d     int
	sides []side      // one per worker (shard.go evaluates with sides[0])
	work  []*cellWork // one per worker: its side and buffers (see evaluate)
	pool  *cellPool   // the workers (nil until the first batch; close ends it)
	vbuf  []float64   // the batch's exact-side vectors, p per cell (reused)
	vecs  [][]float64 // vecs[i] = cell i's slice of vbuf

	res     rankone.Result // the incumbent, counts so far
	hLow    float64        // proven lower bound on h* from the incumbent
	bestEst float64        // the best estimate already polished
	lam     float64        // Λ: a proven upper bound on h*

	front     cellHeap
	pending   []*cell // the batch to evaluate next; nil once merged
	nodes     int     // cells evaluated
	sinceFull int     // cells evaluated since the last full re-bounding pass
	// A cell whose key is at most thresh cannot beat the incumbent by the
	// requested gap: it is pruned, and its key joins maxPruned (the bound
	// keeps counting it).
	thresh    float64
	maxPruned float64

	status rankone.Status
	limit  rankone.Limit // which budget stopped a search that did not reach its gap

	// With BranchBound.Record set, leaves collects every pruned cell (each
	// is a leaf: pruned cells are never split) and, for d = 1, the single
	// point cell; cover adds the frontier at the end.
	record bool
	leaves []CoverCell
	part   Part // a sharded run's part (BranchBound.Shard; see selectPart)
}

// batch is the number of splits a batch holds at most (see choose).
const batch = 16

// setup resolves the settings, finds the incumbent and Λ, and lays out the
// first batch. If it fails, r.res is the result to return with the error.
func (r *bbRun) setup(ctx context.Context) error {
	if err := r.settings(); err != nil {
		r.res = rankone.TrivialResult(r.w, r.b.Name())
		return err
	}
	r.gate = rankone.NewThrottle(r.b.Progress)
	r.sd = newSide(r.w)
	r.d = r.sd.d
	r.res = rankone.Result{FoundBy: r.b.Name(), Starts: 1}
	if err := r.incumbent(ctx); err != nil {
		return err
	}
	r.sides = make([]side, r.workers)
	r.work = make([]*cellWork, r.workers)
	for k := range r.sides {
		r.sides[k] = r.sd // a copy: its own evaluation count
		r.work[k] = newCellWork(r.sd)
	}
	r.status = rankone.LimitReached
	r.limit = rankone.NoLimit
	if r.d == 1 {
		r.pending = []*cell{{face: 0}}
		if r.sharded() {
			// One initial cell, the point: part 0 has it, the others none.
			r.part = Part{Index: r.b.Shard.Index, Count: r.b.Shard.Count}
			if r.b.Shard.Index == 0 {
				r.part.Roots = []int{0}
			} else {
				r.pending = nil
			}
		}
		return nil
	}
	return r.initial(ctx)
}

// settings checks BranchBound's fields and resolves their zero values.
func (r *bbRun) settings() error {
	b, w := r.b, r.w
	if err := rankone.CheckSettings("BranchBound", []rankone.Setting{{Name: "Gap", Value: b.Gap}, {Name: "AbsGap", Value: b.AbsGap},
		{Name: "MaxNodes", Value: float64(b.MaxNodes)}, {Name: "MaxFrontier", Value: float64(b.MaxFrontier)}, {Name: "Workers", Value: float64(b.Workers)},
		{Name: "Budget", Value: b.Budget.Seconds()}}...); err != nil {
		return err
	}
	if err := checkShard(b.Shard); err != nil {
		return fmt.Errorf("%w: %v", rankone.ErrOption, err)
	}
	r.begin = time.Now()
	r.gap = b.Gap
	if r.gap == 0 {
		r.gap = 1e-6
	}
	if !(r.gap > 0 && r.gap < 1) {
		return fmt.Errorf("%w: BranchBound.Gap = %v, want 0 < Gap < 1", rankone.ErrOption, r.gap)
	}
	r.maxNodes = b.MaxNodes
	if r.maxNodes <= 0 {
		r.maxNodes = 5e7
	}
	r.maxFront = b.MaxFrontier
	if r.maxFront <= 0 {
		r.maxFront = 1 << 21
	}
	// The frontier may use at most half the subspace's memory limit: a cell
	// holds its box (2(d−1) floats), a float32 warm start of the exact side
	// (p entries) and about 160 bytes of fields, slice headers and heap slot.
	d, p := min(w.Rows(), w.Cols()), max(w.Rows(), w.Cols())
	cellBytes := int64(160 + 16*(d-1) + 4*p)
	r.maxFront = int(min(int64(r.maxFront), w.MemoryLimit()/2/cellBytes))
	r.workers = b.Workers
	if r.workers <= 0 {
		r.workers = runtime.GOMAXPROCS(0)
	}
	r.local = b.Local
	if r.local == nil {
		r.local = &rankone.TrustRegion{}
	}
	return nil
}

// incumbent takes the incumbent from the local method's default start and Λ
// from the flattening (h* ≤ 1 always). If the local method fails, r.res is
// its result.
func (r *bbRun) incumbent(ctx context.Context) error {
	inc, err := (&rankone.MultiStart{Method: r.local, Starts: 4, Workers: 1}).Search(ctx, r.w)
	if err != nil {
		r.res = inc
		return err
	}
	r.res.X, r.res.Y, r.res.Upper, r.res.Value = inc.X, inc.Y, inc.Upper, inc.Value
	r.res.Evaluations += inc.Evaluations
	r.hLow = rankone.ValueLower(r.res.Upper)
	r.lam, _ = rankone.FlatteningBound(ctx, r.w)
	r.lam = math.Min(r.lam, 1)
	r.bestEst = r.res.Value
	return nil
}

// initial lays out the first batch: each face split into 4 per coordinate
// (2 when that would not fit). It refuses sizes whose first split cannot
// fit the frontier.
func (r *bbRun) initial(ctx context.Context) error {
	d := r.d
	per := int64(1) << (d - 1)
	if d > 20 || int64(d)*per > int64(r.maxFront) {
		return fmt.Errorf("%w: min(m, n) = %d needs %d cells per split, frontier limit %d", ErrTooLarge, d, int64(d)*per, r.maxFront)
	}
	deep := int64(d)*per*per <= int64(r.maxFront)/4
	if r.sharded() {
		deep = shardLevel(d) == 2 // every part lays out the same cells
	}
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
	if r.sharded() {
		init = r.selectPart(ctx, init)
	}
	r.pending = init
	return nil
}

// evaluate bounds the cells, in parallel, each into its own slot: the
// centre's estimate and proven f̄, the warm start for its children, the
// radius; vecs[i] is cell i's best exact-side vector (valid until the next
// batch: the slices share one buffer, reused). Each worker evaluates with
// its own cellWork (side, centre, matrix and Lanczos buffers), so a cell
// allocates only its children's float32 warm start. Once ctx is done the
// remaining cells are skipped and the caller abandons the batch: the bound
// lam is valid without it (it bounds h over the parents, which were popped
// with keys counted in lam), so a deadline waits for at most one cell per
// worker.
func (r *bbRun) evaluate(ctx context.Context, cells []*cell) (vecs [][]float64) {
	d, p := r.d, r.sd.p
	n := len(cells)
	if cap(r.vbuf) < n*p {
		r.vbuf = make([]float64, n*p)
	}
	r.vbuf = r.vbuf[:n*p]
	r.vecs = r.vecs[:0]
	for i := 0; i < n; i++ {
		r.vecs = append(r.vecs, r.vbuf[i*p:(i+1)*p:(i+1)*p])
	}
	vecs = r.vecs
	if r.pool == nil {
		r.pool = newCellPool(r.work)
	}
	r.pool.run(ctx, n, func(ws *cellWork, i int) {
		cl := cells[i]
		c := ws.c
		cl.centre(c, d)
		v := vecs[i]
		for j := range v {
			v[j] = 0
		}
		for j, a := range cl.vec {
			v[j] = float64(a)
		}
		cl.est, cl.fbar, cl.guess = ws.value(c, v)
		w := make([]float32, p)
		for j, a := range v {
			w[j] = float32(a)
		}
		cl.vec = w
		cl.r = cl.radius()
	})
	return vecs
}

// step evaluates and merges one batch of cells, then re-bounds the
// frontier; the first step takes the batch laid out by setup, later ones
// choose theirs. It returns false when the step itself ends the search:
// the context is done, no cell is left to split, or the sphere is the
// single point S^0.
func (r *bbRun) step(ctx context.Context) bool {
	if r.d == 1 {
		if len(r.pending) > 0 {
			r.point(ctx)
		} else {
			r.status = rankone.GapReached // a part without the point: nothing to do
		}
		return false
	}
	if r.pending == nil && !r.choose() {
		return false
	}
	vecs := r.evaluate(ctx, r.pending)
	if ctx.Err() != nil {
		r.status = rankone.Cancelled
		return false
	}
	r.merge(ctx, vecs)
	r.rebound(ctx)
	r.pending = nil
	lower := rankone.DistanceLower(r.lam)
	if r.partial() {
		lower = 0 // a part's Λ is not a bound on h* (see Shard)
	}
	r.gate.Report(rankone.Progress{Searcher: r.b.Name(), Nodes: r.nodes, Frontier: len(r.front),
		Upper: r.res.Upper, Lower: lower})
	return true
}

// point settles d = 1: S^0 is the point ±1, and s(1)² is the exact answer,
// no cells needed.
func (r *bbRun) point(ctx context.Context) {
	c := r.pending[0]
	vecs := r.evaluate(ctx, r.pending)
	if ctx.Err() != nil {
		// The cell may be unevaluated: keep the flattening's lam.
		r.status = rankone.Cancelled
		return
	}
	r.nodes = 1
	r.lam = math.Min(r.lam, c.fbar)
	r.keep(c)
	x, y := r.sd.witness([]float64{1}, vecs[0])
	if u, err := rankone.Verify(r.w, x, y); err == nil && u < r.res.Upper {
		r.res.X, r.res.Y, r.res.Upper = x, y, u
	}
	r.status = rankone.GapReached
}

// merge takes an evaluated batch in order: bounds every cell with the
// current Λ, polishes the best new estimate, then prunes or pushes the
// cells against the (possibly raised) incumbent.
func (r *bbRun) merge(ctx context.Context, vecs [][]float64) {
	r.nodes += len(r.pending)
	// Candidates in order: raise the incumbent.
	bi := -1
	for i, c := range r.pending {
		r.rekey(c)
		if c.est > r.bestEst*(1+1e-12) && (bi < 0 || c.est > r.pending[bi].est) {
			bi = i
		}
	}
	if bi >= 0 {
		r.polish(ctx, r.pending[bi], vecs[bi])
	}
	r.thresh = r.hLow / (1 - r.gap)
	for _, c := range r.pending {
		if !r.pruned(c) {
			heap.Push(&r.front, c)
		}
	}
}

// polish runs the local method from the centre of cell c (exact-side vector
// vec) and takes its point as the incumbent if its certified distance is
// smaller.
func (r *bbRun) polish(ctx context.Context, c *cell, vec []float64) {
	r.bestEst = c.est
	cpt := make([]float64, r.d)
	c.centre(cpt, r.d)
	x, y := r.sd.witness(cpt, vec)
	px, py, u, st := rankone.Polish(ctx, r.w, r.local, x, y)
	r.res.Evaluations += st.Evaluations
	r.res.Iterations += st.Iterations
	if u < r.res.Upper {
		r.res.X, r.res.Y, r.res.Upper, r.res.Value = px, py, u, st.Value
		r.hLow = rankone.ValueLower(u)
		r.bestEst = math.Max(r.bestEst, st.Value)
	}
}

// rekey bounds a cell with the current Λ.
func (r *bbRun) rekey(c *cell) { c.key, c.lam = cellBound(c.fbar, c.r, r.lam), r.lam }

// pruned reports whether c's key is at most thresh, and if so counts the
// key in maxPruned.
func (r *bbRun) pruned(c *cell) bool {
	if c.key > r.thresh {
		return false
	}
	r.maxPruned = math.Max(r.maxPruned, c.key)
	r.keep(c)
	return true
}

// keep records the leaf c when the run records its cover. The box is
// shared, not copied: a cell's box is never modified once made.
func (r *bbRun) keep(c *cell) {
	if r.record {
		r.leaves = append(r.leaves, CoverCell{Face: c.face, Lo: c.lo, Hi: c.hi, Guess: c.guess})
	}
}

// cover returns the cover of a finished run: the recorded leaves, then the
// frontier in heap order. Call it only after a search that was not
// cancelled (a cancelled batch leaves the children of popped cells out).
func (r *bbRun) cover() Cover {
	for _, c := range r.front {
		r.keep(c)
	}
	cells := r.leaves
	r.leaves = nil
	return Cover{D: r.d, OnX: r.sd.onX, Cells: cells, Part: r.part}
}

// rebound lowers Λ after a merged batch.
//
// Global bound: the largest key over live and pruned cells. Every key
// bounds h on its cell; one computed with an older (larger) Λ is valid but
// loose. Each batch re-bounds at most 64 stale cells at the top with the
// current Λ and lowers Λ to the top key. Every time the cells evaluated
// since the last full pass reach the frontier's size N, a full pass
// (fullPass) re-bounds every cell: O(N) work per N evaluations. The
// schedule counts cells, not time, so the result does not depend on the
// machine. (Re-bounding every stale cell after each change of Λ, as a plain
// lazy heap would, costs O(N log N) per batch once N is large and the keys
// are close: seen to stall a search for seconds.)
func (r *bbRun) rebound(ctx context.Context) {
	for k := 0; k < 64 && len(r.front) > 0 && r.front[0].lam > r.lam; k++ {
		c := heap.Pop(&r.front).(*cell)
		if r.rekey(c); !r.pruned(c) {
			heap.Push(&r.front, c)
		}
	}
	r.lam = math.Min(r.lam, topBound(r.front, r.maxPruned))
	r.sinceFull += len(r.pending)
	if r.sinceFull >= len(r.front) {
		r.sinceFull = 0
		r.fullPass(ctx)
	}
}

// fullPass iterates Λ ↦ max(pruned, max_c bound(c, Λ)) over the frontier
// up to three times (each value is valid, so the iteration may stop
// anywhere), then re-keys every cell with the final Λ, prunes, and
// heapifies once.
func (r *bbRun) fullPass(ctx context.Context) {
	for pass := 0; pass < 3 && ctx.Err() == nil; pass++ {
		t := r.maxPruned
		for _, c := range r.front {
			t = math.Max(t, cellBound(c.fbar, c.r, r.lam))
		}
		settled := t >= r.lam*(1-1e-12)
		r.lam = math.Min(r.lam, t)
		if settled {
			break
		}
	}
	keep := r.front[:0]
	for _, c := range r.front {
		if r.rekey(c); !r.pruned(c) {
			keep = append(keep, c)
		}
	}
	clear(r.front[len(keep):])
	r.front = keep
	heap.Init(&r.front)
	r.lam = math.Min(r.lam, topBound(r.front, r.maxPruned))
}

// stop reports whether the search ends after a merged batch, and records
// why: the requested gap is reached, the context is done, or a budget
// (cells evaluated, cells waiting) is spent.
func (r *bbRun) stop(ctx context.Context) bool {
	switch {
	case done(r.lam, r.hLow, r.gap, r.res.Upper, r.b.AbsGap):
		r.status = rankone.GapReached
	case ctx.Err() != nil:
		r.status = rankone.Cancelled
	case r.nodes >= r.maxNodes:
		r.limit = rankone.NodeLimit
	case r.b.Budget > 0 && time.Since(r.begin) >= r.b.Budget:
		r.limit = rankone.TimeLimit
	case len(r.front) >= r.maxFront:
		r.limit = rankone.FrontierLimit
	default:
		return false
	}
	return true
}

// choose pops the best cells and queues their children as the next batch,
// re-bounding stale keys with the current Λ. A batch holds at most 16
// splits and about 4096 cells, so that a deadline is noticed promptly even
// for large d. If no cell is left to split, the bound is the largest pruned
// key (or the incumbent), the gap is reached, and choose returns false.
func (r *bbRun) choose() bool {
	split := 1 << (r.d - 1)
	putBack := 0
	for len(r.pending) < min(batch*split, max(split, 4096)) && len(r.front) > 0 {
		c := heap.Pop(&r.front).(*cell)
		if c.lam > r.lam {
			// Stale key: re-bound with the current Λ; if the cell is
			// no longer the best, put it back (lazy best-first, at
			// most 64 times a batch: see rebound).
			if r.rekey(c); r.pruned(c) {
				continue
			}
			if putBack < 64 && len(r.front) > 0 && c.key < r.front[0].key {
				putBack++
				heap.Push(&r.front, c)
				continue
			}
		}
		if r.pruned(c) {
			continue
		}
		r.pending = append(r.pending, c.children()...)
	}
	if len(r.pending) == 0 {
		r.lam = math.Min(r.lam, math.Max(r.maxPruned, r.hLow))
		r.status = rankone.GapReached
		return false
	}
	return true
}

// close ends the run's worker goroutines, if any were started.
func (r *bbRun) close() {
	if r.pool != nil {
		r.pool.close()
		r.pool = nil
	}
}

// result builds the Result: the incumbent, the status, the evaluations
// counted, and Lower from Λ when it proves anything. A done context
// overrides the status and is returned as the error.
func (r *bbRun) result(ctx context.Context) (rankone.Result, error) {
	res := r.res
	res.Status = r.status
	if r.status == rankone.LimitReached {
		res.Limit = r.limit
	}
	res.Evaluations += r.nodes
	if lo := rankone.DistanceLower(r.lam); lo > 0 && !r.partial() {
		res.Lower = lo
		res.LowerBy = fmt.Sprintf("branch-and-bound (%d cells)", r.nodes)
	}
	res.Elapsed = time.Since(r.begin)
	if err := ctx.Err(); err != nil {
		res.Status = rankone.Cancelled
		return res, err
	}
	return res, nil
}
