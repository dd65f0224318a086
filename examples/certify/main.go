// Command certify finds the rank-one matrix nearest to a subspace of m×n
// matrices and prints a certified interval on its distance.
//
//	go run ./examples/certify [flags] [FILE]
//
// FILE is a basis in NumPy .npy format (shape (r, m, n)) or in the plain-text
// format described in the README. Without FILE it runs on an embedded demo
// subspace. Bad input gives a one-line message on stderr and exit status 2.
package main

import (
	"context"
	"encoding/json"
	"errors"
	"flag"
	"fmt"
	"io"
	"math"
	"os"
	"os/signal"
	"strings"
	"time"

	"github.com/segre-lab/segre/internal/accurate"
	"github.com/segre-lab/segre/net"
	"github.com/segre-lab/segre/rankone"
	"github.com/segre-lab/segre/sos"
	"github.com/segre-lab/segre/subspace"
)

// maxBranchBoundSide is the largest min(m, n) for which the command runs
// branch-and-bound (measured: min(m, n) = 4, max 64 certifies a 1e-6 gap in
// about a minute; each extra dimension multiplies the cells by far more).
const maxBranchBoundSide = 5

// maxSOSSize is the largest m·n for which the command runs the level-one
// sum-of-squares relaxation.
const maxSOSSize = 64

func main() {
	os.Exit(run(os.Args[1:], os.Stdout, os.Stderr))
}

type config struct {
	budget   time.Duration
	asJSON   bool
	progress bool
	quiet    bool
	seed     uint64
	starts   int
	tol      float64
	maxBytes int64
	gap      float64
	file     string
}

func parse(args []string, stderr io.Writer) (config, int, bool) {
	var c config
	fs := flag.NewFlagSet("certify", flag.ContinueOnError)
	fs.SetOutput(io.Discard)
	fs.DurationVar(&c.budget, "time", 3*time.Second, "time budget for the search")
	fs.BoolVar(&c.asJSON, "json", false, "print one JSON object on stdout")
	fs.BoolVar(&c.progress, "progress", false, "show progress on stderr even with -json")
	fs.BoolVar(&c.quiet, "quiet", false, "no progress on stderr")
	fs.Uint64Var(&c.seed, "seed", 1, "seed of the random starts")
	fs.IntVar(&c.starts, "starts", 32, "starting points per local method")
	fs.Float64Var(&c.tol, "tol", 0, "rank tolerance (0: max(mn, r)·2^-52)")
	fs.Int64Var(&c.maxBytes, "maxbytes", 0, "memory limit in bytes for the basis (0: 4 GiB)")
	fs.Float64Var(&c.gap, "gap", 1e-6, "relative gap on h* at which branch-and-bound stops")
	if err := fs.Parse(args); err != nil {
		if errors.Is(err, flag.ErrHelp) {
			fmt.Fprintln(stderr, "usage: certify [flags] [FILE]   (FILE: .npy of shape (r, m, n) or plain text; none: the demo)")
			fs.SetOutput(stderr)
			fs.PrintDefaults()
			return c, 0, false
		}
		fmt.Fprintf(stderr, "certify: %v\n", err)
		return c, 2, false
	}
	switch {
	case c.budget <= 0:
		fmt.Fprintf(stderr, "certify: -time must be positive, got %v\n", c.budget)
		return c, 2, false
	case c.starts < 1 || c.starts > 1_000_000:
		fmt.Fprintf(stderr, "certify: -starts must be between 1 and 1000000, got %d\n", c.starts)
		return c, 2, false
	case c.tol < 0 || c.tol >= 1 || math.IsNaN(c.tol):
		fmt.Fprintf(stderr, "certify: -tol must be in [0, 1), got %v\n", c.tol)
		return c, 2, false
	case !(c.gap > 0 && c.gap < 1):
		fmt.Fprintf(stderr, "certify: -gap must be in (0, 1), got %v\n", c.gap)
		return c, 2, false
	case c.maxBytes < 0:
		fmt.Fprintf(stderr, "certify: -maxbytes must not be negative, got %d\n", c.maxBytes)
		return c, 2, false
	case fs.NArg() > 1:
		fmt.Fprintf(stderr, "certify: at most one FILE, got %d arguments\n", fs.NArg())
		return c, 2, false
	}
	if fs.NArg() == 1 {
		c.file = fs.Arg(0)
	}
	return c, 0, true
}

func run(args []string, stdout, stderr io.Writer) int {
	c, code, ok := parse(args, stderr)
	if !ok {
		return code
	}
	var b subspace.Basis
	source := "demo: " + demoTitle
	if c.file == "" {
		b = demoBasis()
	} else {
		var err error
		b, err = subspace.ReadFile(c.file, c.maxBytes)
		if err != nil {
			fmt.Fprintf(stderr, "certify: %s\n", oneLine(err))
			return 2
		}
		source = c.file
	}
	// Interrupt (Ctrl-C) stops the orthonormalisation too; -time budgets
	// the search that follows it.
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt)
	defer stop()
	w, err := subspace.NewContext(ctx, b, subspace.Options{Tol: c.tol, MaxBytes: c.maxBytes})
	if err != nil {
		fmt.Fprintf(stderr, "certify: %s\n", oneLine(err))
		if ctx.Err() != nil {
			return 1 // interrupted, not bad input
		}
		return 2
	}
	span := inputSpan(ctx, b, w)
	showProgress := !c.quiet && (!c.asJSON || c.progress)
	start := time.Now()
	members := []rankone.Searcher{
		rankone.Flattening{},
		&rankone.MultiStart{Method: &rankone.TrustRegion{}, Starts: c.starts, Seed: c.seed, Workers: 1},
		&rankone.MultiStart{Method: &rankone.ALS{}, Starts: c.starts, Seed: c.seed + 1, Workers: 1},
		&rankone.MultiStart{Method: &rankone.Power{}, Starts: c.starts, Seed: c.seed + 2, Workers: 1},
	}
	// Branch-and-bound proves the global optimum when the smaller side is
	// small; its bounds are valid whenever the budget stops it, so it joins
	// whenever its cells stay cheap (see the README for the measurements).
	if min(w.Rows(), w.Cols()) <= maxBranchBoundSide {
		members = append(members, &net.BranchBound{Gap: c.gap})
	}
	// The level-one sum-of-squares bound joins when its SDP is small
	// (measured: m·n = 64 solves in about 2 s, m·n = 100 in about 17 s).
	if w.Rows()*w.Cols() <= maxSOSSize {
		members = append(members, &sos.Bound{})
	}
	p := &rankone.Portfolio{Budget: c.budget, Members: members}
	printed := false
	if showProgress {
		p.Progress = func(pr rankone.Progress) {
			if time.Since(start) < time.Second {
				return
			}
			fmt.Fprintf(stderr, "\r%6.1fs  distance in [%s, %s]   ", time.Since(start).Seconds(), down(pr.Lower, 6), up(pr.Upper, 6))
			printed = true
		}
	}
	res, entries, err := p.SearchEach(ctx, w)
	if printed {
		fmt.Fprintln(stderr)
	}
	if err != nil && !errors.Is(err, context.Canceled) {
		fmt.Fprintf(stderr, "certify: %s\n", oneLine(err))
		return 1
	}
	if c.asJSON {
		return writeJSON(stdout, stderr, w, res, entries, source, span)
	}
	writeText(stdout, w, res, entries, source, span)
	return 0
}

// spanInfo says how the certified interval, proven for the stored basis,
// carries over to the span of the matrices as given.
type spanInfo struct {
	theta float64 // proven ‖P_V − P_W‖₂ (valid when ok)
	ok    bool
	note  string // why it holds for the stored basis only, when !ok
}

// inputSpan proves the distance between the input's span and the stored
// subspace (subspace.InputDistance) or says why it cannot.
func inputSpan(ctx context.Context, b subspace.Basis, w *subspace.Subspace) spanInfo {
	th, err := subspace.InputDistance(ctx, b, w)
	switch {
	case err == nil:
		return spanInfo{theta: th, ok: true}
	case errors.Is(err, subspace.ErrDependent):
		kept, left := w.RankGap()
		return spanInfo{note: fmt.Sprintf("the input matrices are numerically dependent (rank %d at tolerance %.2g; last pivot kept %.2g, first left out %.2g): the interval holds for the stored basis only",
			w.Dim(), w.Tol(), kept, left)}
	default:
		return spanInfo{note: "not proven (" + oneLine(err) + "): the interval holds for the stored basis only"}
	}
}

// widen returns [lo − θ, up + θ] rounded outward, within [0, 1].
func (s spanInfo) widen(lo, up float64) (float64, float64) {
	l := accurate.Down(lo - s.theta)
	return math.Max(l, 0), math.Min(1, accurate.Up(up+s.theta))
}

func oneLine(err error) string {
	return strings.ReplaceAll(err.Error(), "\n", " ")
}

// number is a float64 that encodes as JSON null when it is NaN or ±Inf
// (JSON has no such numbers; an infinite bound means nothing was proven).
type number float64

// MarshalJSON implements json.Marshaler.
func (v number) MarshalJSON() ([]byte, error) {
	f := float64(v)
	if math.IsNaN(f) || math.IsInf(f, 0) {
		return []byte("null"), nil
	}
	return json.Marshal(f)
}

type jsonSearcher struct {
	Name    string `json:"name"`
	Lower   number `json:"lower"`
	Upper   number `json:"upper"`
	Status  string `json:"status"`
	Seconds number `json:"seconds"`
}

type jsonOut struct {
	Source           string         `json:"source"`
	InputLower       *number        `json:"input_lower"`
	InputUpper       *number        `json:"input_upper"`
	InputDistance    *number        `json:"input_distance"`
	InputNote        string         `json:"input_note,omitempty"`
	Rows             int            `json:"rows"`
	Cols             int            `json:"cols"`
	Inputs           int            `json:"inputs"`
	Dim              int            `json:"dim"`
	Tol              number         `json:"tol"`
	StoresComplement bool           `json:"stores_complement"`
	Reconstruction   number         `json:"reconstruction_error"`
	Orthogonality    number         `json:"orthogonality_bound"`
	Lower            number         `json:"lower"`
	Upper            number         `json:"upper"`
	ValueLower       number         `json:"value_lower"`
	ValueUpper       number         `json:"value_upper"`
	Gap              number         `json:"gap"`
	X                []float64      `json:"x"`
	Y                []float64      `json:"y"`
	FoundBy          string         `json:"found_by"`
	LowerBy          string         `json:"lower_by"`
	Status           string         `json:"status"`
	Seconds          number         `json:"seconds"`
	Searchers        []jsonSearcher `json:"searchers"`
}

func writeJSON(stdout, stderr io.Writer, w *subspace.Subspace, res rankone.Result, entries []rankone.Entry, source string, span spanInfo) int {
	given, _ := w.Inputs()
	rec, _ := w.BackwardError()
	vlo, vhi := res.ValueBounds()
	out := jsonOut{Source: source, Rows: w.Rows(), Cols: w.Cols(), Inputs: given, Dim: w.Dim(), Tol: number(w.Tol()),
		StoresComplement: w.StoresComplement(), Reconstruction: number(rec), Orthogonality: number(w.OrthogonalityBound()),
		Lower: number(res.Lower), Upper: number(res.Upper), ValueLower: number(vlo), ValueUpper: number(vhi),
		Gap: number(relGap(vlo, vhi)), X: res.X, Y: res.Y,
		FoundBy: res.FoundBy, LowerBy: res.LowerBy, Status: res.Status.String(), Seconds: number(res.Elapsed.Seconds())}
	if span.ok {
		lo, up := span.widen(res.Lower, res.Upper)
		l, u, th := number(lo), number(up), number(span.theta)
		out.InputLower, out.InputUpper, out.InputDistance = &l, &u, &th
	} else {
		out.InputNote = span.note
	}
	for _, e := range entries {
		out.Searchers = append(out.Searchers, jsonSearcher{Name: e.Name, Lower: number(e.Result.Lower), Upper: number(e.Result.Upper),
			Status: e.Result.Status.String(), Seconds: number(e.Result.Elapsed.Seconds())})
	}
	enc := json.NewEncoder(stdout)
	enc.SetIndent("", "  ")
	if err := enc.Encode(out); err != nil {
		fmt.Fprintf(stderr, "certify: %v\n", err)
		return 1
	}
	return 0
}

func writeText(out io.Writer, w *subspace.Subspace, res rankone.Result, entries []rankone.Entry, source string, span spanInfo) {
	given, zeros := w.Inputs()
	rec, orth := w.BackwardError()
	stored := "W"
	if w.StoresComplement() {
		stored = "its orthogonal complement"
	}
	fmt.Fprintf(out, "input      %s\n", source)
	fmt.Fprintf(out, "subspace   %d matrices of %d×%d", given, w.Rows(), w.Cols())
	if zeros > 0 {
		fmt.Fprintf(out, " (%d zero)", zeros)
	}
	fmt.Fprintf(out, ", numerical dimension %d (rank tolerance %.2g), stored as %s\n", w.Dim(), w.Tol(), stored)
	fmt.Fprintf(out, "basis      reconstruction error %.2g, orthogonality %.2g (proven bound %.2g)\n", rec, orth, w.OrthogonalityBound())
	vlo, vhi := res.ValueBounds()
	fmt.Fprintf(out, "distance   d* in [%s, %s]   (certified, for the stored basis)\n", down(res.Lower, 10), up(res.Upper, 10))
	if span.ok {
		lo, hi := span.widen(res.Lower, res.Upper)
		fmt.Fprintf(out, "input span d* in [%s, %s]   (certified for the span of the matrices as given: the stored basis is within %s of it)\n",
			down(lo, 10), up(hi, 10), up(span.theta, 2))
	} else {
		fmt.Fprintf(out, "input span %s\n", span.note)
	}
	fmt.Fprintf(out, "value      h* in [%s, %s]   (h = ‖P_W(x yᵀ)‖², h* = 1 − d*²), relative gap %s\n", down(vlo, 10), up(vhi, 10), up(relGap(vlo, vhi), 2))
	fmt.Fprintf(out, "witness    x = %s\n", vecString(res.X))
	fmt.Fprintf(out, "           y = %s\n", vecString(res.Y))
	fmt.Fprintf(out, "found by   %s\n", res.FoundBy)
	lb := res.LowerBy
	if lb == "" {
		lb = "nothing (no strategy proved d* > 0)"
	}
	fmt.Fprintf(out, "lower by   %s\n", lb)
	fmt.Fprintf(out, "status     %s after %.3gs\n", res.Status, res.Elapsed.Seconds())
	fmt.Fprintf(out, "\n%-28s %14s %14s %14s %9s\n", "strategy", "lower", "upper", "status", "seconds")
	for _, e := range entries {
		fmt.Fprintf(out, "%-28s %14s %14s %14s %9.3f\n", e.Name, down(e.Result.Lower, 8), up(e.Result.Upper, 8), e.Result.Status, e.Result.Elapsed.Seconds())
	}
}

// relGap is an upper bound on (hi − lo)/hi, the certified relative gap on
// h* (each operation rounded upwards).
func relGap(lo, hi float64) float64 {
	if hi <= 0 {
		return 0
	}
	return accurate.Up(accurate.Up(hi-lo) / hi)
}

// down and up print a certified lower or upper end with the given number of
// significant digits, rounded outward so that the printed number is still a
// bound (a %g would round to nearest and could cross the true value).
func down(v float64, digits int) string { return accurate.FormatDown(v, digits) }
func up(v float64, digits int) string   { return accurate.FormatUp(v, digits) }

func vecString(v []float64) string {
	var b strings.Builder
	b.WriteString("[")
	show := v
	if len(v) > 8 {
		show = v[:6]
	}
	for i, x := range show {
		if i > 0 {
			b.WriteString(" ")
		}
		fmt.Fprintf(&b, "%.6f", x)
	}
	if len(v) > 8 {
		fmt.Fprintf(&b, " … (%d more)", len(v)-6)
	}
	b.WriteString("]")
	return b.String()
}
