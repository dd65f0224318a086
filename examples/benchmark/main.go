// Command benchmark compares searchers — the bundled ones and a user's own,
// defined below as the worked example of plugging one in — on the instance
// families of rankone/suite, and writes records and reports.
//
//	go run ./examples/benchmark [-sweep default|small|planted] [-budget 1s] [-shard i/N] [-out DIR]
//	go run ./examples/benchmark merge [-out DIR] FILE.jsonl...
//
// A run writes DIR/records.jsonl (DIR/records-i-of-N.jsonl for a shard) and,
// unsharded, the reports: records.csv, summary.txt, profile.png/.svg
// (performance profiles) and, for the planted sweep, success.png/.svg
// (success rate versus subspace dimension). merge combines the records of
// all shards into the same reports a single run gives. Every file is
// written to a temporary name and renamed, so an interrupted run leaves no
// half-written file.
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

func run(args []string, stdout, stderr io.Writer) int {
	if len(args) > 0 && args[0] == "merge" {
		return runMerge(args[1:], stderr)
	}
	fs := flag.NewFlagSet("benchmark", flag.ContinueOnError)
	fs.SetOutput(io.Discard)
	sweep := fs.String("sweep", "default", "instances: default, small or planted")
	short := fs.Bool("short", false, "a quick version of the sweep")
	budget := fs.Duration("budget", time.Second, "time budget per run")
	shard := fs.String("shard", "", "run shard i of N, as i/N (0-based)")
	out := fs.String("out", "bench-out", "output directory")
	quiet := fs.Bool("quiet", false, "no progress bar")
	if err := fs.Parse(args); err != nil {
		fmt.Fprintf(stderr, "benchmark: %v\n", err)
		return 2
	}
	if fs.NArg() > 0 {
		fmt.Fprintf(stderr, "benchmark: unexpected argument %q (did you mean \"benchmark merge FILES\"?)\n", fs.Arg(0))
		return 2
	}
	var insts []suite.Instance
	switch *sweep {
	case "default":
		insts = suite.Sweep(*short)
	case "small":
		insts = suite.Sweep(true)
	case "planted":
		insts = plantedSweep(*short)
	default:
		fmt.Fprintf(stderr, "benchmark: -sweep must be default, small or planted, got %q\n", *sweep)
		return 2
	}
	if *budget <= 0 {
		fmt.Fprintf(stderr, "benchmark: -budget must be positive\n")
		return 2
	}
	set := suite.Settings{Budget: *budget}
	name := "records.jsonl"
	if *shard != "" {
		i, n, err := parseShard(*shard)
		if err != nil {
			fmt.Fprintf(stderr, "benchmark: %v\n", err)
			return 2
		}
		set.Shard, set.Shards = i, n
		name = fmt.Sprintf("records-%d-of-%d.jsonl", i, n)
	}
	if !*quiet {
		set.Progress = func(done, total int, el time.Duration) {
			left := time.Duration(float64(el) / float64(done) * float64(total-done))
			fmt.Fprintf(stderr, "\r[%4d/%4d] %s elapsed, ~%s left   ", done, total, el.Round(time.Second), left.Round(time.Second))
			if done == total {
				fmt.Fprintln(stderr)
			}
		}
	}
	if err := os.MkdirAll(*out, 0o755); err != nil {
		fmt.Fprintf(stderr, "benchmark: %v\n", err)
		return 2
	}
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt)
	defer stop()
	var recs []suite.Record
	err := suite.Run(ctx, searchers(*sweep), insts, set, func(r suite.Record) error {
		recs = append(recs, r)
		return nil
	})
	if err != nil && !errors.Is(err, context.Canceled) {
		fmt.Fprintf(stderr, "benchmark: %v\n", err)
		return 1
	}
	if err := writeAtomic(filepath.Join(*out, name), func(w io.Writer) error { return suite.WriteJSONL(w, recs) }); err != nil {
		fmt.Fprintf(stderr, "benchmark: %v\n", err)
		return 1
	}
	if *shard == "" {
		if err := reports(*out, recs, *sweep == "planted"); err != nil {
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

func runMerge(args []string, stderr io.Writer) int {
	fs := flag.NewFlagSet("merge", flag.ContinueOnError)
	fs.SetOutput(io.Discard)
	out := fs.String("out", "bench-out", "output directory")
	planted := fs.Bool("planted", false, "also draw the success-versus-dimension curves")
	if err := fs.Parse(args); err != nil {
		fmt.Fprintf(stderr, "benchmark merge: %v\n", err)
		return 2
	}
	if fs.NArg() == 0 {
		fmt.Fprintln(stderr, "benchmark merge: no record files")
		return 2
	}
	var parts [][]suite.Record
	for _, p := range fs.Args() {
		f, err := os.Open(p)
		if err != nil {
			fmt.Fprintf(stderr, "benchmark merge: %v\n", err)
			return 2
		}
		recs, err := suite.ReadJSONL(f)
		f.Close()
		if err != nil {
			fmt.Fprintf(stderr, "benchmark merge: %s: %v\n", p, err)
			return 2
		}
		parts = append(parts, recs)
	}
	recs := suite.Merge(parts...)
	if err := os.MkdirAll(*out, 0o755); err != nil {
		fmt.Fprintf(stderr, "benchmark merge: %v\n", err)
		return 2
	}
	if err := writeAtomic(filepath.Join(*out, "records.jsonl"), func(w io.Writer) error { return suite.WriteJSONL(w, recs) }); err != nil {
		fmt.Fprintf(stderr, "benchmark merge: %v\n", err)
		return 1
	}
	if err := reports(*out, recs, *planted); err != nil {
		fmt.Fprintf(stderr, "benchmark merge: %v\n", err)
		return 1
	}
	return 0
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

func reports(dir string, recs []suite.Record, planted bool) error {
	if err := writeAtomic(filepath.Join(dir, "records.csv"), func(w io.Writer) error { return suite.WriteCSV(w, recs) }); err != nil {
		return err
	}
	if err := writeAtomic(filepath.Join(dir, "summary.txt"), func(w io.Writer) error {
		return suite.WriteSummary(w, suite.Summary(recs))
	}); err != nil {
		return err
	}
	if err := profilePlot(dir, recs); err != nil {
		return err
	}
	if planted {
		return successPlot(dir, recs)
	}
	return nil
}

func saveBoth(p *plot.Plot, dir, base string) error {
	for _, ext := range []string{".png", ".svg"} {
		wt, err := p.WriterTo(6*vg.Inch, 4*vg.Inch, ext[1:])
		if err != nil {
			return err
		}
		if err := writeAtomic(filepath.Join(dir, base+ext), func(w io.Writer) error {
			_, err := wt.WriteTo(w)
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

func successPlot(dir string, recs []suite.Record) error {
	type key struct {
		s string
		n int
	}
	type acc struct{ ok, all map[int]int }
	data := map[key]*acc{}
	for _, r := range recs {
		k := key{r.Searcher, r.Rows}
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
		if keys[i].n != keys[j].n {
			return keys[i].n < keys[j].n
		}
		return keys[i].s < keys[j].s
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
		lim := float64((k.n - 1) * (k.n - 1))
		for i, d := range dims {
			pts[i] = plotter.XY{X: float64(d) / lim, Y: float64(a.ok[d]) / float64(a.all[d])}
		}
		lines = append(lines, fmt.Sprintf("%s n=%d", k.s, k.n), pts)
	}
	if err := plotutil.AddLinePoints(p, lines...); err != nil {
		return err
	}
	return saveBoth(p, dir, "success")
}
