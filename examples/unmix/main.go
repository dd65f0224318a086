// Command unmix fits a sum of rank-one terms (a CP decomposition)
// T ≈ Σ_s w_s · a_s⊗b_s⊗c_s, with unit vectors a_s, b_s, c_s and weights
// w_s > 0, to an m×n×p array T, through the rank-one points of the span of
// its slices (package rankone/cpd), and prints the terms and the relative
// fit error.
//
//	go run ./examples/unmix [flags] [FILE]
//
// FILE holds T as p slices of m×n, the layout of certify's basis files: a
// NumPy .npy array of shape (p, m, n) (or (m, n) for a single slice), or
// plain text "p m n" followed by the numbers, slice after slice, each row
// by row. Slice k is the matrix T[·][·][k]. The file is only read.
//
// -rank sets the number of terms r, 1 ≤ r ≤ min(m, n, p). Its default, 0,
// takes r from the numerical dimension of the slice span, which suits exact
// (noise-free) data only; measured data need -rank, which also marks them as
// noisy so that the fit is refined by alternating least squares. Without
// FILE it runs an invented demo: a tasting panel rates K = 12 blends of
// three "base syrups", each blend scored on I = 9 flavour notes by J = 7
// tasters; each base contributes (note profile) ⊗ (taster sensitivity) ⊗
// (amount in each blend), plus rating noise (-noise, demo only). The demo
// prints the recovered components beside the true ones (cosine similarity
// after matching).
//
// Exit status: 0 fitted (a refinement that stopped at its iteration cap is
// said so in the output), 1 the array could not be decomposed at this rank
// (the message says why), 2 bad flags or a bad FILE, 130 interrupted. Every
// error is one line on stderr starting with "unmix: ", with nothing on
// stdout.
package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
	"os"
	"os/signal"
	"sort"
	"strings"

	"gonum.org/v1/gonum/mat"

	"github.com/segre-lab/segre/internal/accurate"
	"github.com/segre-lab/segre/internal/cli"
	"github.com/segre-lab/segre/rankone/cpd"
	"github.com/segre-lab/segre/subspace"
)

// Exit codes.
const (
	exitFitted      = 0
	exitNoFit       = 1   // cpd could not decompose the array at this rank
	exitBadInput    = 2   // bad flags or a bad input file
	exitInterrupted = 130 // interrupted (Ctrl-C), as shells report SIGINT
)

// defaultMaxIter is the default cap on the alternating-least-squares
// refinement (cpd's own default, passed explicitly so that the command
// knows the cap it reports against).
const defaultMaxIter = 500

func main() {
	os.Exit(run(os.Args[1:], os.Stdout, os.Stderr))
}

type config struct {
	rank     int
	seed     uint64
	maxIter  int
	maxBytes int64
	noise    float64
	file     string
	set      map[string]bool // flags given on the command line
}

const usage = `usage: unmix [flags] [FILE]
Fits T ≈ Σ_s w_s · a_s⊗b_s⊗c_s (a CP decomposition: r terms, unit vectors
a_s in R^m, b_s in R^n, c_s in R^p, weights w_s) to an m×n×p array T and
prints the terms, the relative fit error and whether the terms are unique.
FILE holds T as p slices of m×n: NumPy .npy of shape (p, m, n) (or (m, n)
for p = 1), or plain text "p m n" then the numbers, slice after slice, each
row by row (the layout of certify's basis files). Without FILE an invented
demo runs. Flags may come before or after FILE.
Exit status: 0 fitted, 1 no decomposition at this rank, 2 bad flags or
FILE, 130 interrupted.
Flags:`

func newFlags(c *config) *flag.FlagSet {
	fs := flag.NewFlagSet("unmix", flag.ContinueOnError)
	fs.SetOutput(io.Discard)
	fs.IntVar(&c.rank, "rank", 0, "number of terms r, 1 ≤ r ≤ min(m, n, p); 0: the numerical dimension of the slice span (exact data only; give r for measured data)")
	fs.Uint64Var(&c.seed, "seed", 1, "seed of the random combinations of the simultaneous diagonalisation (and of the demo's data)")
	fs.IntVar(&c.maxIter, "maxiter", defaultMaxIter, "cap on the alternating-least-squares refinement iterations")
	fs.Int64Var(&c.maxBytes, "maxbytes", 0, "memory limit in bytes for reading FILE (0: 4 GiB)")
	fs.Float64Var(&c.noise, "noise", 1e-3, "demo only: relative rating noise, in [0, 1)")
	return fs
}

// parse reads the flags (before or after FILE). ok is false when run must
// return code at once (-h: usage, code 0; an error: one line, code 2).
func parse(args []string, stderr io.Writer) (c config, code int, ok bool) {
	fs := newFlags(&c)
	bad := func(format string, a ...any) (config, int, bool) {
		fmt.Fprintf(stderr, "unmix: "+format+"\n", a...)
		return c, exitBadInput, false
	}
	files, err := cli.Parse(fs, args)
	if err != nil {
		if errors.Is(err, flag.ErrHelp) {
			fmt.Fprintln(stderr, usage)
			fs.SetOutput(stderr)
			fs.PrintDefaults()
			return c, 0, false
		}
		return bad("%v", err)
	}
	c.set = map[string]bool{}
	fs.Visit(func(f *flag.Flag) { c.set[f.Name] = true })
	switch {
	case len(files) > 1:
		return bad("at most one FILE, got %d: %s", len(files), strings.Join(files, ", "))
	case c.rank < 0:
		return bad("-rank must be positive (or 0 for the dimension of the slice span), got %d", c.rank)
	case c.maxIter < 1 || c.maxIter > 100_000_000:
		return bad("-maxiter must be between 1 and 100000000, got %d", c.maxIter)
	case c.maxBytes < 0:
		return bad("-maxbytes must not be negative, got %d", c.maxBytes)
	case !(c.noise >= 0 && c.noise < 1):
		return bad("-noise must be in [0, 1), got %v", c.noise)
	case len(files) == 1 && c.set["noise"]:
		return bad("-noise applies only to the demo (no FILE); your data carry their own noise: give -rank")
	case len(files) == 0 && c.set["maxbytes"]:
		return bad("-maxbytes applies only to reading a FILE")
	}
	if len(files) == 1 {
		c.file = files[0]
	}
	return c, 0, true
}

func run(args []string, stdout, stderr io.Writer) int {
	c, code, ok := parse(args, stderr)
	if !ok {
		return code
	}
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt)
	defer stop()
	if c.file == "" {
		return runDemo(ctx, c, stdout, stderr)
	}
	b, err := subspace.ReadFile(c.file, c.maxBytes)
	if err != nil {
		fmt.Fprintf(stderr, "unmix: %s\n", oneLine(err))
		return exitBadInput
	}
	t := tensorOf(b)
	if lim := min(t.M, t.N, t.P); c.rank > lim {
		fmt.Fprintf(stderr, "unmix: %s: -rank %d is too large for a %d×%d×%d array: this method needs rank ≤ min(m, n, p) = %d\n",
			c.file, c.rank, t.M, t.N, t.P, lim)
		return exitBadInput
	}
	d, err := cpd.Decompose(ctx, t, cpd.Options{Rank: c.rank, Seed: c.seed, MaxIter: c.maxIter})
	if err != nil {
		return decomposeFailed(ctx, err, c, stderr)
	}
	rankFrom := "the numerical dimension of the slice span"
	if c.rank > 0 {
		rankFrom = "given; data treated as noisy"
	}
	fmt.Fprintf(stdout, "input       %s\n", c.file)
	fmt.Fprintf(stdout, "array       %d×%d×%d (%d slices of %d×%d)\n", t.M, t.N, t.P, t.P, t.M, t.N)
	_, r := d.A.Dims()
	fmt.Fprintf(stdout, "rank        %d (%s)\n", r, rankFrom)
	writeFit(stdout, d, c.maxIter)
	fmt.Fprintln(stdout)
	writeTerms(stdout, d, c.rank > 0)
	return exitFitted
}

// decomposeFailed reports an error of cpd.Decompose.
func decomposeFailed(ctx context.Context, err error, c config, stderr io.Writer) int {
	if ctx.Err() != nil {
		fmt.Fprintln(stderr, "unmix: interrupted")
		return exitInterrupted
	}
	hint := ""
	if c.rank == 0 {
		hint = " (for measured, noisy data give the number of terms with -rank)"
	}
	fmt.Fprintf(stderr, "unmix: %s: no decomposition: %s%s\n", c.file, oneLine(err), hint)
	return exitNoFit
}

// tensorOf turns p slices of m×n (a basis as read from a file: entry (i, j)
// of slice k at Data[(k·m + i)·n + j]) into cpd's layout, entry [i][j][k]
// at Data[(i·n + j)·p + k].
func tensorOf(b subspace.Basis) cpd.Tensor {
	m, n, p := b.Rows, b.Cols, b.Count
	t := cpd.Tensor{M: m, N: n, P: p, Data: make([]float64, m*n*p)}
	for k := 0; k < p; k++ {
		for l := 0; l < m*n; l++ {
			t.Data[l*p+k] = b.Data[k*m*n+l]
		}
	}
	return t
}

// writeFit prints the fit error, how the refinement ended and Kruskal's
// condition.
func writeFit(out io.Writer, d *cpd.Decomposition, maxIter int) {
	fmt.Fprintf(out, "fit         relative error %.3g  (‖T − Σ w a⊗b⊗c‖_F / ‖T‖_F)\n", d.RelError)
	// cpd runs the refinement only when the algebraic fit errs by more than
	// 1e-12, and reports the iterations it ran; it has no stopping reason of
	// its own, so reaching the cap is read from the count (a run that
	// converged on exactly its last allowed iteration is reported as capped
	// too, the safe side).
	switch {
	case d.Iterations == 0:
		fmt.Fprintln(out, "refinement  none needed (the algebraic fit errs by at most 1e-12)")
	case d.Iterations >= maxIter:
		fmt.Fprintf(out, "refinement  STOPPED AT THE ITERATION CAP (%d alternating-least-squares iterations): the fit may not have converged; raise -maxiter\n", d.Iterations)
	default:
		fmt.Fprintf(out, "refinement  converged after %d alternating-least-squares iterations\n", d.Iterations)
	}
	if d.Unique {
		fmt.Fprintln(out, "uniqueness  Kruskal's condition holds: the terms are unique up to order and sign")
	} else {
		fmt.Fprintln(out, "uniqueness  Kruskal's sufficient condition does not hold (which does not prove the terms are not unique)")
	}
}

// term is one rank-one term with unit factors and its weight.
type term struct {
	weight  float64
	a, b, c []float64
	dist    float64 // certified distance of a bᵀ to the slice span used
}

// terms turns d into weighted unit terms, heaviest first. Signs are fixed
// for readability: the entry of largest magnitude of a and of b is
// positive, the sign moving into c (so the product is unchanged).
func terms(d *cpd.Decomposition) []term {
	_, r := d.A.Dims()
	out := make([]term, r)
	for s := range out {
		a, b, c := mat.Col(nil, s, d.A), mat.Col(nil, s, d.B), mat.Col(nil, s, d.C)
		for _, v := range [][]float64{a, b} {
			if v[argMaxAbs(v)] < 0 {
				scale(v, -1)
				scale(c, -1)
			}
		}
		na, nb, nc := norm(a), norm(b), norm(c)
		w := na * nb * nc
		if na > 0 {
			scale(a, 1/na)
		}
		if nb > 0 {
			scale(b, 1/nb)
		}
		if nc > 0 {
			scale(c, 1/nc)
		}
		out[s] = term{weight: w, a: a, b: b, c: c, dist: math.NaN()}
		if s < len(d.Distances) {
			out[s].dist = d.Distances[s]
		}
	}
	sort.SliceStable(out, func(i, j int) bool { return out[i].weight > out[j].weight })
	return out
}

func writeTerms(out io.Writer, d *cpd.Decomposition, noisy bool) {
	span := "the slice span"
	if noisy {
		span = "the principal slice span of this rank"
	}
	for s, t := range terms(d) {
		fmt.Fprintf(out, "term %d  weight %.6g", s+1, t.weight)
		if !math.IsNaN(t.dist) {
			// A certified upper bound (rankone.Verify), printed rounded up.
			fmt.Fprintf(out, ", distance of a bᵀ to %s ≤ %s", span, accurate.FormatUp(t.dist, 3))
		}
		fmt.Fprintln(out)
		for _, f := range []struct {
			name string
			v    []float64
		}{{"a", t.a}, {"b", t.b}, {"c", t.c}} {
			writeVector(out, f.name, f.v)
		}
	}
}

// writeVector prints v eight entries a line, the first line labelled.
func writeVector(out io.Writer, name string, v []float64) {
	for i := 0; i < len(v); i += 8 {
		label := ""
		if i == 0 {
			label = name
		}
		fmt.Fprintf(out, "  %-2s", label)
		for _, x := range v[i:min(i+8, len(v))] {
			fmt.Fprintf(out, " %10.6f", x)
		}
		fmt.Fprintln(out)
	}
}

func argMaxAbs(v []float64) int {
	best := 0
	for i, x := range v {
		if math.Abs(x) > math.Abs(v[best]) {
			best = i
		}
	}
	return best
}

func norm(v []float64) float64 {
	var s float64
	for _, x := range v {
		s = math.Hypot(s, x)
	}
	return s
}

func scale(v []float64, f float64) {
	for i := range v {
		v[i] *= f
	}
}

func oneLine(err error) string {
	return strings.ReplaceAll(err.Error(), "\n", " ")
}

// runDemo is the invented tasting-panel scenario.
func runDemo(ctx context.Context, cf config, out, errw io.Writer) int {
	const notes, tasters, blends, bases = 9, 7, 12, 3
	rng := rand.New(rand.NewPCG(cf.seed, 7))
	a := mat.NewDense(notes, bases, nil)   // note profiles: bumps
	b := mat.NewDense(tasters, bases, nil) // taster sensitivities
	c := mat.NewDense(blends, bases, nil)  // amounts
	for s := 0; s < bases; s++ {
		centre := 1.5 + 3*float64(s)
		for i := 0; i < notes; i++ {
			a.Set(i, s, math.Exp(-(float64(i)-centre)*(float64(i)-centre)/3))
		}
		for j := 0; j < tasters; j++ {
			b.Set(j, s, 0.5+rng.Float64())
		}
		for k := 0; k < blends; k++ {
			c.Set(k, s, rng.Float64())
		}
	}
	t := cpd.Compose(a, b, c)
	var rms float64
	for _, v := range t.Data {
		rms += v * v
	}
	rms = math.Sqrt(rms / float64(len(t.Data)))
	for i := range t.Data {
		t.Data[i] += cf.noise * rms * rng.NormFloat64()
	}
	opt := cpd.Options{Seed: cf.seed, Rank: cf.rank, MaxIter: cf.maxIter}
	if cf.noise > 0 && cf.rank == 0 {
		opt.Rank = bases
	}
	if lim := min(notes, tasters, blends); opt.Rank > lim {
		fmt.Fprintf(errw, "unmix: -rank %d is too large for the demo's %d×%d×%d array: this method needs rank ≤ min(m, n, p) = %d\n",
			opt.Rank, notes, tasters, blends, lim)
		return exitBadInput
	}
	d, err := cpd.Decompose(ctx, t, opt)
	if err != nil {
		cf.file = "demo"
		return decomposeFailed(ctx, err, cf, errw)
	}
	fmt.Fprintf(out, "demo        invented ratings: %d notes × %d tasters × %d blends of %d bases, noise %.1g\n", notes, tasters, blends, bases, cf.noise)
	writeFit(out, d, cf.maxIter)
	fmt.Fprintln(out)
	_, r := d.A.Dims()
	fmt.Fprintf(out, "%-6s %-10s %12s %12s %12s %16s\n", "base", "recovered", "cos(notes)", "cos(taster)", "cos(amount)", "certified dist")
	for s := 0; s < bases; s++ {
		best, bi := -1.0, 0
		for u := 0; u < r; u++ {
			if v := cosine(a.ColView(s), d.A.ColView(u)); v > best {
				best, bi = v, u
			}
		}
		fmt.Fprintf(out, "%-6d %-10d %12.6f %12.6f %12.6f %16s\n", s, bi, best,
			cosine(b.ColView(s), d.B.ColView(bi)), cosine(c.ColView(s), d.C.ColView(bi)), accurate.FormatUp(d.Distances[bi], 3))
	}
	return exitFitted
}

func cosine(x, y mat.Vector) float64 {
	return math.Abs(mat.Dot(x, y)) / (mat.Norm(x, 2) * mat.Norm(y, 2))
}
