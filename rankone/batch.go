package rankone

import (
	"context"
	"fmt"
	"math"

	"github.com/segre-lab/segre/subspace"
)

// BatchLocal is a Local method that can refine many starts together, with
// the same outcome for each start as Refine from that start alone, bit for
// bit: stepping starts together is only a way to share the passes over the
// stored basis (subspace.SearchGBatch). MultiStart uses RefineBatch when
// its method has it; users' methods may implement it too.
type BatchLocal interface {
	Local
	// RefineBatch refines each start (xs[i], ys[i]) in place, as Refine
	// would, and returns the Stats of each. Start i's end point and Stats
	// must not depend on the other starts, their number or their order. On
	// a cancelled context it returns promptly with each start's best point
	// so far, status Cancelled and ctx.Err().
	RefineBatch(ctx context.Context, w *subspace.Subspace, xs, ys [][]float64) ([]Stats, error)
}

var _ BatchLocal = (*ALS)(nil)

// batchShare: one batch's operators may take 1/batchShare of the
// subspace's memory limit; larger batches are split (which changes nothing
// but the speed: starts do not depend on each other).
const batchShare = 8

// alsRun is one start of a batched ALS run.
type alsRun struct {
	x, y   []float64
	st     Stats
	sl     stall
	h      float64 // h at (x, y) after the last iteration
	ggy    float64 // the gradient norm in y of the current iteration
	active bool
}

// RefineBatch implements BatchLocal: every start runs the iteration of
// Refine, and the starts still running share each half-step's pass over
// the basis (one product for all, subspace.SearchHBatch and SearchGBatch).
// Each start's top eigenvectors are computed from its own operator only
// (see alsWork.top), so its iterates are those of Refine from it, bit for
// bit. A start's Stats.Value is the last top eigenvalue of G(y), which is
// h at the end point (to the eigensolver's accuracy); a start cancelled
// before its first iteration gets a fresh Value of the subspace.
// It panics if xs and ys differ in length or a vector has the wrong length.
func (a *ALS) RefineBatch(ctx context.Context, w *subspace.Subspace, xs, ys [][]float64) ([]Stats, error) {
	if len(xs) != len(ys) {
		panic(fmt.Sprintf("rankone: RefineBatch: %d x and %d y", len(xs), len(ys)))
	}
	for i := range xs {
		if len(xs[i]) != w.Rows() || len(ys[i]) != w.Cols() {
			panic(fmt.Sprintf("rankone: RefineBatch: start %d has lengths %d and %d, want %d and %d", i, len(xs[i]), len(ys[i]), w.Rows(), w.Cols()))
		}
	}
	if err := a.check(); err != nil {
		return make([]Stats, len(xs)), err
	}
	stats := make([]Stats, len(xs))
	fit := batchFit(w)
	if chunks := (len(xs) + fit - 1) / fit; chunks > 0 {
		fit = (len(xs) + chunks - 1) / chunks // even chunks, none larger
	}
	var err error
	for lo := 0; lo < len(xs); lo += fit {
		hi := min(len(xs), lo+fit)
		if e := a.refineChunk(ctx, w, xs[lo:hi], ys[lo:hi], stats[lo:hi]); e != nil {
			err = e
		}
	}
	return stats, err
}

// batchFit returns how many starts one batch may hold within
// 1/batchShare of w's memory limit (at least one).
//
// Besides, the points' operators (what grows with the batch) take at most
// half the stored basis's memory, or 1 MiB when that is more: the basis is
// what a run must hold, and searches that held as much again beside it
// had made their operators the largest allocation of a run after the
// basis (issue 16: certify's peak). For m×n factors that is min(m, n)/2
// points (32 at 64×64): fewer make each product read the basis for fewer
// points (16 at 64×64 k256 made ALS 1.8× slower, measured).
func batchFit(w *subspace.Subspace) int {
	per := 2 * w.BatchBytes(1) // the G and H operators
	fit := max(1, w.MemoryLimit()/batchShare/max(per, 1))
	s := int64(w.Stored().Count())
	budget := max(8*s*int64(w.Rows())*int64(w.Cols())/2, 1<<20)
	return int(max(1, min(fit, budget/max(1, w.PointBytes()))))
}

// refineChunk runs ALS from the starts (xs[i], ys[i]), all at once.
func (a *ALS) refineChunk(ctx context.Context, w *subspace.Subspace, xs, ys [][]float64, stats []Stats) error {
	maxIter := orDefault(a.MaxIter, 500)
	tol := orDefaultF(a.GradTol, 1e-12)
	gate := NewThrottle(a.Progress)
	runs := make([]alsRun, len(xs))
	for i := range runs {
		runs[i] = alsRun{x: xs[i], y: ys[i], st: Stats{Status: LimitReached}, sl: stall{patience: 20}, active: true}
	}
	m, n := w.Rows(), w.Cols()
	ws := &alsWork{gx: make([]float64, m), hy: make([]float64, n)}
	var live []int
	var lx, ly [][]float64
	var err error
	for it := 0; it < maxIter; it++ {
		live, lx, ly = live[:0], lx[:0], ly[:0]
		for i := range runs {
			if runs[i].active {
				live = append(live, i)
				lx, ly = append(lx, runs[i].x), append(ly, runs[i].y)
			}
		}
		if len(live) == 0 {
			break
		}
		if err = ctx.Err(); err != nil {
			for _, i := range live {
				r := &runs[i]
				r.st.Status = Cancelled
				if r.st.Iterations == 0 {
					r.st.Evaluations++
					r.h = w.Value(r.x, r.y)
				}
				r.active = false
			}
			break
		}
		// y ← top eigenvector of H(x), with the gradient in y before.
		w.SearchHBatch(&ws.ob, lx)
		for k, i := range live {
			r := &runs[i]
			r.st.Iterations = it + 1
			r.st.Evaluations++
			r.ggy, _ = ws.top(k, r.y, ws.hy)
		}
		// x ← top eigenvector of G(y).
		w.SearchGBatch(&ws.ob, ly)
		best := 0.0
		for k, i := range live {
			r := &runs[i]
			r.st.Evaluations++
			var ggx float64
			ggx, r.h = ws.top(k, r.x, ws.gx)
			best = max(best, r.h)
			if r.st.settle(math.Hypot(ggx, r.ggy), tol, &r.sl) {
				r.active = false
			}
		}
		gate.Report(Progress{Searcher: a.Name(), Iteration: it + 1, Value: best, Upper: 1})
	}
	for i := range runs {
		runs[i].st.Value = runs[i].h
		stats[i] = runs[i].st
	}
	return err
}

// alsWork is a batched ALS run's work space.
type alsWork struct {
	ob     subspace.OperatorBatch // the H side's operators, then the G side's
	gx, hy []float64
	mat    []float64
	lz     lanczos
}

// top replaces v by the top eigenvector of operator k of ws.ob and
// returns 2‖(I − vvᵀ)A v‖ at the old v (the norm of h's gradient along v's
// sphere) and the eigenvalue; u is work space of v's length. Operators the
// batch holds formed, and those of order at most denseOrder (formed here,
// s·p² multiply-adds through the packed tiles), run Lanczos on the matrix
// (p² a step); larger ones on the factored form (2·s·p a step). Either
// way the numbers come from operator k alone.
func (ws *alsWork) top(k int, v, u []float64) (grad, theta float64) {
	ob := &ws.ob
	p := ob.Order()
	var apply func(dst, src []float64)
	if ob.Formed() || p <= denseOrder {
		ws.mat = growSlice(ws.mat, p*p)
		ob.Matrix(k, ws.mat)
		a := ws.mat
		apply = func(dst, src []float64) { rowsTimes(dst, a, p, src) }
	} else {
		apply = func(dst, src []float64) { ob.Apply(k, dst, src) }
	}
	apply(u, v)
	grad = 2 * tangentNorm(u, v)
	return grad, ws.lz.top(apply, v, 1e-14)
}

// denseOrder is the largest order whose operators ALS forms as matrices.
const denseOrder = 32

func growSlice(s []float64, n int) []float64 {
	if cap(s) < n {
		return make([]float64, n)
	}
	return s[:n]
}
