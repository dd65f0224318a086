// Package segre does the main job of the module in one call: given a
// linear subspace W of m×n real matrices, it returns a certified interval
// [Lower, Upper] on d* = min over unit x, y of dist_F(x yᵀ, W), with a
// witness (x, y) at distance at most Upper.
//
// Certify chooses its strategies (members) from the size of the problem,
// runs the searches concurrently and climbs a ladder of bounds, each
// started when a measured cost model predicts it fits in the time left,
// all under one time budget; it merges their certified
// bounds (the smallest Upper with its witness, the largest Lower), and
// stops as soon as the merged interval meets the requested gap. Every
// bound comes from a member that proves it (see package rankone for the
// contract), so the merged interval is certified for the stored basis of
// the subspace; CertifyBasis and CertifyFile also prove how far the stored
// basis is from the span of the matrices as given and report the interval
// that holds for that span (Report.Input).
//
// Conventions. Inputs are never modified. Every long call takes a context
// first; a cancelled context returns the best valid bounds so far with
// Stop = Cancelled and the context's error. Options' zero value is the
// default; a zero field means its documented default, and a negative one
// is an error (ErrOption).
package segre

import (
	"errors"
	"fmt"
	"time"

	"github.com/segre-lab/segre/proof"
	"github.com/segre-lab/segre/rankone"
	"github.com/segre-lab/segre/subspace"
)

// ErrOption reports an invalid option value.
var ErrOption = errors.New("segre: invalid option")

// Options are the settings of Certify. The zero value is the default.
type Options struct {
	// Budget is the time allowed for the search (not for reading or
	// orthonormalising the input); zero means 10 s.
	Budget time.Duration
	// Gap is the requested relative gap on h* = 1 − d*²: the search stops
	// as soon as (hUpper − hLower) ≤ Gap·hUpper, certified. Zero means
	// 1e-6. It must be below 1.
	Gap float64
	// Starts is the number of starting points of each local method; zero
	// means 32.
	Starts int
	// Seed seeds the local methods' random starts (each member gets its
	// own stream derived from it). Zero is a valid seed.
	Seed uint64
	// Members, when not nil, replaces the planned members (see Plan).
	Members []rankone.Searcher
	// Subspace holds the options of the orthonormalisation (rank tolerance,
	// memory limit), used by CertifyBasis, CertifyComplex and CertifyFile.
	Subspace subspace.Options
	// Complex makes CertifyFile treat real data over C (complex data are
	// always treated over C).
	Complex bool
	// Proof makes Certify keep the evidence (the level-one certificate,
	// branch-and-bound's cover) and return a re-checkable proof of the
	// interval in Report.Proof (package proof; for a complex subspace the
	// claims are about the complex distance).
	Proof bool
	// Progress, if set, is called with the phase, the merged certified
	// interval and the latest member report, at most every 200 ms while the
	// search runs and at each change of phase.
	Progress func(Progress)

	inputHash string // set by CertifyFile for the proof
}

func (o Options) check() error {
	switch {
	case o.Budget < 0:
		return fmt.Errorf("%w: Budget = %v is negative", ErrOption, o.Budget)
	case o.Gap < 0 || o.Gap >= 1 || o.Gap != o.Gap:
		return fmt.Errorf("%w: Gap = %v, want 0 ≤ Gap < 1", ErrOption, o.Gap)
	case o.Starts < 0:
		return fmt.Errorf("%w: Starts = %d is negative", ErrOption, o.Starts)
	}
	return nil
}

func (o Options) budget() time.Duration {
	if o.Budget == 0 {
		return 10 * time.Second
	}
	return o.Budget
}

func (o Options) gap() float64 {
	if o.Gap == 0 {
		return 1e-6
	}
	return o.Gap
}

func (o Options) starts() int {
	if o.Starts == 0 {
		return 32
	}
	return o.Starts
}

// Stop says why Certify returned.
type Stop int

// The stop reasons.
const (
	// GapReached: the certified interval met the requested gap.
	GapReached Stop = iota + 1
	// BudgetSpent: the time budget ran out first.
	BudgetSpent
	// NothingMore: every member finished without meeting the gap and
	// every bound of the ladder ran to its end (none was skipped for lack
	// of time); more time would not have helped these members.
	NothingMore
	// Cancelled: the caller's context ended the search.
	Cancelled
)

var stopNames = [...]string{"", "gap reached", "budget spent", "nothing more to try", "cancelled"}

func (s Stop) String() string {
	if s > 0 && int(s) < len(stopNames) {
		return stopNames[s]
	}
	return fmt.Sprintf("Stop(%d)", int(s))
}

// Phase names what Certify (or CertifyBasis, CertifyFile) is doing.
type Phase int

// The phases, in order.
const (
	Reading Phase = iota + 1
	Orthonormalising
	ProvingInputSpan
	Searching
	Done
)

var phaseNames = [...]string{"", "reading", "orthonormalising", "proving the input span", "searching", "done"}

func (p Phase) String() string {
	if p > 0 && int(p) < len(phaseNames) {
		return phaseNames[p]
	}
	return fmt.Sprintf("Phase(%d)", int(p))
}

// Progress is what the Progress callback receives.
type Progress struct {
	Phase Phase
	// Lower and Upper are the merged certified interval on d* so far
	// ([0, 1] before any member reports).
	Lower, Upper float64
	// Member is the latest report of a member (zero when the call is for a
	// change of phase): its name, counters and own bounds.
	Member rankone.Progress
	// Elapsed is the time since the call began.
	Elapsed time.Duration
}

// Member is one member's outcome.
type Member struct {
	Name   string
	Result rankone.Result
	// Err is the member's error; context errors caused by Certify's own
	// stop (gap reached, budget) are not kept here.
	Err error
	// Stopped reports that Certify stopped the member early because the
	// interval had met the gap (its Result is still valid).
	Stopped bool
	// Skipped, when not empty, says why a bound of the ladder did not run
	// (the gap was met, the time left was less than its predicted cost, or
	// a stronger bound fitted); its Result is then the trivial one.
	Skipped string
}

// InputSpan is the certified interval for the span V of the matrices as
// given, derived from the stored basis's interval (see
// subspace.InputDistance).
type InputSpan struct {
	// Proven reports whether Distance, Lower and Upper hold; when false,
	// Note says why the interval holds for the stored basis only.
	Proven bool
	// Distance is θ ≥ ‖P_V − P_W‖₂, proven.
	Distance float64
	// Lower and Upper bound V's d*: [Report.Lower − θ, Report.Upper + θ],
	// rounded outward and kept in [0, 1].
	Lower, Upper float64
	Note         string
}

// Report is the outcome of Certify.
type Report struct {
	// Lower ≤ d* ≤ Upper, certified for the stored basis.
	Lower, Upper float64
	// ValueLower ≤ h* ≤ ValueUpper, the same interval on h* = 1 − d*².
	ValueLower, ValueUpper float64
	// Gap is a certified upper bound on (ValueUpper − ValueLower)/ValueUpper.
	Gap float64
	// X and Y are the witness: unit vectors with dist_F(X Yᵀ, W) ≤ Upper.
	// For a complex subspace they are the real coordinates (re, im) of the
	// complex witness XC, YC.
	X, Y []float64
	// Field is the subspace's field; for Complex, XC and YC are the
	// witness (unit vectors of C^m and C^n with dist_F(XC YCᵀ, W) ≤ Upper)
	// and Lower, Upper bound the complex distance.
	Field  subspace.Field
	XC, YC []complex128
	// FoundBy names the member whose witness gave Upper; LowerBy names the
	// argument that proved Lower ("" when Lower is 0).
	FoundBy, LowerBy string
	// Stop says why the call returned.
	Stop Stop
	// Members are the members' outcomes, in plan order. For a complex
	// subspace their Lower and Upper are translated to the complex distance
	// (their witnesses stay in the real coordinates X = (re x, im x)).
	Members []Member
	// Input is the interval for the input's span (CertifyBasis and
	// CertifyFile; nil from Certify).
	Input *InputSpan
	// Proof is the re-checkable proof (Options.Proof), or nil; ProofError
	// says why none could be built.
	Proof      *proof.Proof
	ProofError error
	// Elapsed is the time of the search.
	Elapsed time.Duration
}
