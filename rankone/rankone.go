// Package rankone searches for the rank-one matrix nearest to a subspace W
// of m×n matrices and proves bounds on how near it can be.
//
// For unit x ∈ R^m, y ∈ R^n, d(x, y) = dist_F(x yᵀ, W) and h(x, y) =
// ‖P_W(x yᵀ)‖_F² = 1 − d². The optimum is d* = min d (h* = max h).
//
// Every Searcher returns a Result whose Upper and Lower are certified for the
// subspace as stored (see package subspace): Upper ≥ d(X, Y) ≥ d* and
// Lower ≤ d*, rounding included. Upper always comes from Verify at the
// returned witness; Lower is 0 unless the strategy proves something, and
// LowerBy names the argument.
//
// Settings. Every strategy is a struct of settings with one rule, the same
// in every package of the module: zero means the documented default (which
// may be "no limit" where a field says so), and a negative or NaN value is
// an error: Search returns the trivial Result and an error wrapping
// ErrOption (see CheckSettings). A user's strategy keeps the rule by
// calling CheckSettings first.
//
// Contracts. Inputs are never modified. Search methods take a context; a
// cancelled or expired context makes them return promptly with the best
// valid bounds found so far, status Cancelled, and ctx.Err(). Strategies are
// structs whose zero value is a good default; every field documents what
// zero means. The same settings give the same Result (Elapsed aside) for any
// number of workers.
package rankone

import (
	"context"
	"errors"
	"fmt"
	"math"
	"time"

	"github.com/segre-lab/segre/internal/accurate"
	"github.com/segre-lab/segre/subspace"
)

// Searcher is a strategy for the nearest rank-one matrix.
type Searcher interface {
	Search(ctx context.Context, w *subspace.Subspace) (Result, error)
}

// Status says how a search ended.
type Status int

// The statuses. Converged and GapReached are successes; LimitReached means a
// budget (iterations, starts, nodes) ran out first; Cancelled means the
// context ended the search.
const (
	NotRun Status = iota
	Converged
	GapReached
	LimitReached
	Cancelled
)

var statusNames = [...]string{"not run", "converged", "gap reached", "limit reached", "cancelled"}

func (s Status) String() string {
	if s >= 0 && int(s) < len(statusNames) {
		return statusNames[s]
	}
	return fmt.Sprintf("Status(%d)", int(s))
}

// Success reports whether the search ended by meeting its own criterion
// rather than by running out of budget or being cancelled.
func (s Status) Success() bool { return s == Converged || s == GapReached }

// Result is what a search returns.
type Result struct {
	// X and Y are the witness, unit vectors of length m and n.
	X, Y []float64
	// Upper is certified: d(X, Y) ≤ Upper, hence d* ≤ Upper.
	Upper float64
	// Lower is certified: d* ≥ Lower. It is 0 when nothing was proved.
	Lower float64
	// LowerBy names the argument that proved Lower ("" if Lower is 0).
	LowerBy string
	// FoundBy names the strategy that found the witness.
	FoundBy string
	// Value is h(X, Y) as computed in floating point (not certified).
	Value float64
	// Status says how the search ended.
	Status Status
	// Limit says which budget ended a search with Status LimitReached
	// (NoLimit otherwise).
	Limit Limit
	// Iterations counts iterations of the local method(s), Evaluations the
	// calls of subspace contractions (each about one pass over the stored
	// basis), Starts the starting points tried.
	Iterations, Evaluations, Starts int
	// Elapsed is the wall-clock time of the search.
	Elapsed time.Duration
}

// ValueBounds returns the certified interval [lo, hi] on h* implied by the
// bounds: h* ≥ h(X, Y) = 1 − d(X, Y)² ≥ 1 − Upper² and h* = 1 − d*² ≤ 1 − Lower²,
// evaluated with outward rounding.
func (r Result) ValueBounds() (lo, hi float64) {
	lo = accurate.Down(1 - accurate.MulUp(r.Upper, r.Upper))
	lo = max(lo, 0)
	l2 := r.Lower * r.Lower
	hi = accurate.Up(1 - accurate.Down(l2))
	hi = min(hi, 1)
	return lo, hi
}

// Progress is what a strategy reports while it runs.
type Progress struct {
	Searcher     string
	Iteration    int
	Starts       int
	Nodes        int     // cells processed (global searches)
	Frontier     int     // cells waiting (global searches)
	Upper, Lower float64 // best certified bounds so far (Upper = 1 before any)
	Value        float64 // best h so far (not certified)
	Estimate     float64 // a method's own estimate of h* (an SDP's objective; not certified), 0 if none
	Elapsed      time.Duration
}

// Errors of Verify and of strategies on bad arguments.
var (
	ErrLength    = errors.New("rankone: vector has the wrong length")
	ErrNotFinite = errors.New("rankone: vector has a NaN or infinite entry")
	ErrZeroVec   = errors.New("rankone: vector is zero")
	// ErrOption reports a setting that breaks the rule for settings: zero
	// means the documented default, a negative (or NaN) value is an error.
	ErrOption = errors.New("rankone: invalid setting")
)

// Verify returns a certified upper bound on d(x/‖x‖, y/‖y‖) for the stored
// subspace: the distance from the rank-one matrix with the directions of x
// and y (exactly as given) to W. The bound is at most 1 (d ≤ 1 always, since
// 0 ∈ W).
//
// Derivation: x and y are scaled by powers of two (exact when no entry
// becomes subnormal, which is checked); the numerator is
// subspace.ResidualBound, a proven upper bound on dist(x⊗y, W), and the
// denominator a proven lower bound on ‖x‖‖y‖ (accurate.SumSqLower, rounded
// square roots); the quotient is rounded upwards.
//
// For a complex subspace (the realified W” of 2m×2n matrices) the bound
// comes from the complex residual instead, which reads half the data:
// at unit X, Y, d”² = (1 + d²)/2 exactly (h = 2h”, see package subspace),
// so VerifyComplex's bound u on d gives √((1 + u²)/2), rounded up.
func Verify(w *subspace.Subspace, x, y []float64) (float64, error) {
	if w.Field() == subspace.Complex && len(x) == w.Rows() && len(y) == w.Cols() {
		u, err := VerifyComplex(w, x, y)
		if err != nil {
			return 1, err
		}
		if !(u < 1) {
			return 1, nil
		}
		return math.Min(1, accurate.SqrtUp(accurate.Up(accurate.AddUp(1, accurate.MulUp(u, u))/2))), nil
	}
	return verifyWith(w, x, y, w.ResidualBound)
}

// verifyWith is Verify with the residual bound given (the real one, or the
// complex one of VerifyComplex): scale x, y by powers of two (exactly),
// bound the residual, divide by a proven lower bound on ‖x‖‖y‖, round up.
func verifyWith(w *subspace.Subspace, x, y []float64, residual func(x, y []float64) float64) (float64, error) {
	if len(x) != w.Rows() || len(y) != w.Cols() {
		return 1, fmt.Errorf("%w: x has %d entries, y %d; want %d and %d", ErrLength, len(x), len(y), w.Rows(), w.Cols())
	}
	xs, err := exactScale(x, "x")
	if err != nil {
		return 1, err
	}
	ys, err := exactScale(y, "y")
	if err != nil {
		return 1, err
	}
	num := residual(xs, ys)
	den := accurate.Down(accurate.SqrtDown(accurate.SumSqLower(xs)) * accurate.SqrtDown(accurate.SumSqLower(ys)))
	if !(den > 0) {
		return 1, nil
	}
	u := accurate.Up(num / den)
	if !(u < 1) {
		return 1, nil
	}
	return u, nil
}

// exactScale returns x scaled by a power of two so that max|x_i| ∈ [1, 2), or
// x itself when scaling would not be exact.
func exactScale(x []float64, name string) ([]float64, error) {
	ma := accurate.MaxAbs(x)
	if math.IsNaN(ma) || math.IsInf(ma, 0) {
		return nil, fmt.Errorf("%w: %s", ErrNotFinite, name)
	}
	if ma == 0 {
		return nil, fmt.Errorf("%w: %s", ErrZeroVec, name)
	}
	s := accurate.Pow2Scale(ma)
	out := make([]float64, len(x))
	for i, v := range x {
		out[i] = v * s
		if out[i]/s != v {
			return x, nil
		}
	}
	return out, nil
}

// finish fills the certified fields of res from its witness.
func finish(w *subspace.Subspace, res *Result, start time.Time) {
	u, err := Verify(w, res.X, res.Y)
	if err != nil {
		u = 1
	}
	res.Upper = u
	res.Elapsed = time.Since(start)
}

// ctxStatus maps a context error to the status and error to return.
func ctxStatus(ctx context.Context) (Status, error) {
	if err := ctx.Err(); err != nil {
		return Cancelled, err
	}
	return 0, nil
}

// TrivialWitness returns x = e₁, y = e₁ and their certified Upper: the
// valid fallback witness of a strategy that found nothing better (for
// example when cancelled before its first start).
func TrivialWitness(w *subspace.Subspace) (x, y []float64, upper float64) {
	x, y = unitVec(w.Rows()), unitVec(w.Cols())
	upper, err := Verify(w, x, y)
	if err != nil {
		upper = 1
	}
	return x, y, upper
}

// Polish refines a copy of (x, y) with the local method l and returns the
// better of the refined and the original point by certified Upper, with the
// refinement's stats. x and y are not modified.
func Polish(ctx context.Context, w *subspace.Subspace, l Local, x, y []float64) (bx, by []float64, upper float64, st Stats) {
	u0, err := Verify(w, x, y)
	if err != nil {
		u0 = 1
	}
	px, py := append([]float64(nil), x...), append([]float64(nil), y...)
	st, _ = l.Refine(ctx, w, px, py)
	if u1, err := Verify(w, px, py); err == nil && u1 < u0 {
		return px, py, u1, st
	}
	return x, y, u0, st
}
