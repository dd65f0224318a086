package rankone

import (
	"context"
	"math"
	"math/rand/v2"
	"runtime"
	"sync"
	"time"

	"gonum.org/v1/gonum/mat"

	"github.com/segre-lab/segre/subspace"
)

// MultiStart runs a Local method from many starting points and keeps the
// best certified witness. Start 0 is the spectral start (top eigenvectors of
// the flattenings); odd starts are the top singular pair of a random element
// P_W(G) of W (G Gaussian); even starts are a uniformly random x with the
// best y for it. Start i draws from its own generator seeded by (Seed, i),
// and results are merged in start order, so the Result does not depend on
// Workers. Converged points equal up to sign (|⟨x,x'⟩|·|⟨y,y'⟩| ≥ 1 − 1e-9)
// are counted once.
//
// A method that implements BatchLocal (ALS does) refines the starts in
// batches: start 0 alone (it is often the best, and is then reported
// soonest), the others in groups of at most Batch, as evenly spread over
// the workers as that allows. Each start's outcome is what Refine gives
// from it alone (BatchLocal's promise), so the Result does not depend on
// Batch either. When the context ends during a batch, only its start with
// the largest value is verified and kept (verifying every start of a large
// batch would delay the return).
//
// The zero value is ready to use.
type MultiStart struct {
	// Method is the local method; nil means &TrustRegion{}.
	Method Local
	// Starts is the number of starting points; zero means 16.
	Starts int
	// Seed seeds the random starts.
	Seed uint64
	// Workers is the number of goroutines; zero means GOMAXPROCS.
	Workers int
	// Batch is the most starts a BatchLocal method refines together; zero
	// means 32. It changes the speed only, never the Result.
	Batch int
	// Progress, if set, is called at most every 200 ms with the best bounds.
	Progress func(Progress)
}

var _ Searcher = (*MultiStart)(nil)

// Name returns "multistart(" + the method's name + ")".
func (ms *MultiStart) Name() string { return "multistart(" + ms.method().Name() + ")" }

func (ms *MultiStart) method() Local {
	if ms.Method == nil {
		return &TrustRegion{}
	}
	return ms.Method
}

// Point is a certified local solution found by SearchAll.
type Point struct {
	X, Y  []float64
	Upper float64 // certified d(X, Y) ≤ Upper
	Value float64 // h(X, Y), not certified
	Start int     // the first start that reached it
	Hits  int     // how many starts reached it
}

// Search implements Searcher.
func (ms *MultiStart) Search(ctx context.Context, w *subspace.Subspace) (Result, error) {
	res, _, err := ms.SearchAll(ctx, w)
	return res, err
}

type startOut struct {
	x, y  []float64
	st    Stats
	evals int
	upper float64
	key   float64 // what starts are ranked by: upper, or the complex distance (see rankKey)
	done  bool
}

// SearchAll is Search that also returns the distinct converged points,
// best first.
func (ms *MultiStart) SearchAll(ctx context.Context, w *subspace.Subspace) (Result, []Point, error) {
	begin := time.Now()
	l := ms.method()
	if err := ms.check(); err != nil {
		return TrivialResult(w, ms.Name()), nil, err
	}
	if err := checkOf(l); err != nil {
		return TrivialResult(w, ms.Name()), nil, err
	}
	starts := orDefault(ms.Starts, 16)
	workers := ms.Workers
	if workers <= 0 {
		workers = runtime.GOMAXPROCS(0)
	}
	workers = min(workers, starts)
	// outs grows as starts finish (under mu): a large Starts cut short by a
	// deadline costs no up-front allocation.
	var outs []startOut
	var mu sync.Mutex
	best := 1.0
	gate := NewThrottle(ms.Progress)
	done := 0
	keep := func(i int, out startOut) {
		mu.Lock()
		if i >= len(outs) {
			outs = append(outs, make([]startOut, i+1-len(outs))...)
		}
		outs[i] = out
		done++
		best = math.Min(best, out.upper)
		gate.Report(Progress{Searcher: ms.Name(), Starts: done, Upper: best, Value: out.st.Value})
		mu.Unlock()
	}
	verified := func(x, y []float64, st Stats, evals int) startOut {
		u, err := Verify(w, x, y)
		if err != nil {
			u = 1
		}
		return startOut{x: x, y: y, st: st, evals: evals, upper: u, key: rankKey(w, x, y, u), done: true}
	}
	if bl, ok := l.(BatchLocal); ok {
		first, size := batchLayout(starts, workers, orDefault(ms.Batch, 32))
		nb := 1 + (starts-first+size-1)/size
		ParallelFor(ctx, nb, workers, func(_, j int) {
			lo, hi := 0, first
			if j > 0 {
				lo = first + (j-1)*size
				hi = min(starts, lo+size)
			}
			xs, ys, evals := make([][]float64, hi-lo), make([][]float64, hi-lo), make([]int, hi-lo)
			for k := range xs {
				o := NewCounter(w)
				xs[k], ys[k] = make([]float64, w.Rows()), make([]float64, w.Cols())
				ms.startPoint(ctx, o, lo+k, xs[k], ys[k])
				evals[k] = o.evals
			}
			stats, _ := bl.RefineBatch(ctx, w, xs, ys)
			if ctx.Err() != nil {
				top := 0
				for k := range stats {
					if stats[k].Value > stats[top].Value {
						top = k
					}
				}
				keep(lo+top, verified(xs[top], ys[top], stats[top], evals[top]+stats[top].Evaluations))
				return
			}
			for k := range xs {
				keep(lo+k, verified(xs[k], ys[k], stats[k], evals[k]+stats[k].Evaluations))
			}
		})
	} else {
		ParallelFor(ctx, starts, workers, func(_, i int) {
			o := NewCounter(w)
			x, y := make([]float64, w.Rows()), make([]float64, w.Cols())
			ms.startPoint(ctx, o, i, x, y)
			st, _ := l.Refine(ctx, w, x, y)
			keep(i, verified(x, y, st, o.evals+st.Evaluations))
		})
	}

	res := Result{FoundBy: ms.Name(), Upper: 1, Status: Converged}
	var pts []Point
	bestIdx := -1
	allOK := true
	for i := range outs {
		o := &outs[i]
		if !o.done {
			continue
		}
		res.Starts++
		res.Iterations += o.st.Iterations
		res.Evaluations += o.evals
		if !o.st.Status.Success() {
			allOK = false
		}
		if bestIdx < 0 || o.key < outs[bestIdx].key {
			bestIdx = i
		}
		if o.st.Status == Converged {
			pts = mergePoint(pts, o, i)
		}
	}
	if bestIdx >= 0 {
		b := &outs[bestIdx]
		res.X, res.Y, res.Upper, res.Value = b.x, b.y, b.upper, b.st.Value
	} else {
		// Cancelled before any start finished: return a trivially valid witness.
		res.X, res.Y, res.Upper = TrivialWitness(w)
	}
	if !allOK {
		res.Status, res.Limit = LimitReached, IterationLimit
	}
	sortPoints(pts)
	res.Elapsed = time.Since(begin)
	if err := ctx.Err(); err != nil {
		res.Status = Cancelled
		return res, pts, err
	}
	return res, pts, nil
}

// batchLayout returns how MultiStart cuts starts into batches for workers:
// the first batch holds starts [0, first) (start 0 alone), the others
// size starts each (the last may hold fewer), size at most most and small
// enough that every worker gets a batch.
func batchLayout(starts, workers, most int) (first, size int) {
	rest := starts - 1
	if rest <= 0 {
		return starts, 1
	}
	return 1, max(1, min(most, (rest+workers-1)/workers))
}

func unitVec(n int) []float64 {
	v := make([]float64, n)
	v[0] = 1
	return v
}

func mergePoint(pts []Point, o *startOut, i int) []Point {
	for k := range pts {
		if math.Abs(dotv(pts[k].X, o.x))*math.Abs(dotv(pts[k].Y, o.y)) >= 1-1e-9 {
			pts[k].Hits++
			if o.upper < pts[k].Upper {
				pts[k].X, pts[k].Y, pts[k].Upper, pts[k].Value = o.x, o.y, o.upper, o.st.Value
			}
			return pts
		}
	}
	return append(pts, Point{X: o.x, Y: o.y, Upper: o.upper, Value: o.st.Value, Start: i, Hits: 1})
}

func sortPoints(p []Point) {
	// insertion sort: few points, and stable by start order
	for i := 1; i < len(p); i++ {
		for j := i; j > 0 && p[j].Upper < p[j-1].Upper; j-- {
			p[j], p[j-1] = p[j-1], p[j]
		}
	}
}

// startPoint writes start i into x, y.
func (ms *MultiStart) startPoint(ctx context.Context, o *oracle, i int, x, y []float64) {
	if i == 0 {
		spectralStart(ctx, o, x, y)
		return
	}
	rng := rand.New(rand.NewPCG(ms.Seed, uint64(i)))
	m, n := len(x), len(y)
	if i%2 == 1 {
		g := make([]float64, m*n)
		for k := range g {
			g[k] = rng.NormFloat64()
		}
		o.Project(g, g)
		topSingularPair(g, m, n, x, y, rng)
		return
	}
	for k := range x {
		x[k] = rng.NormFloat64()
	}
	scale(x, 1/norm(x))
	clear(y)
	TopEigen(o.HOperator(x).Apply, y, 0, 0, 1e-12)
}

// topSingularPair writes approximate top singular vectors of the m×n matrix
// a (row-major) into x and y, by Lanczos on AᵀA or AAᵀ (the smaller).
func topSingularPair(a []float64, m, n int, x, y []float64, rng *rand.Rand) {
	am := mat.NewDense(m, n, a)
	if n <= m {
		for k := range y {
			y[k] = rng.NormFloat64()
		}
		tmp := mat.NewVecDense(m, nil)
		TopEigen(func(dst, src []float64) {
			tmp.MulVec(am, mat.NewVecDense(n, src))
			mat.NewVecDense(n, dst).MulVec(am.T(), tmp)
		}, y, 0, 0, 1e-10)
		mat.NewVecDense(m, x).MulVec(am, mat.NewVecDense(n, y))
		if nx := norm(x); nx > 0 {
			scale(x, 1/nx)
		} else {
			copy(x, unitVec(m))
		}
		return
	}
	for k := range x {
		x[k] = rng.NormFloat64()
	}
	tmp := mat.NewVecDense(n, nil)
	TopEigen(func(dst, src []float64) {
		tmp.MulVec(am.T(), mat.NewVecDense(m, src))
		mat.NewVecDense(m, dst).MulVec(am, tmp)
	}, x, 0, 0, 1e-10)
	mat.NewVecDense(n, y).MulVec(am.T(), mat.NewVecDense(m, x))
	if ny := norm(y); ny > 0 {
		scale(y, 1/ny)
	} else {
		copy(y, unitVec(n))
	}
}

func (ms *MultiStart) check() error {
	return CheckSettings("MultiStart", []Setting{{"Starts", float64(ms.Starts)}, {"Workers", float64(ms.Workers)}, {"Batch", float64(ms.Batch)}}...)
}
