package rankone

import (
	"context"
	"fmt"
	"math"
	"runtime"
	"strconv"
	"sync"
	"sync/atomic"

	"github.com/segre-lab/segre/internal/accurate"
	"github.com/segre-lab/segre/subspace"
)

// The kit: what every strategy needs, ours and users' alike. A strategy
// built on it keeps the Searcher contract by construction: WitnessResult
// gives a Result whose Upper is Verify at the witness, DistanceLower turns
// a proven bound on h* into a proven Lower, Counter counts the oracle calls
// for Result.Evaluations, Throttle paces progress, and ParallelFor runs
// work items on several goroutines with results that do not depend on the
// number of workers (each item writes its own slot; merge in index order).

// WitnessResult returns a Result for the witness (x, y) found by the
// strategy named name: X and Y are copies normalised to unit length, Upper
// is Verify's certified bound at them, Status is Converged. When the
// witness is unusable (wrong length, zero, not finite) it returns
// TrivialResult instead, so the Result is valid whatever the strategy
// computed.
func WitnessResult(w *subspace.Subspace, name string, x, y []float64) Result {
	if len(x) != w.Rows() || len(y) != w.Cols() {
		return TrivialResult(w, name)
	}
	nx, ny := unitCopy(x), unitCopy(y)
	u, err := Verify(w, nx, ny) // at the normalised floats actually returned
	if err != nil {
		return TrivialResult(w, name)
	}
	return Result{X: nx, Y: ny, Upper: u, FoundBy: name, Status: Converged, Starts: 1}
}

// unitCopy returns x/‖x‖ (a copy; x itself when it is zero or not finite,
// which Verify then refuses).
func unitCopy(x []float64) []float64 {
	out := append([]float64(nil), x...)
	s := accurate.Pow2Scale(accurate.MaxAbs(out))
	var ss float64
	for _, v := range out {
		v *= s
		ss += float64(v * v)
	}
	if !(ss > 0) || math.IsInf(ss, 0) {
		return out
	}
	f := s / math.Sqrt(ss)
	for i := range out {
		out[i] *= f
	}
	return out
}

// TrivialResult returns the Result that proves nothing beyond the trivial
// witness (see TrivialWitness): valid for any subspace, Lower = 0.
func TrivialResult(w *subspace.Subspace, name string) Result {
	x, y, u := TrivialWitness(w)
	return Result{X: x, Y: y, Upper: u, FoundBy: name, Status: Converged}
}

// DistanceLower returns a proven lower bound on d* = √(1 − h*) from a
// proven upper bound hUpper ≥ h*: √(1 − hUpper) rounded down (0 when
// hUpper ≥ 1, NaN or negative input treated safely).
func DistanceLower(hUpper float64) float64 {
	if !(hUpper < 1) {
		return 0
	}
	return accurate.SqrtDown(accurate.Down(1 - math.Max(hUpper, 0)))
}

// ValueLower returns a proven lower bound on h* = 1 − d*² from a proven
// upper bound on d*: 1 − upper², rounded down and at least 0.
func ValueLower(upper float64) float64 {
	return math.Max(0, accurate.Down(1-accurate.MulUp(upper, upper)))
}

// Counter wraps a Subspace's contractions and counts the calls, each about
// one pass over the stored basis, for Result.Evaluations. It is not safe
// for concurrent use: give each goroutine its own. Its GOperator,
// HOperator, ApplyG, ApplyH, ApplyPartialTrace1/2, Project and Gradient are the subspace's search operators
// (subspace.SearchGOperator): for a complex subspace estimates built from
// its complex basis, for searches only, never for a certified bound.
type Counter struct {
	w     *subspace.Subspace
	evals int
}

// NewCounter returns a Counter for w.
func NewCounter(w *subspace.Subspace) *Counter { return &Counter{w: w} }

// Evaluations returns the number of contractions called so far.
func (o *Counter) Evaluations() int { return o.evals }

// ParallelFor calls body(worker, i) for every i in [0, n) on at most
// workers goroutines (workers ≤ 0 means GOMAXPROCS), worker ∈ [0, workers)
// naming the goroutine so that body can keep per-worker buffers. Once ctx
// is done no further index is started; ParallelFor returns when every
// started call has returned, with ctx.Err() if some index was not started,
// else nil. Indices are handed out in increasing order; which worker runs
// which index is not fixed, so body must write results only to the index's
// own slot (then merging in index order gives the same result for any
// number of workers).
func ParallelFor(ctx context.Context, n, workers int, body func(worker, i int)) error {
	if workers <= 0 {
		workers = runtime.GOMAXPROCS(0)
	}
	workers = max(1, min(workers, n))
	var next atomic.Int64
	var skipped atomic.Bool
	var wg sync.WaitGroup
	for k := 0; k < workers; k++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for {
				i := int(next.Add(1) - 1)
				if i >= n {
					return
				}
				if ctx.Err() != nil {
					skipped.Store(true)
					return
				}
				body(k, i)
			}
		}()
	}
	wg.Wait()
	if skipped.Load() {
		return ctx.Err()
	}
	return nil
}

// Limit names the budget that ended a search (Result.Limit).
type Limit int

// The limits.
const (
	NoLimit        Limit = iota
	IterationLimit       // a local method's or a solver's iteration cap
	NodeLimit            // branch-and-bound's cell budget (MaxNodes)
	FrontierLimit        // branch-and-bound's frontier cap (MaxFrontier or the memory limit)
	TimeLimit            // a strategy's own time budget (Portfolio.Budget)
)

var limitNames = [...]string{"", "iteration limit", "node limit", "frontier limit", "time limit"}

func (l Limit) String() string {
	if l >= 0 && int(l) < len(limitNames) {
		return limitNames[l]
	}
	return "Limit(" + strconv.Itoa(int(l)) + ")"
}

// Setting is a named numeric setting, for CheckSettings.
type Setting struct {
	Name  string
	Value float64
}

// CheckSettings applies the rule for settings (see the package doc): it
// returns an error wrapping ErrOption that names the first negative or NaN
// setting of the strategy, or nil.
func CheckSettings(strategy string, settings ...Setting) error {
	for _, s := range settings {
		if s.Value < 0 || math.IsNaN(s.Value) {
			return fmt.Errorf("%w: %s.%s = %v is negative (zero means the default)", ErrOption, strategy, s.Name, s.Value)
		}
	}
	return nil
}

// settingsChecker is implemented by the strategies of this module.
type settingsChecker interface{ check() error }

// checkOf checks s's settings when it is one of ours (a user's strategy
// checks its own).
func checkOf(s any) error {
	if c, ok := s.(settingsChecker); ok {
		return c.check()
	}
	return nil
}

// FormatLower writes a certified lower end with at most digits significant
// digits (%g style), rounded down, so that the printed number is still a
// lower bound; FormatUpper rounds up. Printing a certified number with %g
// rounds to nearest and can cross the value it bounds.
func FormatLower(v float64, digits int) string { return accurate.FormatDown(v, digits) }

// FormatUpper writes a certified upper end rounded up (see FormatLower).
func FormatUpper(v float64, digits int) string { return accurate.FormatUp(v, digits) }

// Widen returns [lower − θ, upper + θ] rounded outward and kept in [0, 1]:
// the interval on d* for a subspace within θ ≥ ‖P_V − P_W‖₂ of the one the
// interval was proven for (|d*_V − d*_W| ≤ θ).
func Widen(lower, upper, theta float64) (lo, up float64) {
	return math.Max(0, accurate.Down(lower-theta)), math.Min(1, accurate.Up(upper+theta))
}
