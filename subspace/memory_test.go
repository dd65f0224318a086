package subspace

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"runtime"
	"testing"

	"github.com/segre-lab/segre/internal/accurate"
)

// The reference for issue 16's memory work: the way factor built the
// Subspace before it (a full rr×k copy of Rᵀ for the reconstruction, the
// whole s×s Gram matrix for η), kept here to show that New's results did
// not change. The factorisation itself (factorQR, complement, formQWith)
// is shared: its arithmetic did not change, only where R is kept.

// oldFullRt is Rᵀ (rr×k, row j = column j of R) as factorQR used to copy
// it out of the factored array a, before formQ.
func oldFullRt(f *qrFactors, a []float64, L int) []float64 {
	k := f.k
	rt := make([]float64, f.rr*k)
	for i := 0; i < f.rr; i++ {
		copy(rt[i*k:i*k+min(i, k)], a[i*L:i*L+min(i, k)])
		if i < k {
			rt[i*k+i] = f.diag[i]
		}
	}
	return rt
}

// oldReconstruction is reconstruction over the full Rᵀ, one product a chunk.
func oldReconstruction(g *gemmPool, data []float64, orig []int, scale []float64, shift []int, f *qrFactors, rt, q []float64, L int) float64 {
	rr, k := len(orig), f.k
	chunk := reconChunk(rr)
	buf := make([]float64, chunk*L)
	var ss float64
	for c0 := 0; c0 < rr; c0 += chunk {
		c1 := min(c0+chunk, rr)
		nc := c1 - c0
		qr := buf[:nc*L]
		clear(qr)
		if kk := min(c1, k); kk > 0 {
			g.mul(nc, L, kk, false, operand{rt[c0*k:], k, false}, operand{q, L, false}, qr, L, nil)
		}
		for j := c0; j < c1; j++ {
			col := f.perm[j]
			src := data[orig[col]*L : (orig[col]+1)*L]
			sc, sh := scale[col], shift[col]
			row := qr[(j-c0)*L : (j-c0+1)*L]
			for i, v := range src {
				if sh != 0 {
					v = math.Ldexp(v, sh)
				}
				d := float64(v*sc) - row[i]
				ss += float64(d * d)
			}
		}
	}
	return math.Sqrt(ss / float64(rr))
}

// oldOrthogonality is orthogonality over the whole upper triangle of the
// Gram matrix (gramFull), summed row by row.
func oldOrthogonality(q []float64, s, L int, sf float64) (computed, bound float64) {
	if s == 0 {
		return 0, 0
	}
	g := make([]float64, s*s)
	newGemmPool(max(s, L)).gramFull(s, L, q, g, nil)
	var ss float64
	for i := 0; i < s; i++ {
		for j := i; j < s; j++ {
			v := g[i*s+j]
			if i == j {
				v -= 1
			}
			if i == j {
				ss += float64(v * v)
			} else {
				ss += float64(2 * v * v)
			}
		}
	}
	computed = math.Sqrt(ss)
	fro := accurate.SqrtUp(accurate.UpperRel(ss, s*s+4))
	fro = accurate.MulUp(fro, 1+4*accurate.U)
	bound = accurate.AddUp(fro, accurate.MulUp(accurate.Gamma(L), sf))
	return computed, bound
}

// oldFactor runs the factorisation and the checks of New as they were
// before issue 16 and returns the stored vectors, η, the computed
// ‖SSᵀ − I‖_F and the reconstruction error.
func oldFactor(t *testing.T, b Basis, tol float64, keepW bool) (q []float64, eta, orth, recon float64) {
	in, err := normalise(b, false)
	if err != nil {
		t.Fatal(err)
	}
	L := b.Rows * b.Cols
	rr := len(in.orig)
	g := newGemmPool(max(rr, L))
	never := func() bool { return false }
	f := factorQR(in.a, rr, L, tol, never, g, nil)
	rt := oldFullRt(f, in.a, L)
	k := f.k
	comp := L-k < k && !keepW
	if comp {
		q = f.complement(g, in.a, L, never, nil)
	}
	f.formQWith(g, in.a, L, never, nil)
	recon = oldReconstruction(g, b.Data, in.orig, in.scale, in.shift, f, rt, in.a[:k*L], L)
	if !comp {
		q = in.a[:k*L]
	}
	s := len(q) / L
	orth, eta = oldOrthogonality(q, s, L, accurate.SumSqUpper(q))
	return q, eta, orth, recon
}

// New's stored vectors, η, computed orthogonality and reconstruction error
// are bit for bit those of the pre-issue-16 path (oldFactor: the full Rᵀ
// and the whole Gram matrix), for 1, 2 and 3 cores, on the shapes of every
// path: one greedy panel with the complement stored, sketched pivots with
// W and with W⊥ stored, more matrices than entries (nothing stored), a low
// rank with columns left out (R's last columns read in place) and W or W⊥
// stored, zero matrices, a rank tolerance, 2×n matrices with s > gramPanel
// (several Gram panels) and reconstruction chunks that straddle k.
// Derived: the same products in the same order (gemm.go: an entry does not
// depend on how C is cut; gramCols: entry (j, i) has the bits of (i, j)).
func TestNewMatchesFullArrays(t *testing.T) {
	rng := rand.New(rand.NewPCG(161, 162))
	graded := make([]float64, 120)
	for i := range graded {
		graded[i] = math.Pow(10, -float64(i)/12) // 1 down to 1e-10 (derived: 10^(−119/12))
	}
	zeros := randBasis(rng, 90, 9, 11)
	for _, z := range []int{0, 17, 89} {
		clear(zeros.Data[z*99 : (z+1)*99])
	}
	cases := []struct {
		name string
		b    Basis
		tol  float64
	}{
		{"greedy-complement", randBasis(rng, 40, 8, 9), 0},
		{"sketch-W", randBasis(rng, 150, 20, 20), 0},
		{"sketch-complement", randBasis(rng, 300, 20, 20), 0},
		{"more-than-entries", randBasis(rng, 500, 10, 20), 0},
		{"low-rank-W", lowRank(rng, 400, 20, 20, 100, nil), 0},
		{"low-rank-complement", lowRank(rng, 300, 16, 16, 200, nil), 0},
		{"graded-tol", lowRank(rng, 170, 16, 16, 120, graded), 1e-6},
		{"zeros", zeros, 0},
		{"2x500-panels", randBasis(rng, 500, 2, 500), 0},
		{"one", randBasis(rng, 1, 3, 3), 0},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			q, eta, orth, recon := oldFactor(t, c.b, tolOf(c.b, c.tol), false)
			for _, procs := range []int{1, 2, 3} {
				old := runtime.GOMAXPROCS(procs)
				w, err := New(context.Background(), c.b, Options{RankTol: c.tol})
				runtime.GOMAXPROCS(old)
				if err != nil {
					t.Fatal(err)
				}
				if !bitsEqual(w.q, q) {
					t.Fatalf("GOMAXPROCS %d: stored vectors differ from the full-array path", procs)
				}
				for _, v := range [][3]any{{"η", w.eta, eta}, {"orthogonality", w.orthFl, orth}, {"reconstruction", w.recon, recon}} {
					if math.Float64bits(v[1].(float64)) != math.Float64bits(v[2].(float64)) {
						t.Errorf("GOMAXPROCS %d: %s = %v, full-array path %v", procs, v[0], v[1], v[2])
					}
				}
			}
		})
	}
}

// tolOf is the rank tolerance New uses for b and Options.RankTol tol.
func tolOf(b Basis, tol float64) float64 {
	got, _, err := validate(b, Options{RankTol: tol})
	if err != nil {
		panic(err)
	}
	return got
}

// orthogonality never holds the whole Gram matrix: for s = 1500 stored
// rows its allocation stays within one panel buffer (s·gramPanel words)
// and the packing buffers (gemmBytes), below the s² words (18 MB) of the
// whole matrix. Derived from orthogonalityWith and gemmPool.buf.
func TestOrthogonalityAllocation(t *testing.T) {
	rng := rand.New(rand.NewPCG(163, 164))
	s, L := 1500, 1600
	q := randSlice(rng, s*L)
	sf := accurate.SumSqUpper(q)
	var before, after runtime.MemStats
	runtime.GC()
	runtime.ReadMemStats(&before)
	orthogonality(q, s, L, sf, func() bool { return false })
	runtime.ReadMemStats(&after)
	got := after.TotalAlloc - before.TotalAlloc
	if limit := uint64(8*s*gramPanel) + uint64(gemmBytes(max(s, L))) + 1<<16; got > limit {
		t.Errorf("orthogonality of %d rows allocated %d bytes, want at most %d", s, got, limit)
	}
	if got >= uint64(8*s*s) {
		t.Errorf("orthogonality of %d rows allocated %d bytes, as much as the whole Gram matrix", s, got)
	}
}

// TestNewMemoryChild is what BenchmarkNewMemory runs in a child process
// (this test binary, with SEGRE_NEWMEM=r,m,n): it builds r Gaussian m×n
// matrices, collects the garbage, calls New, and prints the process's peak
// resident size (getrusage's ru_maxrss; −1 where unavailable) before and
// after New, the bytes New allocated (runtime.MemStats.TotalAlloc) and the
// input's size: "newmem <before> <after> <allocated> <input>".
func TestNewMemoryChild(t *testing.T) {
	spec := os.Getenv("SEGRE_NEWMEM")
	if spec == "" {
		t.Skip("run by BenchmarkNewMemory")
	}
	var r, m, n int
	var mode string
	if _, err := fmt.Sscanf(spec, "%d,%d,%d,%s", &r, &m, &n, &mode); err != nil {
		t.Fatal(err)
	}
	b := randBasis(rand.New(rand.NewPCG(16, uint64(r))), r, m, n)
	var opt Options
	if mode == "inplace" {
		// New in the input's array, the input read again from a file.
		path := filepath.Join(t.TempDir(), "b.npy")
		f, err := os.Create(path)
		if err != nil {
			t.Fatal(err)
		}
		if err := WriteNPY(f, b); err != nil {
			t.Fatal(err)
		}
		f.Close()
		reload, closeFile, err := ReloadNPY(path, b)
		if err != nil {
			t.Fatal(err)
		}
		defer closeFile()
		opt.Reload = reload
	}
	var ms runtime.MemStats
	runtime.GC()
	runtime.ReadMemStats(&ms)
	alloc := ms.TotalAlloc
	before := maxRSS()
	if _, err := New(context.Background(), b, opt); err != nil {
		t.Fatal(err)
	}
	after := maxRSS()
	runtime.ReadMemStats(&ms)
	runtime.KeepAlive(b)
	fmt.Println("newmem", before, after, ms.TotalAlloc-alloc, 8*len(b.Data))
}
