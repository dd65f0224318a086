// Command certify finds the rank-one matrix nearest to a subspace of m×n
// matrices and prints a certified interval on its distance. It is a thin
// front end to segre.CertifyBasis: flags, reading, printing.
//
//	go run ./examples/certify [flags] [FILE] [flags]
//
// FILE is a basis in NumPy .npy format (shape (r, m, n) or (m, n)) or in the
// plain-text format described in the README. Without FILE it runs on an
// embedded demo subspace. Bad input gives a one-line message on stderr and
// exit status 2; the other exit statuses are listed in usage.
package main

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"flag"
	"fmt"
	"io"
	"math"
	"os"
	"os/signal"
	"runtime/debug"
	"strconv"
	"strings"
	"time"

	"github.com/segre-lab/segre"
	"github.com/segre-lab/segre/internal/accurate"
	"github.com/segre-lab/segre/internal/cli"
	"github.com/segre-lab/segre/proof"
	"github.com/segre-lab/segre/subspace"
)

// Exit codes: what a script can rely on.
const (
	exitCertified   = 0   // the certified interval met the requested gap
	exitInternal    = 1   // an unexpected failure (not the input's fault)
	exitBadInput    = 2   // bad flags or a bad input file: one line on stderr
	exitBudget      = 3   // the budget ran out before the gap was met
	exitNothingMore = 4   // every strategy finished without meeting the gap
	exitInterrupted = 130 // interrupted (Ctrl-C), as shells report SIGINT
)

func main() {
	// Memory: the input, the stored basis and the searches' operators are
	// large and long-lived, and the garbage collector's default lets the
	// heap grow to twice what is live before it collects. A quarter
	// (measured on 256 matrices of 64×64: peak 36.6 MB with the default,
	// 26.2 MB with 25, the input being 8.4 MB) keeps the peak near what is
	// live; the search allocates little, so the cost in time is small.
	debug.SetGCPercent(25)
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
	field    string // "auto", "real" or "complex"
	dims     [2]int // -dims m,n: reshape r vectors of length m·n (0: off)
	proof    string // -proof FILE: write a re-checkable proof there
	shard    [2]int // -shard i/N: run part i of N of branch-and-bound (N = 0: off)
	timeSet  bool   // -time was given (with -shard, no budget otherwise)
	file     string
}

const usage = `usage: certify [flags] [FILE]
FILE is a basis: .npy of shape (r, m, n) or (m, n), or plain text; without
FILE the embedded demo runs. Flags may come before or after FILE.
Exit status: 0 certified to the gap, 3 budget spent first, 4 nothing more
to try, 2 bad input, 130 interrupted, 1 internal failure.
With -shard i/N -proof FILE: prove part i of N of branch-and-bound and write
the part proof (exit 0 part done to the gap, 3 its budget ran out, the part
proof written all the same); merge the N parts with examples/recheck merge.
Flags:`

func newFlags(c *config) *flag.FlagSet {
	fs := flag.NewFlagSet("certify", flag.ContinueOnError)
	fs.SetOutput(io.Discard)
	fs.DurationVar(&c.budget, "time", 3*time.Second, "time budget for the search, e.g. 500ms, 10s, 2m")
	fs.BoolVar(&c.asJSON, "json", false, "print one JSON object on stdout")
	fs.BoolVar(&c.progress, "progress", false, "show progress on stderr even with -json")
	fs.BoolVar(&c.quiet, "quiet", false, "no progress on stderr")
	fs.Uint64Var(&c.seed, "seed", 1, "seed of the random starts")
	fs.IntVar(&c.starts, "starts", 32, "starting points per local method")
	fs.Float64Var(&c.tol, "tol", 0, "rank tolerance (0: max(mn, r)·2^-52)")
	fs.Int64Var(&c.maxBytes, "maxbytes", 0, "memory limit in bytes for reading and orthonormalising (0: 4 GiB)")
	fs.Float64Var(&c.gap, "gap", 1e-6, "requested relative gap on h*: the search stops when the certified interval meets it")
	fs.StringVar(&c.proof, "proof", "", "write a re-checkable proof of the interval to this file (zip; check it with examples/recheck)")
	fs.Func("shard", "i/N: prove part i (0 ≤ i < N) of a partition of branch-and-bound's initial cells into N parts, write it to -proof (merge the N parts with: recheck merge); -time is then the part's budget, none unless given", func(s string) error {
		var i, n int
		var rest string
		if k, _ := fmt.Sscanf(s, "%d/%d%s", &i, &n, &rest); k != 2 || n < 1 || i < 0 || i >= n || n > maxShards {
			return fmt.Errorf("want i/N with 0 ≤ i < N ≤ %d, got %q", maxShards, s)
		}
		c.shard = [2]int{i, n}
		return nil
	})
	fs.StringVar(&c.field, "field", "auto", "field of the problem: auto (complex data over C, real data over R), real, or complex (real data over C)")
	fs.Func("dims", "m,n: FILE holds r vectors of length m·n (one r×(m·n) array), each the row-major m×n matrix of a state on C^m⊗C^n or R^m⊗R^n", func(s string) error {
		var m, n int
		if k, err := fmt.Sscanf(s, "%d,%d", &m, &n); err != nil || k != 2 || m < 1 || n < 1 {
			return fmt.Errorf("want two positive integers m,n, got %q", s)
		}
		c.dims = [2]int{m, n}
		return nil
	})
	return fs
}

func parse(args []string, stderr io.Writer) (config, int, bool) {
	var c config
	fs := newFlags(&c)
	bad := func(format string, a ...any) (config, int, bool) {
		fmt.Fprintf(stderr, "certify: "+format+"\n", a...)
		return c, exitBadInput, false
	}
	files, err := cli.Parse(fs, args) // flags may follow FILE
	if err != nil {
		if errors.Is(err, flag.ErrHelp) {
			fmt.Fprintln(stderr, usage)
			fs.SetOutput(stderr)
			fs.PrintDefaults()
			return c, 0, false
		}
		return bad("%s%s", err, durationHint(err, args))
	}
	switch {
	case c.budget <= 0:
		return bad("-time must be positive, got %v", c.budget)
	case c.starts < 1 || c.starts > 1_000_000:
		return bad("-starts must be between 1 and 1000000, got %d", c.starts)
	case c.tol < 0 || c.tol >= 1 || math.IsNaN(c.tol):
		return bad("-tol must be in [0, 1), got %v", c.tol)
	case !(c.gap > 0 && c.gap < 1):
		return bad("-gap must be in (0, 1), got %v", c.gap)
	case c.maxBytes < 0:
		return bad("-maxbytes must not be negative, got %d", c.maxBytes)
	case c.field != "auto" && c.field != "real" && c.field != "complex":
		return bad("-field must be auto, real or complex, got %q", c.field)
	case c.dims != [2]int{} && len(files) == 0:
		return bad("-dims needs a FILE")
	case len(files) > 1:
		return bad("at most one FILE, got %d: %s", len(files), strings.Join(files, ", "))
	case c.shard[1] > 0 && c.proof == "":
		return bad("-shard needs -proof FILE (the part proof to write)")
	case c.shard[1] > 0 && c.field == "complex":
		return bad("-shard: proofs of complex subspaces are not supported yet")
	}
	fs.Visit(func(f *flag.Flag) { c.timeSet = c.timeSet || f.Name == "time" })
	if len(files) == 1 {
		c.file = files[0]
	}
	return c, 0, true
}

// durationHint suggests a unit when -time was given a bare number.
func durationHint(err error, args []string) string {
	if !strings.Contains(err.Error(), "-time") {
		return ""
	}
	for i, a := range args {
		v := a
		if strings.HasPrefix(a, "-time=") || strings.HasPrefix(a, "--time=") {
			v = a[strings.IndexByte(a, '=')+1:]
		} else if (a == "-time" || a == "--time") && i+1 < len(args) {
			v = args[i+1]
		} else {
			continue
		}
		if _, ferr := strconv.ParseFloat(v, 64); ferr == nil {
			return fmt.Sprintf(" (a duration needs a unit: -time %ss)", v)
		}
	}
	return ""
}

func run(args []string, stdout, stderr io.Writer) int {
	c, code, ok := parse(args, stderr)
	if !ok {
		return code
	}
	in := subspace.Input{Field: subspace.Real, Real: demoBasis()}
	source := "demo: " + demoTitle
	if c.file != "" {
		var err error
		in, err = subspace.ReadInput(c.file, c.maxBytes)
		if err == nil && c.dims != [2]int{} {
			in, err = reshape(in, c.dims[0], c.dims[1])
		}
		if err == nil && c.field == "real" && in.Field == subspace.Complex {
			err = fmt.Errorf("%s: complex data, but -field real", c.file)
		}
		if err != nil {
			fmt.Fprintf(stderr, "certify: %s\n", oneLine(err))
			return exitBadInput
		}
		source = c.file
	}
	// Interrupt (Ctrl-C) stops every phase; -time budgets the search.
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt)
	defer stop()
	if c.shard[1] > 0 {
		return runShard(ctx, c, in, source, stdout, stderr)
	}
	opt := segre.Options{Budget: c.budget, Gap: c.gap, Starts: c.starts, Seed: c.seed,
		Subspace: subspace.Options{RankTol: c.tol, MaxBytes: c.maxBytes}, Proof: c.proof != ""}
	var pr *progressLine
	if !c.quiet && (!c.asJSON || c.progress) {
		pr = &progressLine{out: stderr}
		opt.Progress = pr.show
	}
	var w *subspace.Subspace
	var rep segre.Report
	var err error
	if in.Field == subspace.Complex || c.field == "complex" {
		w, rep, err = segre.CertifyComplex(ctx, in.AsComplex(), opt)
	} else {
		if c.file != "" {
			// The numbers read are ours: let the orthonormalisation work in
			// them, and read the file again (checked against what was read)
			// where the input is needed afterwards. A file that cannot be
			// read a matrix at a time (text, Fortran order) is copied.
			if reload, closeFile, rerr := subspace.ReloadNPY(c.file, in.Real); rerr == nil {
				defer closeFile()
				opt.Subspace.Reload = reload
			}
		}
		w, rep, err = segre.CertifyBasis(ctx, in.Real, opt)
	}
	if err == nil && c.proof != "" {
		if perr := writeProof(c.proof, c.file, rep); perr != nil {
			fmt.Fprintf(stderr, "certify: proof: %s\n", oneLine(perr))
			return exitInternal
		}
	}
	pr.end()
	if err != nil {
		fmt.Fprintf(stderr, "certify: %s\n", oneLine(err))
		switch {
		case ctx.Err() != nil:
			return exitInterrupted
		case w == nil:
			return exitBadInput // refused by the orthonormalisation
		}
		return exitInternal
	}
	if c.asJSON {
		if err := writeJSON(stdout, w, rep, source); err != nil {
			fmt.Fprintf(stderr, "certify: %v\n", err)
			return exitInternal
		}
	} else {
		writeText(stdout, w, rep, source)
	}
	switch rep.Stop {
	case segre.GapReached:
		return exitCertified
	case segre.BudgetSpent:
		return exitBudget
	case segre.NothingMore:
		return exitNothingMore
	}
	return exitInterrupted
}

// progressLine shows the phases and, while the search runs, the merged
// certified interval with the latest member's counters, on one line of
// stderr rewritten in place.
type progressLine struct {
	out     io.Writer
	printed bool
}

func (p *progressLine) show(g segre.Progress) {
	switch g.Phase {
	case segre.Done:
		return
	case segre.Searching:
		if g.Elapsed < time.Second {
			return
		}
	}
	line := fmt.Sprintf("%6.1fs  %s", g.Elapsed.Seconds(), g.Phase)
	if g.Phase == segre.Searching {
		line = fmt.Sprintf("%6.1fs  distance in [%s, %s]", g.Elapsed.Seconds(), down(g.Lower, 6), up(g.Upper, 6))
		if m := g.Member; m.Searcher != "" {
			line += "  " + m.Searcher
			switch {
			case m.Nodes > 0:
				line += fmt.Sprintf(": %d cells, %d waiting", m.Nodes, m.Frontier)
			case m.Starts > 0:
				line += fmt.Sprintf(": %d starts", m.Starts)
			case m.Iteration > 0:
				line += fmt.Sprintf(": iteration %d", m.Iteration)
			}
		}
	}
	fmt.Fprintf(p.out, "\r%-90s", line)
	p.printed = true
}

func (p *progressLine) end() {
	if p != nil && p.printed {
		fmt.Fprintln(p.out)
	}
}

// reshape reads a file of one r×(m·n) matrix as r matrices of m×n (-dims).
func reshape(in subspace.Input, m, n int) (subspace.Input, error) {
	rows, cols := in.Real.Rows, in.Real.Cols
	count := in.Real.Count
	if in.Field == subspace.Complex {
		rows, cols, count = in.Complex.Rows, in.Complex.Cols, in.Complex.Count
	}
	if count != 1 || cols != m*n {
		return in, fmt.Errorf("%w: -dims %d,%d wants one array of r rows of length %d, the file holds %d matrices of %d×%d",
			subspace.ErrShape, m, n, m*n, count, rows, cols)
	}
	if in.Field == subspace.Complex {
		in.Complex.Count, in.Complex.Rows, in.Complex.Cols = rows, m, n
	} else {
		in.Real.Count, in.Real.Rows, in.Real.Cols = rows, m, n
	}
	return in, nil
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
	Stopped bool   `json:"stopped"`
	Skipped string `json:"skipped,omitempty"`
	Error   string `json:"error,omitempty"`
	Seconds number `json:"seconds"`
}

type jsonOut struct {
	Source           string         `json:"source"`
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
	InputLower       *number        `json:"input_lower"`
	InputUpper       *number        `json:"input_upper"`
	InputDistance    *number        `json:"input_distance"`
	InputNote        string         `json:"input_note,omitempty"`
	Field            string         `json:"field"`
	X                any            `json:"x"`
	Y                any            `json:"y"`
	FoundBy          string         `json:"found_by"`
	LowerBy          string         `json:"lower_by"`
	Status           string         `json:"status"`
	Seconds          number         `json:"seconds"`
	Searchers        []jsonSearcher `json:"searchers"`
}

func writeJSON(stdout io.Writer, w *subspace.Subspace, rep segre.Report, source string) error {
	given, _ := w.Inputs()
	rec, _ := w.BackwardError()
	out := jsonOut{Source: source, Rows: w.Rows(), Cols: w.Cols(), Inputs: given, Dim: w.Dim(), Tol: number(w.RankTol()),
		StoresComplement: w.StoresComplement(), Reconstruction: number(rec), Orthogonality: number(w.OrthogonalityBound()),
		Lower: number(rep.Lower), Upper: number(rep.Upper), ValueLower: number(rep.ValueLower), ValueUpper: number(rep.ValueUpper),
		Gap: number(rep.Gap), Field: rep.Field.String(), X: rep.X, Y: rep.Y,
		FoundBy: rep.FoundBy, LowerBy: rep.LowerBy, Status: rep.Stop.String(), Seconds: number(rep.Elapsed.Seconds())}
	if rep.Field == subspace.Complex {
		out.X, out.Y = pairs(rep.XC), pairs(rep.YC)
	}
	if in := rep.Input; in != nil && in.Proven {
		l, u, th := number(in.Lower), number(in.Upper), number(in.Distance)
		out.InputLower, out.InputUpper, out.InputDistance = &l, &u, &th
	} else if in != nil {
		out.InputNote = in.Note
	}
	for _, m := range rep.Members {
		js := jsonSearcher{Name: m.Name, Lower: number(m.Result.Lower), Upper: number(m.Result.Upper),
			Status: m.Result.Status.String(), Stopped: m.Stopped, Skipped: m.Skipped, Seconds: number(m.Result.Elapsed.Seconds())}
		if m.Err != nil {
			js.Error = oneLine(m.Err)
		}
		out.Searchers = append(out.Searchers, js)
	}
	enc := json.NewEncoder(stdout)
	enc.SetIndent("", "  ")
	return enc.Encode(out)
}

// pairs writes complex numbers as [re, im] pairs for JSON.
func pairs(v []complex128) [][2]float64 {
	out := make([][2]float64, len(v))
	for i, z := range v {
		out[i] = [2]float64{real(z), imag(z)}
	}
	return out
}

func writeText(out io.Writer, w *subspace.Subspace, rep segre.Report, source string) {
	given, zeros := w.Inputs()
	rec, orth := w.BackwardError()
	stored := "W"
	if w.StoresComplement() {
		stored = "its orthogonal complement"
	}
	fmt.Fprintf(out, "input      %s\n", source)
	m, n := w.ComplexShape()
	field := "real"
	if w.Field() == subspace.Complex {
		field = "complex"
	}
	fmt.Fprintf(out, "subspace   %d %s matrices of %d×%d", given, field, m, n)
	if zeros > 0 {
		fmt.Fprintf(out, " (%d zero)", zeros)
	}
	fmt.Fprintf(out, ", numerical dimension %d (rank tolerance %.2g), stored as %s\n", w.ComplexDim(), w.RankTol(), stored)
	fmt.Fprintf(out, "basis      reconstruction error %.2g, orthogonality %.2g (proven bound %s)\n", rec, orth, up(w.OrthogonalityBound(), 2))
	fmt.Fprintf(out, "distance   d* in [%s, %s]   (certified, for the stored basis)\n", down(rep.Lower, 10), up(rep.Upper, 10))
	if in := rep.Input; in != nil && in.Proven {
		fmt.Fprintf(out, "input span d* in [%s, %s]   (certified for the span of the matrices as given: the stored basis is within %s of it)\n",
			down(in.Lower, 10), up(in.Upper, 10), up(in.Distance, 2))
	} else if in != nil {
		fmt.Fprintf(out, "input span %s\n", in.Note)
	}
	fmt.Fprintf(out, "value      h* in [%s, %s]   (h = ‖P_W(x yᵀ)‖², h* = 1 − d*²), relative gap %s\n",
		down(rep.ValueLower, 10), up(rep.ValueUpper, 10), up(rep.Gap, 2))
	if rep.Field == subspace.Complex {
		fmt.Fprintf(out, "witness    x = %s\n", cvecString(rep.XC))
		fmt.Fprintf(out, "           y = %s\n", cvecString(rep.YC))
		fmt.Fprintf(out, "           (complex, unit; x yᵀ without conjugation: vec(x yᵀ) = x⊗y)\n")
	} else {
		fmt.Fprintf(out, "witness    x = %s\n", vecString(rep.X))
		fmt.Fprintf(out, "           y = %s\n", vecString(rep.Y))
	}
	fmt.Fprintf(out, "found by   %s\n", rep.FoundBy)
	lb := rep.LowerBy
	if lb == "" {
		lb = "nothing (no strategy proved d* > 0)"
	}
	fmt.Fprintf(out, "lower by   %s\n", lb)
	fmt.Fprintf(out, "stopped    %s after %.3gs\n", rep.Stop, rep.Elapsed.Seconds())
	fmt.Fprintf(out, "\n%-28s %14s %14s %16s %9s\n", "strategy", "lower", "upper", "status", "seconds")
	for _, m := range rep.Members {
		if m.Skipped != "" {
			continue // listed below: it proved nothing and found nothing
		}
		st := m.Result.Status.String()
		switch {
		case m.Err != nil:
			st = "failed"
		case m.Stopped:
			st = "stopped at gap"
		}
		fmt.Fprintf(out, "%-28s %14s %14s %16s %9.3f\n", m.Name, down(m.Result.Lower, 8), up(m.Result.Upper, 8), st, m.Result.Elapsed.Seconds())
	}
	// Notes: failures, then the bounds not run, grouped by reason.
	var notes []string
	var reasons []string
	byReason := map[string][]string{}
	for _, m := range rep.Members {
		if m.Err != nil {
			notes = append(notes, fmt.Sprintf("%s failed: %s", m.Name, oneLine(m.Err)))
		}
		if m.Skipped != "" {
			if byReason[m.Skipped] == nil {
				reasons = append(reasons, m.Skipped)
			}
			byReason[m.Skipped] = append(byReason[m.Skipped], m.Name)
		}
	}
	for _, r := range reasons {
		notes = append(notes, fmt.Sprintf("not run (%s): %s", strings.TrimPrefix(r, "not started: "), strings.Join(byReason[r], ", ")))
	}
	if len(notes) > 0 {
		fmt.Fprintf(out, "\n%s\n", strings.Join(notes, "\n"))
	}
}

// down and up print a certified lower or upper end with the given number of
// significant digits, rounded outward so that the printed number is still a
// bound (a %g would round to nearest and could cross the true value).
func down(v float64, digits int) string { return accurate.FormatDown(v, digits) }
func up(v float64, digits int) string   { return accurate.FormatUp(v, digits) }

func vecString(v []float64) string {
	return listString(len(v), 8, 6, func(i int) string { return fmt.Sprintf("%.6f", v[i]) })
}

func cvecString(v []complex128) string {
	return listString(len(v), 6, 4, func(i int) string { return fmt.Sprintf("%.5f%+.5fi", real(v[i]), imag(v[i])) })
}

// listString writes n entries as "[e0 e1 …]", all of them when n ≤ all,
// else the first keep and how many more.
func listString(n, all, keep int, entry func(i int) string) string {
	var b strings.Builder
	b.WriteString("[")
	show := n
	if n > all {
		show = keep
	}
	for i := 0; i < show; i++ {
		if i > 0 {
			b.WriteString(" ")
		}
		b.WriteString(entry(i))
	}
	if n > all {
		fmt.Fprintf(&b, " … (%d more)", n-keep)
	}
	b.WriteString("]")
	return b.String()
}

// writeProof writes rep.Proof to path atomically (a temporary file in the
// same folder, synced, then renamed), with the input file's SHA-256.
func writeProof(path, input string, rep segre.Report) error {
	if rep.Proof == nil {
		if rep.ProofError != nil {
			return rep.ProofError
		}
		return fmt.Errorf("no proof was built")
	}
	if input != "" {
		// Streamed: the file may be as large as the input array.
		f, err := os.Open(input)
		if err != nil {
			return err
		}
		h := sha256.New()
		_, err = io.Copy(h, f)
		f.Close()
		if err != nil {
			return err
		}
		rep.Proof.File.InputSHA256 = hex.EncodeToString(h.Sum(nil))
	}
	return proof.WriteFile(path, rep.Proof)
}
