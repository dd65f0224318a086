package subspace

import (
	"bytes"
	"context"
	"flag"
	"fmt"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"runtime"
	"slices"
	"strconv"
	"strings"
	"testing"
	"time"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
	"gonum.org/v1/gonum/mat"
)

var benchShapes = []struct{ k, m, n int }{{64, 64, 64}, {256, 32, 32}, {32, 256, 256}}

// BenchmarkContraction reports bytes of stored basis streamed per second
// (MB/s) for each contraction, beside a plain blas64.Gemv over the same
// s×mn array in the same benchmark. Each contraction streams the basis once,
// except Project (twice); SetBytes counts that.
//
// x-gemv is the contraction's speed in MB/s as a fraction of gemv's
// (issue 16 asks for at least 0.8), measured after the timed loop so that
// the machine's load does not favour one of them: ratioRounds rounds, each
// timing ratioCalls calls of gemv and then ratioCalls of the contraction,
// and the median over the rounds of gemv's time over the contraction's
// (times the contraction's passes over the basis).
//
//	go test ./subspace -run X -bench Contraction -benchtime 200x
func BenchmarkContraction(b *testing.B) {
	for _, sh := range benchShapes {
		rng := rand.New(rand.NewPCG(1, uint64(sh.k)))
		w, err := New(context.Background(), randBasis(rng, sh.k, sh.m, sh.n), Options{})
		if err != nil {
			b.Fatal(err)
		}
		if w.comp {
			b.Fatal("benchmark shapes must store W")
		}
		bytes := int64(w.s * sh.m * sh.n * 8)
		x, y := randUnit(rng, sh.m), randUnit(rng, sh.n)
		L := sh.m * sh.n
		v := make([]float64, L)
		kron(v, x, y)
		c := make([]float64, w.s)
		name := fmt.Sprintf("k%d_m%d_n%d", sh.k, sh.m, sh.n)
		gemv := func() {
			blas64.Gemv(blas.NoTrans, 1, w.stored(), blas64.Vector{N: L, Data: v, Inc: 1}, 0, blas64.Vector{N: w.s, Data: c, Inc: 1})
		}
		b.Run(name+"/gemv", func(b *testing.B) {
			b.SetBytes(bytes)
			for b.Loop() {
				gemv()
			}
		})
		// vsGemv reports x-gemv for f, which streams the basis passes times.
		vsGemv := func(b *testing.B, passes float64, f func()) {
			b.ReportMetric(passes*pairedRatio(gemv, f), "x-gemv")
		}
		b.Run(name+"/value", func(b *testing.B) {
			b.SetBytes(bytes)
			f := func() { w.Value(x, y) }
			for b.Loop() {
				f()
			}
			vsGemv(b, 1, f)
		})
		b.Run(name+"/G", func(b *testing.B) {
			b.SetBytes(bytes)
			var g mat.SymDense
			f := func() { w.G(&g, y) }
			for b.Loop() {
				f()
			}
			vsGemv(b, 1, f)
		})
		b.Run(name+"/H", func(b *testing.B) {
			b.SetBytes(bytes)
			var h mat.SymDense
			f := func() { w.H(&h, x) }
			for b.Loop() {
				f()
			}
			vsGemv(b, 1, f)
		})
		b.Run(name+"/Gop", func(b *testing.B) {
			b.SetBytes(bytes)
			f := func() { w.GOperator(y) }
			for b.Loop() {
				f()
			}
			vsGemv(b, 1, f)
		})
		b.Run(name+"/Hop", func(b *testing.B) {
			b.SetBytes(bytes)
			f := func() { w.HOperator(x) }
			for b.Loop() {
				f()
			}
			vsGemv(b, 1, f)
		})
		b.Run(name+"/applyG", func(b *testing.B) {
			b.SetBytes(bytes)
			dst := make([]float64, sh.m)
			f := func() { w.ApplyG(dst, y, x) }
			for b.Loop() {
				f()
			}
			vsGemv(b, 1, f)
		})
		b.Run(name+"/applyH", func(b *testing.B) {
			b.SetBytes(bytes)
			dst := make([]float64, sh.n)
			f := func() { w.ApplyH(dst, x, y) }
			for b.Loop() {
				f()
			}
			vsGemv(b, 1, f)
		})
		b.Run(name+"/project", func(b *testing.B) {
			b.SetBytes(2 * bytes)
			dst := make([]float64, L)
			f := func() { w.Project(dst, v) }
			for b.Loop() {
				f()
			}
			vsGemv(b, 2, f)
		})
	}
}

// The paired measurement behind BenchmarkContraction's x-gemv.
const (
	ratioRounds = 31
	ratioCalls  = 4
)

// pairedRatio returns the median over ratioRounds rounds of the time of
// ratioCalls calls of ref divided by the time of ratioCalls calls of f,
// the two timed one after the other in each round.
func pairedRatio(ref, f func()) float64 {
	r := make([]float64, ratioRounds)
	for i := range r {
		t0 := time.Now()
		for range ratioCalls {
			ref()
		}
		t1 := time.Now()
		for range ratioCalls {
			f()
		}
		r[i] = t1.Sub(t0).Seconds() / time.Since(t1).Seconds()
	}
	return median(r)
}

// BenchmarkNewMemory reports New's peak memory as a multiple of the input
// (issue 16: the whole certify within 3×, New within about 2×), for 256
// Gaussian matrices of 64×64 (8 MiB) and 4000 of 2×4000 (256 MB), New
// copying the input (copy) and working in the input's array with the
// input read again from an .npy file (inplace: Options.Reload). Each run
// is a child process (this test binary running TestNewMemoryChild), so
// that nothing else lives in its heap:
//   - x-input: the child's peak resident size after New (getrusage's
//     ru_maxrss: the input, New's working storage, the Go runtime's own
//     few MiB) over the input's bytes; 0 where ru_maxrss is not available
//     (Linux only);
//   - alloc-x-input: (input + bytes New allocated)/input, from
//     runtime.MemStats.TotalAlloc: an upper bound on the heap's peak that
//     leaves the runtime out and holds on every system.
//
// The largest of the runs is reported. The 2×4000 shape takes about 15–30
// s a run here.
//
//	go test ./subspace -run X -bench NewMemory -benchtime 1x
func BenchmarkNewMemory(b *testing.B) {
	for _, sh := range []struct {
		r, m, n int
		mode    string
	}{{256, 64, 64, "copy"}, {256, 64, 64, "inplace"}, {4000, 2, 4000, "copy"}, {4000, 2, 4000, "inplace"}} {
		b.Run(fmt.Sprintf("%dx%dx%d/%s", sh.m, sh.n, sh.r, sh.mode), func(b *testing.B) {
			var rss, alloc float64
			mib := func(v int64) float64 { return float64(v) / (1 << 20) }
			for b.Loop() {
				cmd := exec.Command(os.Args[0], "-test.run", "^TestNewMemoryChild$", "-test.count", "1")
				cmd.Env = append(os.Environ(), fmt.Sprintf("SEGRE_NEWMEM=%d,%d,%d,%s", sh.r, sh.m, sh.n, sh.mode))
				out, err := cmd.CombinedOutput()
				if err != nil {
					b.Fatalf("child: %v\n%s", err, out)
				}
				var before, after, allocated, input int64
				i := strings.Index(string(out), "newmem ")
				if i < 0 {
					b.Fatalf("child printed no figures:\n%s", out)
				}
				if _, err := fmt.Sscan(string(out[i+len("newmem "):]), &before, &after, &allocated, &input); err != nil {
					b.Fatalf("child output %q: %v", out, err)
				}
				if after > 0 {
					rss = max(rss, float64(after)/float64(input))
				}
				alloc = max(alloc, float64(input+allocated)/float64(input))
				b.Logf("%d matrices of %d×%d: input %.1f MiB; peak resident size %.1f MiB before New, %.1f MiB after; New allocated %.1f MiB; load average %s",
					sh.r, sh.m, sh.n, mib(input), mib(before), mib(after), mib(allocated), loadAvg())
			}
			b.ReportMetric(rss, "x-input")
			b.ReportMetric(alloc, "alloc-x-input")
		})
	}
}

// BenchmarkNewCancelLatency reports the time from cancelling New's
// context to its return, on a 1500-matrix 48×48 Gaussian basis (about 5 s
// to orthonormalise here before the blocked factorisation, 0.2–0.3 s
// since), cancelled 2^(i mod 8)·10 ms into the run.
//
//	go test ./subspace -run X -bench NewCancelLatency -benchtime 8x
func BenchmarkNewCancelLatency(b *testing.B) {
	rng := rand.New(rand.NewPCG(1, 2))
	bs := randBasis(rng, 1500, 48, 48)
	var worst float64
	for i := 0; i < b.N; i++ {
		ctx, cancel := context.WithCancel(context.Background())
		done := make(chan time.Time, 1)
		go func() {
			New(ctx, bs, Options{})
			done <- time.Now()
		}()
		time.Sleep(time.Duration(10<<(i%8)) * time.Millisecond)
		at := time.Now()
		cancel()
		end := <-done
		worst = max(worst, end.Sub(at).Seconds()*1e3)
	}
	b.ReportMetric(worst, "ms-max-latency")
}

var newLarge = flag.Bool("newlarge", false, "BenchmarkNew: add 8192 matrices of 128×128 (minutes, about 3 GB)")

// sciPyQR times scipy.linalg.qr(A, pivoting=True, mode="economic") on the
// L×r matrix A whose column t is matrix t of the .npy file (row-major
// vec, as New factors it), in a fresh process with one BLAS thread; it
// prints the seconds of the call and the BLAS library the process loaded.
const sciPyQR = `import sys, time, numpy as np, scipy.linalg as sl
x = np.load(sys.argv[1])
a = x.reshape(x.shape[0], -1).T
t = time.perf_counter()
sl.qr(a, pivoting=True, mode="economic")
t = time.perf_counter() - t
libs = sorted({l.split()[-1] for l in open("/proc/self/maps") if "blas" in l.split()[-1] and "scipy" not in l})
print(t, ",".join(libs) or "unknown")
`

// findSciPy returns a python3 that imports scipy ("" if none).
func findSciPy() string {
	for _, py := range []string{"/usr/bin/python3", "python3"} {
		if exec.Command(py, "-c", "import scipy.linalg").Run() == nil {
			return py
		}
	}
	return ""
}

// runSciPy runs the script on path and returns its timing and BLAS.
func runSciPy(py, script, path string) (float64, string, error) {
	cmd := exec.Command(py, script, path)
	cmd.Env = append(os.Environ(), "OPENBLAS_NUM_THREADS=1", "OMP_NUM_THREADS=1", "MKL_NUM_THREADS=1")
	var out, errb bytes.Buffer
	cmd.Stdout, cmd.Stderr = &out, &errb
	if err := cmd.Run(); err != nil {
		return 0, "", fmt.Errorf("%v: %s", err, errb.String())
	}
	f := strings.Fields(out.String())
	if len(f) != 2 {
		return 0, "", fmt.Errorf("unexpected output %q", out.String())
	}
	sec, err := strconv.ParseFloat(f[0], 64)
	return sec, f[1], err
}

func loadAvg() string {
	b, err := os.ReadFile("/proc/loadavg")
	if err != nil {
		return "unknown"
	}
	return strings.Join(strings.Fields(string(b))[:3], " ")
}

// BenchmarkNew times New beside SciPy's pivoted QR (LAPACK's xGEQP3 and
// xORGQR through scipy.linalg.qr(pivoting=True, mode="economic"), one BLAS
// thread) on the same Gaussian array, written once with WriteNPY: whole
// runs alternated (ours, then SciPy's in a fresh process), medians
// reported as s-ours, s-scipy and their ratio (target ≤ 1 at 64×64×2048).
// New does more than the QR (the reconstruction error and the proven
// orthogonality bound, each a product as large as the QR's) and uses every
// core (GOMAXPROCS). Skipped when no python3 with SciPy is found (CI does
// not install it).
//
//	go test ./subspace -run X -bench 'New$' -benchtime 1x
//	go test ./subspace -run X -bench 'New$/128' -benchtime 1x -newlarge -timeout 60m
func BenchmarkNew(b *testing.B) {
	py := findSciPy()
	if py == "" {
		b.Skip("no python3 with scipy (Debian: apt-get install python3-scipy)")
	}
	dir := b.TempDir()
	script := filepath.Join(dir, "qr.py")
	if err := os.WriteFile(script, []byte(sciPyQR), 0o644); err != nil {
		b.Fatal(err)
	}
	shapes := []struct{ r, m, n, runs int }{{256, 64, 64, 5}, {2048, 64, 64, 3}}
	if *newLarge {
		shapes = append(shapes, struct{ r, m, n, runs int }{8192, 128, 128, 1})
	}
	for _, sh := range shapes {
		b.Run(fmt.Sprintf("%dx%dx%d", sh.m, sh.n, sh.r), func(b *testing.B) {
			rng := rand.New(rand.NewPCG(3, uint64(sh.r)))
			in := randBasis(rng, sh.r, sh.m, sh.n)
			path := filepath.Join(dir, fmt.Sprintf("b%d.npy", sh.r))
			f, err := os.Create(path)
			if err != nil {
				b.Fatal(err)
			}
			if err := WriteNPY(f, in); err != nil {
				b.Fatal(err)
			}
			if err := f.Close(); err != nil {
				b.Fatal(err)
			}
			load := loadAvg()
			var ours, theirs []float64
			var blas string
			for b.Loop() {
				for range sh.runs {
					runtime.GC()
					t0 := time.Now()
					if _, err := New(context.Background(), in, Options{}); err != nil {
						b.Fatal(err)
					}
					ours = append(ours, time.Since(t0).Seconds())
					sec, lib, err := runSciPy(py, script, path)
					if err != nil {
						b.Fatal(err)
					}
					theirs = append(theirs, sec)
					blas = lib
				}
			}
			mo, mt := median(ours), median(theirs)
			b.ReportMetric(mo, "s-ours")
			b.ReportMetric(mt, "s-scipy")
			b.ReportMetric(mo/mt, "ratio")
			b.Logf("%d matrices of %d×%d: New %.3g s, SciPy %.3g s (medians of %d alternated runs; ours %v, SciPy %v); GOMAXPROCS %d; SciPy's BLAS %s; load average %s before, %s after",
				sh.r, sh.m, sh.n, mo, mt, len(ours), ours, theirs, runtime.GOMAXPROCS(0), blas, load, loadAvg())
		})
	}
}

func median(v []float64) float64 {
	v = slices.Clone(v)
	slices.Sort(v)
	if len(v) == 0 {
		return 0
	}
	if len(v)%2 == 1 {
		return v[len(v)/2]
	}
	return (v[len(v)/2-1] + v[len(v)/2]) / 2
}
