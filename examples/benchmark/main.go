// Command benchmark compares searchers — the bundled ones and a user's own,
// defined below as the worked example of plugging one in — on the instance
// families of rankone/suite, and writes records and reports.
//
//	go run ./examples/benchmark [-sweep default|small|planted] [-budget 1s] [-shard i/N] [-out DIR]
//	go run ./examples/benchmark merge [-out DIR] [-planted] FILE.jsonl...
//	go run ./examples/benchmark plot [-out DIR] [-planted] FILE.jsonl...
//
// A run writes DIR/records.jsonl (DIR/records-i-of-N.jsonl for a shard) and,
// unsharded, the reports: records.csv, summary.txt, profile.png/.svg
// (performance profiles) and, for the planted sweep, success.png/.svg
// (success rate versus subspace dimension). merge combines the records of
// all shards into the same reports a single run gives. plot draws only the
// plots, from any record files written by suite.WriteJSONL, so a user who
// ran a searcher of their own through suite.Run gets the same pictures. A
// plot's legend has a column of its own to the right of the axes, so it
// never covers a line. Every file is written to a temporary name and
// renamed, so an interrupted run leaves no half-written file. -h prints the
// usage; bad flags or a bad record file give one line on stderr and exit
// status 2.
package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"image/color"
	"io"
	"math"
	"math/rand/v2"
	"os"
	"os/signal"
	"path/filepath"
	"sort"
	"strconv"
	"strings"
	"time"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/plotutil"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"

	"github.com/segre-lab/segre/net"
	"github.com/segre-lab/segre/rankone"
	"github.com/segre-lab/segre/rankone/suite"
	"github.com/segre-lab/segre/subspace"
)

// bestOfRandom is the user's heuristic of this example: draw random
// elements of W, take the top singular pair of each as a candidate, and
// return the best one, certified by rankone.Verify. Any type with this
// Search method can be compared with the bundled strategies.
type bestOfRandom struct{ Draws int }

func (b *bestOfRandom) Search(ctx context.Context, w *subspace.Subspace) (rankone.Result, error) {
	begin := time.Now()
	m, n := w.Rows(), w.Cols()
	rng := rand.New(rand.NewPCG(1, 2))
	res := rankone.Result{Upper: 1, FoundBy: "best-of-random", Status: rankone.Converged}
	for d := 0; d < b.Draws; d++ {
		if ctx.Err() != nil {
			res.Status = rankone.Cancelled
			break
		}
		g := make([]float64, m*n)
		for i := range g {
			g[i] = rng.NormFloat64()
		}
		w.Project(g, g)
		var svd mat.SVD
		if !svd.Factorize(mat.NewDense(m, n, g), mat.SVDThin) {
			continue
		}
		var u, v mat.Dense
		svd.UTo(&u)
		svd.VTo(&v)
		x, y := mat.Col(nil, 0, &u), mat.Col(nil, 0, &v)
		if up, err := rankone.Verify(w, x, y); err == nil && (res.X == nil || up < res.Upper) {
			res.X, res.Y, res.Upper = x, y, up
		}
		res.Starts++
	}
	if res.X == nil {
		res.X, res.Y, res.Upper = rankone.TrivialWitness(w)
	}
	res.Elapsed = time.Since(begin)
	return res, ctx.Err()
}

func searchers(sweep string) []suite.Named {
	s := []suite.Named{
		{Name: "flattening", Searcher: rankone.Flattening{}},
		{Name: "als", Searcher: &rankone.ALS{}},
		{Name: "power", Searcher: &rankone.Power{}},
		{Name: "trust-region", Searcher: &rankone.TrustRegion{}},
		{Name: "multistart", Searcher: &rankone.MultiStart{Starts: 8, Workers: 1}},
		{Name: "best-of-random", Searcher: &bestOfRandom{Draws: 20}},
	}
	if sweep != "planted" {
		s = append(s, suite.Named{Name: "branch-and-bound", Searcher: &net.BranchBound{Gap: 1e-4, Workers: 1}},
			suite.Named{Name: "all-points", Searcher: &rankone.AllPoints{}})
	} else {
		s = append(s, suite.Named{Name: "portfolio", Searcher: &rankone.Portfolio{}})
	}
	return s
}

// plantedSweep is the recovery sweep: planted points in m = n ∈ {16, 32}
// for a range of dimensions k up to the (m−1)(n−1) limit.
func plantedSweep(short bool) []suite.Instance {
	var out []suite.Instance
	seeds := 4
	ns := []int{16, 32}
	if short {
		seeds, ns = 1, []int{8}
	}
	for _, n := range ns {
		lim := (n - 1) * (n - 1)
		for _, frac := range []float64{0.05, 0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8, 0.9, 1} {
			k := max(2, int(frac*float64(lim)))
			for s := 0; s < seeds; s++ {
				out = append(out, suite.Planted(n, n, k, uint64(s+1)))
			}
		}
	}
	return out
}

func main() { os.Exit(run(os.Args[1:], os.Stdout, os.Stderr)) }

const usage = `usage: benchmark [flags]                  run a sweep, write its records and reports
       benchmark merge [flags] FILE...    merge record files, write records and reports
       benchmark plot [flags] FILE...     draw the plots of record files
Compares rank-one searchers (the bundled strategies and this example's own
best-of-random heuristic) on the instance families of rankone/suite.
A run writes DIR/records.jsonl (DIR/records-i-of-N.jsonl for a shard) and,
unsharded, records.csv, summary.txt (also printed on stdout), profile.png
and profile.svg (performance profiles) and, for the planted sweep,
success.png and success.svg (success rate versus subspace dimension).
FILE is a record file: JSON lines as written by a run or suite.WriteJSONL.
merge writes the merged records.jsonl and every report; plot writes only
the plots, so records of your own searchers run through suite.Run get the
same pictures. Flags of merge and plot may come before or after the FILEs.
Exit status: 0 done, 1 a failure while running or writing, 2 bad flags or
a bad record file (one line on stderr).`

// runFlags are the settings of a sweep.
type runFlags struct {
	sweep  string
	short  bool
	budget time.Duration
	shard  string
	out    string
	quiet  bool
}

func runFlagSet(c *runFlags) *flag.FlagSet {
	fs := flag.NewFlagSet("benchmark", flag.ContinueOnError)
	fs.SetOutput(io.Discard)
	fs.StringVar(&c.sweep, "sweep", "default", "instances: default, small or planted")
	fs.BoolVar(&c.short, "short", false, "a quick version of the sweep")
	fs.DurationVar(&c.budget, "budget", time.Second, "time budget per run, e.g. 200ms, 1s")
	fs.StringVar(&c.shard, "shard", "", "run shard i of N, as i/N (0-based); writes only the records")
	fs.StringVar(&c.out, "out", "bench-out", "output directory (created if missing)")
	fs.BoolVar(&c.quiet, "quiet", false, "no progress bar")
	return fs
}

// fileFlags are the settings of merge and plot.
type fileFlags struct {
	out     string
	planted bool
}

func fileFlagSet(name string, c *fileFlags) *flag.FlagSet {
	fs := flag.NewFlagSet(name, flag.ContinueOnError)
	fs.SetOutput(io.Discard)
	fs.StringVar(&c.out, "out", "bench-out", "output directory (created if missing)")
	fs.BoolVar(&c.planted, "planted", false, "also draw the success-versus-dimension curves (records of planted instances)")
	return fs
}

// printUsage writes the usage text and every flag of the three forms.
func printUsage(w io.Writer) {
	fmt.Fprintln(w, usage)
	fmt.Fprintln(w, "Flags of a run:")
	fs := runFlagSet(new(runFlags))
	fs.SetOutput(w)
	fs.PrintDefaults()
	fmt.Fprintln(w, "Flags of merge and plot:")
	fs = fileFlagSet("merge", new(fileFlags))
	fs.SetOutput(w)
	fs.PrintDefaults()
}

// parseArgs parses flags placed before, between or after the positional
// arguments ("--" ends the flags) and returns the positional ones; help
// reports -h or -help.
func parseArgs(fs *flag.FlagSet, args []string) (pos []string, help bool, err error) {
	for {
		if err := fs.Parse(args); err != nil {
			return nil, errors.Is(err, flag.ErrHelp), err
		}
		rest := fs.Args()
		if len(rest) == 0 {
			return pos, false, nil
		}
		if used := len(args) - len(rest); used > 0 && args[used-1] == "--" {
			return append(pos, rest...), false, nil
		}
		pos = append(pos, rest[0])
		args = rest[1:]
	}
}

func run(args []string, stdout, stderr io.Writer) int {
	if len(args) > 0 && (args[0] == "merge" || args[0] == "plot") {
		return runFiles(args[0], args[1:], stderr)
	}
	var c runFlags
	pos, help, err := parseArgs(runFlagSet(&c), args)
	if help {
		printUsage(stderr)
		return 0
	}
	if err != nil {
		fmt.Fprintf(stderr, "benchmark: %v\n", err)
		return 2
	}
	if len(pos) > 0 {
		fmt.Fprintf(stderr, "benchmark: unexpected argument %q (record files go to \"benchmark merge FILES\" or \"benchmark plot FILES\")\n", pos[0])
		return 2
	}
	var insts []suite.Instance
	switch c.sweep {
	case "default":
		insts = suite.Sweep(c.short)
	case "small":
		insts = suite.Sweep(true)
	case "planted":
		insts = plantedSweep(c.short)
	default:
		fmt.Fprintf(stderr, "benchmark: -sweep must be default, small or planted, got %q\n", c.sweep)
		return 2
	}
	if c.budget <= 0 {
		fmt.Fprintf(stderr, "benchmark: -budget must be positive\n")
		return 2
	}
	set := suite.Settings{Budget: c.budget}
	name := "records.jsonl"
	if c.shard != "" {
		i, n, err := parseShard(c.shard)
		if err != nil {
			fmt.Fprintf(stderr, "benchmark: %v\n", err)
			return 2
		}
		set.Shard, set.Shards = i, n
		name = fmt.Sprintf("records-%d-of-%d.jsonl", i, n)
	}
	if !c.quiet {
		set.Progress = func(done, total int, el time.Duration) {
			left := time.Duration(float64(el) / float64(done) * float64(total-done))
			fmt.Fprintf(stderr, "\r[%4d/%4d] %s elapsed, ~%s left   ", done, total, el.Round(time.Second), left.Round(time.Second))
			if done == total {
				fmt.Fprintln(stderr)
			}
		}
	}
	if err := os.MkdirAll(c.out, 0o755); err != nil {
		fmt.Fprintf(stderr, "benchmark: %v\n", err)
		return 2
	}
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt)
	defer stop()
	var recs []suite.Record
	err = suite.Run(ctx, searchers(c.sweep), insts, set, func(r suite.Record) error {
		recs = append(recs, r)
		return nil
	})
	if err != nil && !errors.Is(err, context.Canceled) {
		fmt.Fprintf(stderr, "benchmark: %v\n", err)
		return 1
	}
	if err := writeAtomic(filepath.Join(c.out, name), func(w io.Writer) error { return suite.WriteJSONL(w, recs) }); err != nil {
		fmt.Fprintf(stderr, "benchmark: %v\n", err)
		return 1
	}
	if c.shard == "" {
		if err := reports(c.out, recs, c.sweep == "planted"); err != nil {
			fmt.Fprintf(stderr, "benchmark: %v\n", err)
			return 1
		}
		suite.WriteSummary(stdout, suite.Summary(recs))
	}
	return 0
}

func parseShard(s string) (int, int, error) {
	a, b, ok := strings.Cut(s, "/")
	i, e1 := strconv.Atoi(a)
	n, e2 := strconv.Atoi(b)
	if !ok || e1 != nil || e2 != nil || n < 1 || i < 0 || i >= n {
		return 0, 0, fmt.Errorf("-shard wants i/N with 0 ≤ i < N, got %q", s)
	}
	return i, n, nil
}

// runFiles is "benchmark merge" and "benchmark plot": read record files,
// then write the merged records and every report (merge) or only the plots
// (plot). Record files are only read.
func runFiles(cmd string, args []string, stderr io.Writer) int {
	prefix := "benchmark " + cmd
	var c fileFlags
	files, help, err := parseArgs(fileFlagSet(prefix, &c), args)
	if help {
		printUsage(stderr)
		return 0
	}
	if err != nil {
		fmt.Fprintf(stderr, "%s: %v\n", prefix, err)
		return 2
	}
	if len(files) == 0 {
		fmt.Fprintf(stderr, "%s: no record files\n", prefix)
		return 2
	}
	recs, err := readRecords(files)
	if err != nil {
		fmt.Fprintf(stderr, "%s: %v\n", prefix, err)
		return 2
	}
	if cmd == "plot" && len(recs) == 0 {
		fmt.Fprintf(stderr, "%s: no records in %s\n", prefix, strings.Join(files, ", "))
		return 2
	}
	if err := os.MkdirAll(c.out, 0o755); err != nil {
		fmt.Fprintf(stderr, "%s: %v\n", prefix, err)
		return 2
	}
	if cmd == "plot" {
		err = plots(c.out, recs, c.planted)
	} else if err = writeAtomic(filepath.Join(c.out, "records.jsonl"), func(w io.Writer) error { return suite.WriteJSONL(w, recs) }); err == nil {
		err = reports(c.out, recs, c.planted)
	}
	if err != nil {
		fmt.Fprintf(stderr, "%s: %v\n", prefix, err)
		return 1
	}
	return 0
}

// readRecords reads record files and merges them (suite.Merge). An error
// names the file.
func readRecords(paths []string) ([]suite.Record, error) {
	var parts [][]suite.Record
	for _, p := range paths {
		f, err := os.Open(p)
		if err != nil {
			return nil, err
		}
		recs, err := suite.ReadJSONL(f)
		f.Close()
		if err != nil {
			return nil, fmt.Errorf("%s: %v", p, err)
		}
		parts = append(parts, recs)
	}
	return suite.Merge(parts...), nil
}

// writeAtomic writes a file through a temporary name in the same directory,
// synced and then renamed over path: an interrupted or failed run leaves
// either the old file or the complete new one, and no temporary file.
func writeAtomic(path string, fill func(io.Writer) error) error {
	f, err := os.CreateTemp(filepath.Dir(path), "."+filepath.Base(path)+".tmp*")
	if err != nil {
		return err
	}
	tmp := f.Name()
	fail := func(err error) error {
		f.Close()
		os.Remove(tmp)
		return err
	}
	if err := fill(f); err != nil {
		return fail(err)
	}
	if err := f.Chmod(0o644); err != nil {
		return fail(err)
	}
	if err := f.Sync(); err != nil {
		return fail(err)
	}
	if err := f.Close(); err != nil {
		os.Remove(tmp)
		return err
	}
	if err := os.Rename(tmp, path); err != nil {
		os.Remove(tmp)
		return err
	}
	return nil
}

// reports writes every report of recs into dir: records.csv, summary.txt
// and the plots.
func reports(dir string, recs []suite.Record, planted bool) error {
	if err := writeAtomic(filepath.Join(dir, "records.csv"), func(w io.Writer) error { return suite.WriteCSV(w, recs) }); err != nil {
		return err
	}
	if err := writeAtomic(filepath.Join(dir, "summary.txt"), func(w io.Writer) error {
		return suite.WriteSummary(w, suite.Summary(recs))
	}); err != nil {
		return err
	}
	return plots(dir, recs, planted)
}

// plots draws the plots of recs into dir: the performance profiles and,
// when planted is set, the success-rate curves. A run, merge and plot all
// draw through it.
func plots(dir string, recs []suite.Record, planted bool) error {
	if err := profilePlot(dir, recs); err != nil {
		return err
	}
	if planted {
		return successPlot(dir, recs)
	}
	return nil
}

// Sizes of a saved plot: the axes get plotWidth × plotHeight, the legend a
// column of its own to their right (as wide as its longest entry), so that
// it never hides a line; the picture grows taller when the legend needs it.
const (
	plotWidth  = 6 * vg.Inch
	plotHeight = 4 * vg.Inch
	plotMargin = 2 * vg.Millimeter // around the legend
)

// saveBoth writes p as dir/base.png and dir/base.svg, with its legend
// beside the axes.
func saveBoth(p *plot.Plot, dir, base string) error {
	legend := p.Legend
	p.Legend = plot.NewLegend() // the axes draw no legend
	legend.Top, legend.Left = true, true
	size := legend.Rectangle(draw.Canvas{}).Size()
	legendWidth := size.X + 2*plotMargin
	// The legend starts level with the top of the axes, below the title.
	titleHeight := p.Title.TextStyle.Rectangle(p.Title.Text).Size().Y + p.Title.Padding
	height := max(plotHeight, titleHeight+size.Y+2*plotMargin)
	for _, ext := range []string{"png", "svg"} {
		cw, err := draw.NewFormattedCanvas(plotWidth+legendWidth, height, ext)
		if err != nil {
			return err
		}
		dc := draw.New(cw)
		dc.SetColor(color.White)
		dc.Fill(dc.Rectangle.Path())
		p.Draw(draw.Crop(dc, 0, -legendWidth, 0, 0))
		legend.Draw(draw.Crop(dc, plotWidth+plotMargin, -plotMargin, plotMargin, -titleHeight))
		if err := writeAtomic(filepath.Join(dir, base+"."+ext), func(w io.Writer) error {
			_, err := cw.WriteTo(w)
			return err
		}); err != nil {
			return err
		}
	}
	return nil
}

func profilePlot(dir string, recs []suite.Record) error {
	var taus []float64
	for t := 1.0; t <= 1024; t *= math.Sqrt2 {
		taus = append(taus, t)
	}
	prof := suite.Profile(recs, taus)
	names := make([]string, 0, len(prof))
	for n := range prof {
		names = append(names, n)
	}
	sort.Strings(names)
	p := plot.New()
	p.Title.Text = "Performance profile (Dolan & Moré)"
	p.X.Label.Text = "τ (time / best time)"
	p.Y.Label.Text = "fraction solved"
	p.X.Scale = plot.LogScale{}
	p.X.Tick.Marker = plot.LogTicks{}
	var lines []any
	for _, n := range names {
		pts := make(plotter.XYs, len(taus))
		for i, t := range taus {
			pts[i] = plotter.XY{X: t, Y: prof[n][i]}
		}
		lines = append(lines, n, pts)
	}
	if err := plotutil.AddLines(p, lines...); err != nil {
		return err
	}
	return saveBoth(p, dir, "profile")
}

// successPlot draws, for each searcher and size m×n, the success rate
// against k/((m−1)(n−1)), the subspace dimension relative to the critical
// one. Sizes with m = 1 or n = 1 (no critical dimension) are left out.
func successPlot(dir string, recs []suite.Record) error {
	type key struct {
		s          string
		rows, cols int
	}
	type acc struct{ ok, all map[int]int }
	data := map[key]*acc{}
	for _, r := range recs {
		if r.Rows < 2 || r.Cols < 2 {
			continue
		}
		k := key{r.Searcher, r.Rows, r.Cols}
		if data[k] == nil {
			data[k] = &acc{ok: map[int]int{}, all: map[int]int{}}
		}
		data[k].all[r.Dim]++
		if r.Success {
			data[k].ok[r.Dim]++
		}
	}
	keys := make([]key, 0, len(data))
	for k := range data {
		keys = append(keys, k)
	}
	sort.Slice(keys, func(i, j int) bool {
		a, b := keys[i], keys[j]
		switch {
		case a.rows != b.rows:
			return a.rows < b.rows
		case a.cols != b.cols:
			return a.cols < b.cols
		}
		return a.s < b.s
	})
	p := plot.New()
	p.Title.Text = "Planted recovery"
	p.X.Label.Text = "k / (m−1)(n−1)"
	p.Y.Label.Text = "success rate"
	var lines []any
	for _, k := range keys {
		a := data[k]
		dims := make([]int, 0, len(a.all))
		for d := range a.all {
			dims = append(dims, d)
		}
		sort.Ints(dims)
		pts := make(plotter.XYs, len(dims))
		lim := float64((k.rows - 1) * (k.cols - 1))
		for i, d := range dims {
			pts[i] = plotter.XY{X: float64(d) / lim, Y: float64(a.ok[d]) / float64(a.all[d])}
		}
		lines = append(lines, fmt.Sprintf("%s %d×%d", k.s, k.rows, k.cols), pts)
	}
	if err := plotutil.AddLinePoints(p, lines...); err != nil {
		return err
	}
	return saveBoth(p, dir, "success")
}
