package rankone_test

import (
	"bytes"
	"context"
	"flag"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"runtime"
	"slices"
	"strconv"
	"strings"
	"syscall"
	"testing"
	"time"

	"github.com/segre-lab/segre/internal/reference"
	"github.com/segre-lab/segre/rankone"
	"github.com/segre-lab/segre/rankone/suite"
	"github.com/segre-lab/segre/subspace"
)

// numpyPython returns /usr/bin/python3 when it imports numpy (Debian's
// python3-numpy), else "". The python3 first on PATH is not tried: on this
// project's machines it is a version manager's shim without numpy.
func numpyPython() string {
	const py = "/usr/bin/python3"
	if exec.Command(py, "-c", "import numpy").Run() == nil {
		return py
	}
	return ""
}

// writeArray writes data as a .npy array of shape (r, rows, cols) with the
// project's own codec (subspace.WriteNPY).
func writeArray(path string, r, rows, cols int, data []float64) error {
	f, err := os.Create(path)
	if err != nil {
		return err
	}
	if err := subspace.WriteNPY(f, subspace.Basis{Count: r, Rows: rows, Cols: cols, Data: data}); err != nil {
		f.Close()
		return err
	}
	return f.Close()
}

// numpyRun is one run of testdata/als_numpy.py: the seconds of its
// iterations, the BLAS it loaded and the final value of every start.
type numpyRun struct {
	sec, cpu float64 // wall clock and processor seconds of the iterations
	blas     string
	values   []float64
}

// runNumPy runs the script on the files in dir, with one BLAS thread.
func runNumPy(py, dir, mode string, starts int) (numpyRun, error) {
	cmd := exec.Command(py, filepath.Join("testdata", "als_numpy.py"), dir, mode)
	cmd.Env = append(os.Environ(), "OPENBLAS_NUM_THREADS=1", "OMP_NUM_THREADS=1", "MKL_NUM_THREADS=1", "BLIS_NUM_THREADS=1")
	var out, errb bytes.Buffer
	cmd.Stdout, cmd.Stderr = &out, &errb
	if err := cmd.Run(); err != nil {
		return numpyRun{}, fmt.Errorf("%v: %s", err, errb.String())
	}
	lines := strings.Split(strings.TrimSpace(out.String()), "\n")
	if len(lines) != 2+starts {
		return numpyRun{}, fmt.Errorf("als_numpy.py printed %d lines, want %d", len(lines), 2+starts)
	}
	r := numpyRun{blas: lines[1]}
	times := strings.Fields(lines[0])
	if len(times) != 2 {
		return r, fmt.Errorf("als_numpy.py printed %q, want two times", lines[0])
	}
	var err error
	if r.sec, err = strconv.ParseFloat(times[0], 64); err != nil {
		return r, err
	}
	if r.cpu, err = strconv.ParseFloat(times[1], 64); err != nil {
		return r, err
	}
	for _, l := range lines[2:] {
		v, err := strconv.ParseFloat(l, 64)
		if err != nil {
			return r, err
		}
		r.values = append(r.values, v)
	}
	return r, nil
}

// cpuSeconds returns the processor time this process has used (user and
// system), which other processes on a busy machine do not inflate.
func cpuSeconds() float64 {
	var ru syscall.Rusage
	if syscall.Getrusage(syscall.RUSAGE_SELF, &ru) != nil {
		return 0
	}
	return float64(ru.Utime.Sec+ru.Stime.Sec) + float64(ru.Utime.Usec+ru.Stime.Usec)/1e6
}

func loadAverage() string {
	b, err := os.ReadFile("/proc/loadavg")
	if err != nil {
		return "unknown"
	}
	return strings.Join(strings.Fields(string(b))[:3], " ")
}

func medianOf(v []float64) float64 {
	v = slices.Clone(v)
	slices.Sort(v)
	if len(v)%2 == 1 {
		return v[len(v)/2]
	}
	return (v[len(v)/2-1] + v[len(v)/2]) / 2
}

// numpyStarts is the number of starts of BenchmarkALSNumPy, as many as the
// certify command gives each local method by default.
const numpyStarts = 32

// alsStarts returns B unit starts (x_b, y_b), Gaussian directions from a
// fixed seed, as two B×m and B×n row-major arrays.
func alsStarts(m, n, b int, seed uint64) (xs, ys []float64) {
	rng := rand.New(rand.NewPCG(seed, 0x57a7))
	unit := func(k int) []float64 { return reference.RandUnit(rng, k) }
	for range b {
		xs = append(xs, unit(m)...)
		ys = append(ys, unit(n)...)
	}
	return xs, ys
}

// refineStarts runs ALS from every start (copies of the rows of xs, ys),
// all in one batch, and returns the Stats of each.
func refineStarts(w *subspace.Subspace, xs, ys []float64, b int) ([]rankone.Stats, error) {
	m, n := w.Rows(), w.Cols()
	bx, by := make([][]float64, b), make([][]float64, b)
	for i := range b {
		bx[i], by[i] = slices.Clone(xs[i*m:(i+1)*m]), slices.Clone(ys[i*n:(i+1)*n])
	}
	return (&rankone.ALS{}).RefineBatch(context.Background(), w, bx, by)
}

var numpyBatch = flag.Bool("numpybatch", false, "BenchmarkALSNumPy: also time the script's batched variant")

// BenchmarkALSNumPy times ALS from 32 starts against the same method in
// NumPy (testdata/als_numpy.py, start after start: the plain loop) from
// the same starts on the same stored basis, both written with
// subspace.WriteNPY. NumPy runs each start for exactly the iterations our
// stopping rule took (read from the file), so both do the same steps.
// Fairness: ours runs with GOMAXPROCS(1) (one core for every goroutine),
// NumPy with one BLAS thread (OPENBLAS_NUM_THREADS=1 and the like); each
// side times only the iterations (not reading, subspace.New or the
// script's start-up). Whole runs alternate, ours then NumPy's, and the
// medians are reported: ms-ours, ms-numpy and their ratio (the issue's
// target: ratio ≤ 0.33 on every instance), and the same for processor time
// (cpu-ratio: what each process itself used, which a busy machine inflates
// less than the wall clock). With -numpybatch, ms-numpy-batch is the
// script's batched variant (all starts stepped together), for information.
//
// Agreement: every start's final h must match NumPy's within 1e-9
// absolute. Both iterate the same map, y ← top eigenvector of H(x),
// x ← top eigenvector of G(y), ours by Lanczos to a residual of
// 1e-14·‖A‖, NumPy by LAPACK's dsyevd: each step's eigenvector agrees to
// about 1e-14/gap, and on these instances every start moves towards a
// local maximum that attracts both trajectories, so the differences do not
// grow; h then agrees to about 1e-13 (derived here; 1e-9 leaves room for
// starts that stop at the iteration cap away from a maximum).
// Skipped, with a note, when /usr/bin/python3 cannot import numpy.
//
//	go test ./rankone -run X -bench ALSNumPy -benchtime 1x
func BenchmarkALSNumPy(b *testing.B) {
	py := numpyPython()
	if py == "" {
		b.Skip("no /usr/bin/python3 with numpy (Debian: apt-get install python3-numpy); the comparison is skipped")
	}
	for _, c := range numpyCases() {
		b.Run(c.name, func(b *testing.B) {
			w, err := subspace.New(context.Background(), c.in.Basis, subspace.Options{})
			if err != nil {
				b.Fatal(err)
			}
			m, n := w.Rows(), w.Cols()
			xs, ys := alsStarts(m, n, numpyStarts, 7)
			st, err := refineStarts(w, xs, ys, numpyStarts)
			if err != nil {
				b.Fatal(err)
			}
			dir := b.TempDir()
			view := w.Stored()
			s := view.Count()
			q := make([]float64, 0, s*m*n)
			for t := range s {
				q = append(q, view.Vector(t, nil)...)
			}
			iters := make([]float64, numpyStarts)
			total := 0
			for i, x := range st {
				iters[i] = float64(x.Iterations)
				total += x.Iterations
			}
			comp := 0.0
			if view.Complement() {
				comp = 1
			}
			for _, f := range []struct {
				name       string
				r, rows, c int
				d          []float64
			}{{"basis.npy", s, m, n, q}, {"x.npy", 1, numpyStarts, m, xs}, {"y.npy", 1, numpyStarts, n, ys},
				{"iters.npy", 1, 1, numpyStarts, iters}, {"comp.npy", 1, 1, 1, []float64{comp}}} {
				if err := writeArray(filepath.Join(dir, f.name), f.r, f.rows, f.c, f.d); err != nil {
					b.Fatal(err)
				}
			}
			load := loadAverage()
			var ours, oursCPU, theirs, theirsCPU, batched []float64
			var last numpyRun
			for b.Loop() {
				for range c.runs {
					runtime.GC()
					prev := runtime.GOMAXPROCS(1)
					c0, t0 := cpuSeconds(), time.Now()
					st, err = refineStarts(w, xs, ys, numpyStarts)
					ours = append(ours, time.Since(t0).Seconds()*1e3)
					oursCPU = append(oursCPU, (cpuSeconds()-c0)*1e3)
					runtime.GOMAXPROCS(prev)
					if err != nil {
						b.Fatal(err)
					}
					last, err = runNumPy(py, dir, "loop", numpyStarts)
					if err != nil {
						b.Fatal(err)
					}
					theirs = append(theirs, last.sec*1e3)
					theirsCPU = append(theirsCPU, last.cpu*1e3)
					if *numpyBatch {
						nb, err := runNumPy(py, dir, "batch", numpyStarts)
						if err != nil {
							b.Fatal(err)
						}
						batched = append(batched, nb.sec*1e3)
					}
				}
			}
			worst := 0.0
			for i := range st {
				if st[i].Iterations != int(iters[i]) {
					b.Fatalf("start %d: %d iterations, %v in the first run: ALS is not deterministic", i, st[i].Iterations, iters[i])
				}
				worst = math.Max(worst, math.Abs(st[i].Value-last.values[i]))
			}
			if worst > 1e-9 {
				b.Errorf("final values differ from NumPy's by up to %.3g (allowed 1e-9)", worst)
			}
			mo, mt := medianOf(ours), medianOf(theirs)
			co, ct := medianOf(oursCPU), medianOf(theirsCPU)
			b.ReportMetric(mo, "ms-ours")
			b.ReportMetric(mt, "ms-numpy")
			b.ReportMetric(mo/mt, "ratio")
			b.ReportMetric(co/ct, "cpu-ratio")
			note := ""
			if len(batched) > 0 {
				b.ReportMetric(medianOf(batched), "ms-numpy-batch")
				note = fmt.Sprintf("; NumPy batched %.4g ms", medianOf(batched))
			}
			b.Logf("%s, %d starts, %d iterations in all; medians of %d alternated runs: ours %.4g ms (processor %.4g), NumPy %.4g ms (processor %.4g)%s; ours %.4g, NumPy %.4g; largest |Δh| %.2g; NumPy's BLAS %s; load average %s before, %s after",
				c.name, numpyStarts, total, len(ours), mo, co, mt, ct, note, ours, theirs, worst, last.blas, load, loadAverage())
		})
	}
}

// numpyCase is an instance of BenchmarkALSNumPy with its number of runs.
type numpyCase struct {
	name string
	in   suite.Instance
	runs int
}

// numpyCases returns the instances the issue names: planted 20×30 with
// k = 40 and 64×64 with k = 64, Gaussian 16×16 with k = 128 and 64×64
// with k = 256.
func numpyCases() []numpyCase {
	return []numpyCase{
		{"planted/20x30/k40", suite.Planted(20, 30, 40, 1), 5},
		{"planted/64x64/k64", suite.Planted(64, 64, 64, 1), 5},
		{"gaussian/16x16/k128", suite.Random(16, 16, 128, 1), 5},
		{"gaussian/64x64/k256", suite.Random(64, 64, 256, 1), 3},
	}
}

// BenchmarkALSBatch times ALS from the 32 starts of BenchmarkALSNumPy
// alone (no NumPy), with GOMAXPROCS as set by -cpu, for profiling.
//
//	go test ./rankone -run X -bench ALSBatch -cpu 1
func BenchmarkALSBatch(b *testing.B) {
	for _, c := range numpyCases() {
		b.Run(c.name, func(b *testing.B) {
			w, err := subspace.New(context.Background(), c.in.Basis, subspace.Options{})
			if err != nil {
				b.Fatal(err)
			}
			xs, ys := alsStarts(w.Rows(), w.Cols(), numpyStarts, 7)
			iters := 0
			c0 := cpuSeconds()
			for b.Loop() {
				st, err := refineStarts(w, xs, ys, numpyStarts)
				if err != nil {
					b.Fatal(err)
				}
				iters = 0
				for _, s := range st {
					iters += s.Iterations
				}
			}
			b.ReportMetric(float64(b.Elapsed().Microseconds())/float64(b.N)/float64(iters), "µs/start-iteration")
			b.ReportMetric((cpuSeconds()-c0)*1e6/float64(b.N)/float64(iters), "cpu-µs/start-iteration")
		})
	}
}
