package net

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"sync/atomic"
	"testing"
	"time"

	"gonum.org/v1/gonum/mat"

	"github.com/segre-lab/segre/internal/eigen"
	"github.com/segre-lab/segre/internal/reference"
	"github.com/segre-lab/segre/internal/verified"
	"github.com/segre-lab/segre/rankone/suite"
	"github.com/segre-lab/segre/subspace"
)

// randSym returns a random symmetric n×n matrix (full, row-major) of the
// given kind: Gaussian, positive semidefinite of rank k (GᵀG), with a
// cluster of eigenvalues at the top, or with entries scaled by s.
func randSym(rng *rand.Rand, n int, kind string) []float64 {
	a := make([]float64, n*n)
	switch kind {
	case "gauss":
		for i := 0; i < n; i++ {
			for j := i; j < n; j++ {
				v := rng.NormFloat64()
				a[i*n+j], a[j*n+i] = v, v
			}
		}
	case "psd", "lowrank":
		k := n
		if kind == "lowrank" {
			k = max(1, n/3)
		}
		g := make([]float64, k*n)
		for i := range g {
			g[i] = rng.NormFloat64() / math.Sqrt(float64(n))
		}
		for i := 0; i < n; i++ {
			for j := i; j < n; j++ {
				var s float64
				for t := 0; t < k; t++ {
					s += g[t*n+i] * g[t*n+j]
				}
				a[i*n+j], a[j*n+i] = s, s
			}
		}
	case "cluster":
		// Q diag(λ) Qᵀ with λ_top = 1, 1 − 1e-9, 1 − 2e-9, the rest in [0, 0.5].
		q := reference.RandOrthogonal(rng, n)
		lam := make([]float64, n)
		for i := range lam {
			lam[i] = 0.5 * rng.Float64()
		}
		for i := 0; i < min(3, n); i++ {
			lam[i] = 1 - float64(i)*1e-9
		}
		for i := 0; i < n; i++ {
			for j := i; j < n; j++ {
				var s float64
				for t := 0; t < n; t++ {
					s += q.At(i, t) * lam[t] * q.At(j, t)
				}
				a[i*n+j], a[j*n+i] = s, s
			}
		}
	case "diag":
		for i := 0; i < n; i++ {
			a[i*n+i] = float64(i%5) - 1
		}
	case "zero":
	}
	return a
}

// topDense finds gonum's largest eigenvalue (reference library) of random
// symmetric matrices of orders 1 to 80 (below and above lanczosSteps, so
// with and without restarts), definite, indefinite, low-rank, diagonal (a
// Krylov breakdown at once), zero, and with a cluster of three eigenvalues
// within 2e-9 at the top, from zero and from random starts, for B = A and
// B = sI − A. Tolerance: the stopping rule bounds the residual r by
// 1e-10·‖B‖, so the Ritz value is within r ≤ 1e-10·‖B‖ of an eigenvalue
// (Golub & Van Loan 2013, §8.1); it is the top one here because the Krylov
// space of a start with a component on the top eigenvector fills the space
// or separates it. 1e-9·max(1, ‖B‖) covers that with room for the
// eigenvector's rounding (common practice).
func TestTopDense(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 5))
	var lz lanczos
	for _, n := range []int{1, 2, 3, 7, 32, 64, 65, 80} {
		for _, kind := range []string{"gauss", "psd", "lowrank", "cluster", "diag", "zero"} {
			for _, neg := range []bool{false, true} {
				a := randSym(rng, n, kind)
				shift := 0.0
				if neg {
					shift = 2
				}
				b := mat.NewSymDense(n, nil)
				for i := 0; i < n; i++ {
					for j := i; j < n; j++ {
						v := a[i*n+j]
						if neg {
							v = -v
							if i == j {
								v += shift
							}
						}
						b.SetSym(i, j, v)
					}
				}
				var es mat.EigenSym
				if !es.Factorize(b, false) {
					t.Fatal("gonum failed")
				}
				vals := es.Values(nil)
				ref := vals[n-1]
				norm := math.Max(math.Abs(vals[0]), math.Abs(ref))
				for _, start := range []string{"zero", "random"} {
					x := make([]float64, n)
					if start == "random" {
						x = reference.RandUnit(rng, n)
					}
					got := lz.topDense(a, n, neg, shift, x, 1e-10)
					if math.Abs(got-ref) > 1e-9*math.Max(1, norm) {
						t.Errorf("n=%d %s neg=%v start %s: %v, gonum %v", n, kind, neg, start, got, ref)
					}
					// The vector returned is unit and nearly an eigenvector.
					bx := mat.NewVecDense(n, nil)
					bx.MulVec(b, mat.NewVecDense(n, x))
					var res, nx float64
					for i := range x {
						r := bx.AtVec(i) - got*x[i]
						res += r * r
						nx += x[i] * x[i]
					}
					if math.Abs(nx-1) > 1e-12 || math.Sqrt(res) > 1e-6*math.Max(1, norm) {
						t.Errorf("n=%d %s neg=%v start %s: ‖x‖² = %v, residual %v", n, kind, neg, start, nx, math.Sqrt(res))
					}
				}
			}
		}
	}
}

// The top Ritz value of a tridiagonal matrix (Newton from above) agrees
// with gonum's EigenSym (reference library) to rounding: 1e-13 relative to
// the Gershgorin scale covers Newton's stopping step (4e-16 relative) and
// gonum's backward error for orders ≤ 64 (common practice). Its
// eigenvector by inverse iteration has cosine 1 ± 1e-9 with gonum's, and
// the last entry (the stopping test's) agrees to 1e-9, for separated top
// eigenvalues (common practice: the eigenvector's error is rounding over
// the gap); nearly reducible matrices check θ only.
func TestTopTridiagNewton(t *testing.T) {
	rng := rand.New(rand.NewPCG(8, 9))
	for _, k := range []int{1, 2, 3, 5, 16, 64} {
		for trial := 0; trial < 20; trial++ {
			a, b := make([]float64, k), make([]float64, max(0, k-1))
			for i := range a {
				a[i] = rng.NormFloat64()
			}
			for i := range b {
				b[i] = rng.NormFloat64()
				if trial%5 == 4 {
					b[i] *= 1e-6 // nearly reducible
				}
			}
			tm := mat.NewSymDense(k, nil)
			scale := 0.0
			for i := 0; i < k; i++ {
				tm.SetSym(i, i, a[i])
				scale = math.Max(scale, math.Abs(a[i]))
				if i+1 < k {
					tm.SetSym(i, i+1, b[i])
				}
			}
			var es mat.EigenSym
			es.Factorize(tm, true)
			vals := es.Values(nil)
			var vecs mat.Dense
			es.VectorsTo(&vecs)
			lo := math.Inf(-1)
			if trial%2 == 1 {
				lo = a[0] // a valid hint: T₁'s eigenvalue
			}
			th := eigen.TridiagTop(a, b, lo, 1e-3)
			if math.Abs(th-vals[k-1]) > 1e-13*math.Max(1, 3*scale) {
				t.Errorf("k=%d trial %d: θ = %v, gonum %v", k, trial, th, vals[k-1])
			}
			var lz lanczos
			lz.resize(k)
			copy(lz.alpha, a)
			copy(lz.beta, b)
			lz.tridiagVector(k, th)
			var dot float64
			for i := 0; i < k; i++ {
				dot += lz.s[i] * vecs.At(i, k-1)
			}
			if trial%5 != 4 && math.Abs(math.Abs(dot)-1) > 1e-9 {
				t.Errorf("k=%d trial %d: eigenvector's cosine with gonum's %v", k, trial, dot)
			}
			if trial%5 != 4 && math.Abs(math.Abs(lz.s[k-1])-math.Abs(vecs.At(k-1, k-1))) > 1e-9 {
				t.Errorf("k=%d trial %d: |s_k| = %v, gonum %v", k, trial, lz.s[k-1], vecs.At(k-1, k-1))
			}
		}
	}
}

// maxEigUpperSym and minEigLowerSym (verified's Tri variants with a workspace
// reused across calls, one per worker) are internal/verified's MaxEigUpper
// and MinEigLower: the same bound bit for bit (the same operations in the
// same order; a reused buffer must not leak into a result) on random, indefinite, clustered,
// zero and non-finite matrices, with good, poor (Cholesky breakdowns and
// retries), NaN and infinite guesses.
func TestVerifiedCopy(t *testing.T) {
	rng := rand.New(rand.NewPCG(21, 22))
	var w cholWork
	for _, n := range []int{1, 2, 5, 32, 64} {
		for _, kind := range []string{"gauss", "psd", "lowrank", "cluster", "diag", "zero", "nan"} {
			k := kind
			if k == "nan" {
				k = "gauss"
			}
			a := randSym(rng, n, k)
			if kind == "nan" {
				a[n*n-1] = math.NaN()
			}
			// Lower triangle garbage: only the upper triangle may be read.
			for i := 0; i < n; i++ {
				for j := 0; j < i; j++ {
					a[i*n+j] = 1e300
				}
			}
			sd := mat.NewSymDense(n, append([]float64(nil), a...))
			var es mat.EigenSym
			top, bottom := 0.0, 0.0
			if kind != "nan" && es.Factorize(sd, false) {
				vals := es.Values(nil)
				top, bottom = vals[n-1], vals[0]
			}
			for _, g := range []float64{top, top - 1e-3, top + 1e-9, top - 1e-15, bottom, math.NaN(), math.Inf(1)} {
				want := verified.MaxEigUpper(sd, g)
				if got := maxEigUpperSym(a, n, g, &w); math.Float64bits(got) != math.Float64bits(want) {
					t.Errorf("n=%d %s guess %v: maxEigUpperSym %v, verified %v", n, kind, g, got, want)
				}
			}
			for _, g := range []float64{bottom, bottom + 1e-3, bottom - 1e-9, top, math.NaN(), math.Inf(-1)} {
				want := verified.MinEigLower(sd, g)
				if got := minEigLowerSym(a, n, g, &w); math.Float64bits(got) != math.Float64bits(want) {
					t.Errorf("n=%d %s guess %v: minEigLowerSym %v, verified %v", n, kind, g, got, want)
				}
			}
		}
	}
}

// The per-worker path of a cell (cellWork.value: reused buffers, phase
// reduction into a buffer) gives the estimate, bound and raw estimate of
// side.value bit for bit, and the same vector, on real and complex
// subspaces, both storages, one cellWork reused over many points.
func TestCellWorkMatchesSide(t *testing.T) {
	rng := rand.New(rand.NewPCG(31, 32))
	var ws []*subspace.Subspace
	for _, c := range []struct{ r, m, n int }{{6, 3, 8}, {20, 3, 8}, {8, 5, 4}} {
		w, err := subspace.New(context.Background(), subspace.Basis{Count: c.r, Rows: c.m, Cols: c.n, Data: reference.RandMatrices(rng, c.r, c.m, c.n)}, subspace.Options{})
		if err != nil {
			t.Fatal(err)
		}
		ws = append(ws, w)
	}
	data := make([]complex128, 4*2*6)
	for i := range data {
		data[i] = complex(rng.NormFloat64(), rng.NormFloat64())
	}
	wc, err := subspace.NewComplex(context.Background(), subspace.ComplexBasis{Count: 4, Rows: 2, Cols: 6, Data: data}, subspace.Options{})
	if err != nil {
		t.Fatal(err)
	}
	ws = append(ws, wc)
	for wi, w := range ws {
		sd := newSide(w)
		work := newCellWork(sd)
		for trial := 0; trial < 10; trial++ {
			c := reference.RandUnit(rng, sd.d)
			v1, v2 := make([]float64, sd.p), make([]float64, sd.p)
			if trial%2 == 1 {
				start := reference.RandUnit(rng, sd.p)
				copy(v1, start)
				copy(v2, start)
			}
			e1, u1, r1 := sd.value(c, v1)
			e2, u2, r2 := work.value(c, v2)
			if math.Float64bits(e1) != math.Float64bits(e2) || math.Float64bits(u1) != math.Float64bits(u2) || math.Float64bits(r1) != math.Float64bits(r2) {
				t.Errorf("subspace %d trial %d: side.value (%v, %v, %v), cellWork.value (%v, %v, %v)", wi, trial, e1, u1, r1, e2, u2, r2)
			}
			for i := range v1 {
				if math.Float64bits(v1[i]) != math.Float64bits(v2[i]) {
					t.Errorf("subspace %d trial %d: vectors differ at %d", wi, trial, i)
					break
				}
			}
			// The bound recomputed from raw (CheckCover's route) is the same.
			if b := sd.bound(c, r2); math.Float64bits(b) != math.Float64bits(u2) {
				t.Errorf("subspace %d trial %d: bound from raw %v, search %v", wi, trial, b, u2)
			}
		}
	}
}

// Branch-and-bound gives the same Result and the same recorded cover, bit
// for bit, with 1, 2 and 3 workers (DESIGN.md: the result does not depend
// on the number of workers), here on instances of a few thousand cells
// where the workers' runs of cells interleave in many ways.
func TestWorkersSameCover(t *testing.T) {
	sizes := []struct{ d, n int }{{3, 8}, {3, 16}}
	if !testing.Short() {
		sizes = append(sizes, struct{ d, n int }{4, 8})
	}
	for _, sz := range sizes {
		t.Run(fmt.Sprintf("%dx%d", sz.d, sz.n), func(t *testing.T) {
			in := suite.Random(sz.d, sz.n, sz.d*sz.n/2, 2)
			w, err := subspace.New(context.Background(), in.Basis, subspace.Options{})
			if err != nil {
				t.Fatal(err)
			}
			var ref Cover
			var refRes string
			for _, k := range []int{1, 2, 3} {
				var cv Cover
				r, err := (&BranchBound{Workers: k, Gap: 1e-5, MaxNodes: 20000, Record: &cv}).Search(context.Background(), w)
				if err != nil {
					t.Fatal(err)
				}
				res := fmt.Sprintf("%x %x %v %v %d %d %v", math.Float64bits(r.Lower), math.Float64bits(r.Upper), r.X, r.Y, r.Evaluations, r.Iterations, r.Status)
				if k == 1 {
					ref, refRes = cv, res
					if len(cv.Cells) < 500 {
						t.Logf("only %d cells", len(cv.Cells))
					}
					continue
				}
				if res != refRes {
					t.Errorf("workers %d: result %s, with 1 worker %s", k, res, refRes)
				}
				if len(cv.Cells) != len(ref.Cells) {
					t.Fatalf("workers %d: %d cells, with 1 worker %d", k, len(cv.Cells), len(ref.Cells))
				}
				for i := range cv.Cells {
					a, b := cv.Cells[i], ref.Cells[i]
					if a.Face != b.Face || math.Float64bits(a.Guess) != math.Float64bits(b.Guess) || fmt.Sprint(a.Lo, a.Hi) != fmt.Sprint(b.Lo, b.Hi) {
						t.Fatalf("workers %d: cell %d differs: %+v, with 1 worker %+v", k, i, a, b)
					}
				}
			}
		})
	}
}

// The worker pool runs every cell of every batch exactly once, for batches
// of 0 to 300 cells back to back and after pauses long enough for the
// helpers to park, with 1 to 5 workers on however many processors there
// are, and stops early (reporting false) once its context is cancelled.
func TestCellPool(t *testing.T) {
	sd := side{d: 2, p: 3}
	rng := rand.New(rand.NewPCG(41, 42))
	rounds := 2000
	if testing.Short() {
		rounds = 300
	}
	for workers := 1; workers <= 5; workers++ {
		work := make([]*cellWork, workers)
		for k := range work {
			work[k] = newCellWork(sd)
		}
		p := newCellPool(work)
		hits := make([]int32, 300)
		for round := 0; round < rounds; round++ {
			n := rng.IntN(301)
			if round%50 == 49 {
				time.Sleep(2 * helperSpin) // let the helpers park
			}
			clear(hits)
			if !p.run(context.Background(), n, func(ws *cellWork, i int) {
				atomic.AddInt32(&hits[i], 1)
				ws.c[0]++ // each worker's own buffer: no data race
			}) {
				t.Fatalf("workers %d round %d: reported a cancellation", workers, round)
			}
			for i := 0; i < n; i++ {
				if hits[i] != 1 {
					t.Fatalf("workers %d round %d: cell %d of %d ran %d times", workers, round, i, n, hits[i])
				}
			}
		}
		ctx, cancel := context.WithCancel(context.Background())
		var ran atomic.Int32
		ok := p.run(ctx, 300, func(ws *cellWork, i int) {
			if ran.Add(1) == 10 {
				cancel()
			}
		})
		if ok || ran.Load() >= 300 {
			t.Errorf("workers %d: cancelled batch reported %v after %d cells", workers, ok, ran.Load())
		}
		cancel()
		p.close()
	}
}
