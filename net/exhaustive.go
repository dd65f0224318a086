package net

import (
	"context"
	"fmt"
	"runtime"
	"sync"
	"time"

	"github.com/segre-lab/segre/internal/accurate"
	"github.com/segre-lab/segre/rankone"
	"github.com/segre-lab/segre/subspace"
)

// Exhaustive evaluates the proven upper bound of s(ĝ)² at every point of the
// cube-face net of covering radius Epsilon on the smaller side's sphere and
// concludes √h* ≤ max_g s(ĝ)/(1 − ε) (derivation in the package doc): the
// classic 2^O(d) certificate, the simplest to audit. The best net point,
// polished by a local method, is the witness.
//
// The zero value is ready to use.
type Exhaustive struct {
	// Epsilon is the covering radius of the net; zero means 0.05. It must be
	// below 1.
	Epsilon float64
	// MaxPoints bounds the net size; zero means 1e8. A larger net is refused
	// with ErrTooLarge before any work.
	MaxPoints int64
	// Workers is the number of goroutines; zero means GOMAXPROCS. The result
	// does not depend on it.
	Workers int
	// Local polishes the best net point; nil means &rankone.TrustRegion{}.
	Local rankone.Local
	// Progress, if set, is called at most every 200 ms.
	Progress func(rankone.Progress)
}

var _ rankone.Searcher = (*Exhaustive)(nil)

// Name returns "exhaustive sphere net".
func (e *Exhaustive) Name() string { return "exhaustive sphere net" }

// Search implements rankone.Searcher.
func (e *Exhaustive) Search(ctx context.Context, w *subspace.Subspace) (rankone.Result, error) {
	if err := rankone.CheckSettings("Exhaustive", []rankone.Setting{{Name: "Epsilon", Value: e.Epsilon},
		{Name: "MaxPoints", Value: float64(e.MaxPoints)}, {Name: "Workers", Value: float64(e.Workers)}}...); err != nil {
		return rankone.TrivialResult(w, e.Name()), err
	}
	begin := time.Now()
	eps := e.Epsilon
	if eps == 0 {
		eps = 0.05
	}
	if !(eps > 0 && eps < 1) {
		return rankone.TrivialResult(w, e.Name()), fmt.Errorf("%w: Exhaustive.Epsilon = %v, want 0 < ε < 1", rankone.ErrOption, eps)
	}
	limit := e.MaxPoints
	if limit <= 0 {
		limit = 1e8
	}
	sd := newSide(w)
	N := GridSize(sd.d, eps)
	eps = CoveringRadius(sd.d, N)
	total := NetSize(sd.d, N, limit)
	if total < 0 {
		return rankone.TrivialResult(w, e.Name()), fmt.Errorf("%w: a net of radius %v on S^%d has more than %d points", ErrTooLarge, eps, sd.d-1, limit)
	}
	workers := e.Workers
	if workers <= 0 {
		workers = runtime.GOMAXPROCS(0)
	}
	const chunk = 64
	nchunks := (total + chunk - 1) / chunk
	type part struct {
		maxUp   float64
		bestEst float64
		bestIdx int64
		bestVec []float64
		evals   int
		done    bool
	}
	parts := make([]part, nchunks)
	var mu sync.Mutex
	doneChunks := 0
	gate := rankone.NewThrottle(e.Progress)
	sides := make([]side, workers)
	gbuf, vbuf := make([][]float64, workers), make([][]float64, workers)
	for k := range sides {
		sides[k] = sd // a copy: its own evaluation count
		gbuf[k], vbuf[k] = make([]float64, sd.d), make([]float64, sd.p)
	}
	rankone.ParallelFor(ctx, int(nchunks), workers, func(k, c int) {
		s, g, v := &sides[k], gbuf[k], vbuf[k]
		ci := int64(c)
		pt := part{bestEst: -1}
		for idx := ci * chunk; idx < min((ci+1)*chunk, total); idx++ {
			NetPoint(g, sd.d, N, idx)
			clear(v)
			est, up, _ := s.value(g, v)
			pt.maxUp = max(pt.maxUp, up)
			if est > pt.bestEst {
				pt.bestEst, pt.bestIdx, pt.bestVec = est, idx, append(pt.bestVec[:0], v...)
			}
		}
		pt.evals = s.evals
		s.evals = 0
		pt.done = true
		parts[ci] = pt
		mu.Lock()
		doneChunks++
		gate.Report(rankone.Progress{Searcher: e.Name(), Nodes: doneChunks * int(chunk), Frontier: int(total) - doneChunks*int(chunk), Upper: 1})
		mu.Unlock()
	})

	res := rankone.Result{FoundBy: e.Name(), Status: rankone.Converged, Starts: 1}
	complete := true
	var maxUp float64
	bestEst, bestIdx := -1.0, int64(-1)
	var bestVec []float64
	for _, pt := range parts {
		if !pt.done {
			complete = false
			continue
		}
		res.Evaluations += pt.evals
		maxUp = max(maxUp, pt.maxUp)
		if pt.bestEst > bestEst {
			bestEst, bestIdx, bestVec = pt.bestEst, pt.bestIdx, pt.bestVec
		}
	}
	res.Iterations = res.Evaluations
	if bestIdx >= 0 {
		g := make([]float64, sd.d)
		NetPoint(g, sd.d, N, bestIdx)
		x, y := sd.witness(g, bestVec)
		l := e.Local
		if l == nil {
			l = &rankone.TrustRegion{}
		}
		var st rankone.Stats
		res.X, res.Y, res.Upper, st = rankone.Polish(ctx, w, l, x, y)
		res.Value = st.Value
		res.Evaluations += st.Evaluations
	} else {
		res.X, res.Y, res.Upper = rankone.TrivialWitness(w)
	}
	if complete {
		// √h* ≤ √maxUp/(1 − ε), evaluated upwards.
		r := accurate.Up(accurate.SqrtUp(maxUp) / accurate.Down(1-eps))
		hUp := min(accurate.MulUp(r, r), 1)
		if lo := rankone.DistanceLower(hUp); lo > 0 {
			res.Lower, res.LowerBy = lo, fmt.Sprintf("net (ε = %.3g, %d points)", eps, total)
		}
	}
	res.Elapsed = time.Since(begin)
	if err := ctx.Err(); err != nil {
		res.Status = rankone.Cancelled
		return res, err
	}
	return res, nil
}
