package rankone

import (
	"context"
	"math"
	"time"

	"github.com/segre-lab/segre/subspace"
)

// Local is a local method: from a start point it climbs to a nearby
// stationary point of h. Users' own local methods implement it too and can
// then be run from many starts by MultiStart.
type Local interface {
	// Name identifies the method in results and reports.
	Name() string
	// Refine improves the unit vectors x (length m) and y (length n) in
	// place. On a cancelled context it returns promptly with the best point
	// so far in x, y, status Cancelled and ctx.Err().
	Refine(ctx context.Context, w *subspace.Subspace, x, y []float64) (Stats, error)
}

// Stats reports one run of a Local method.
type Stats struct {
	Iterations, Evaluations int
	Status                  Status
	Value                   float64 // h at the end point (not certified)
	Gradient                float64 // norm of the Riemannian gradient of h at the end (not certified)
}

// searchLocal runs l once from the spectral start, as a Searcher.
func searchLocal(ctx context.Context, w *subspace.Subspace, l Local) (Result, error) {
	start := time.Now()
	if err := checkOf(l); err != nil {
		return TrivialResult(w, l.Name()), err
	}
	o := &oracle{w: w}
	x, y := make([]float64, w.Rows()), make([]float64, w.Cols())
	spectralStart(ctx, o, x, y)
	st, err := l.Refine(ctx, w, x, y)
	res := Result{X: x, Y: y, FoundBy: l.Name(), Value: st.Value, Status: st.Status,
		Iterations: st.Iterations, Evaluations: st.Evaluations + o.evals, Starts: 1}
	if st.Status == LimitReached {
		res.Limit = IterationLimit
	}
	finish(w, &res, start)
	if cerr := ctx.Err(); cerr != nil {
		res.Status, err = Cancelled, cerr
	}
	return res, err
}

// Throttle passes Progress reports to a callback at most every 200 ms,
// filling in Elapsed. A nil callback makes it a no-op. Strategies (ours and
// users') share it so that progress is never the algorithm's business.
type Throttle struct {
	fn    func(Progress)
	start time.Time
	last  time.Time
}

// NewThrottle returns a Throttle for fn, timing from now.
func NewThrottle(fn func(Progress)) *Throttle {
	now := time.Now()
	return &Throttle{fn: fn, start: now, last: now}
}

// Report calls the callback if 200 ms have passed since the last call.
func (g *Throttle) Report(p Progress) {
	if g == nil || g.fn == nil {
		return
	}
	now := time.Now()
	if now.Sub(g.last) < 200*time.Millisecond {
		return
	}
	g.last = now
	p.Elapsed = now.Sub(g.start)
	g.fn(p)
}

// stall tracks the gradient norm to detect a floating-point floor: no 10%
// improvement of the best gradient norm for `patience` iterations.
type stall struct {
	best     float64
	since    int
	patience int
}

func (s *stall) stuck(g float64) bool {
	if s.best == 0 {
		s.best = math.Inf(1)
	}
	if g < 0.9*s.best {
		s.best, s.since = g, 0
		return false
	}
	s.since++
	return s.since >= s.patience
}

// settle records the Riemannian gradient norm g of an iteration of an
// alternating method and reports whether the method stops there: converged
// (g ≤ tol) or at a floating-point floor (sl), with st.Status set.
func (st *Stats) settle(g, tol float64, sl *stall) bool {
	st.Gradient = g
	switch {
	case g <= tol:
		st.Status = Converged
	case sl.stuck(g):
		st.Status = floorStatus(g) // no more progress in floating point
	default:
		return false
	}
	return true
}

// cancelled finishes the Stats of an alternating method whose context is
// done at (x, y).
func (st Stats) cancelled(o *oracle, x, y []float64, err error) (Stats, error) {
	st.Status = Cancelled
	st.Evaluations = o.evals
	st.Value = o.Value(x, y)
	return st, err
}

// tangentNorm returns ‖u − (xᵀu)x‖ for unit x.
func tangentNorm(u, x []float64) float64 {
	c := dotv(u, x)
	var s float64
	for i := range u {
		d := u[i] - c*x[i]
		s += d * d
	}
	return math.Sqrt(s)
}

func orDefault(v, d int) int {
	if v <= 0 {
		return d
	}
	return v
}

func orDefaultF(v, d float64) float64 {
	if v <= 0 {
		return d
	}
	return v
}

// floorStatus is the status of a method that can make no more progress:
// Converged if it is near a stationary point, LimitReached otherwise.
func floorStatus(grad float64) Status {
	if grad <= 1e-6 {
		return Converged
	}
	return LimitReached
}
