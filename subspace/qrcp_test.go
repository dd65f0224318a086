package subspace

import (
	"context"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"runtime"
	"sync/atomic"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// lowRank returns r matrices of m×n whose vectorisations are U·c_t for a
// random L×k U and random c_t (so the span has dimension min(k, r)),
// scaled column by column by sv[0..k) before mixing when sv is given
// (singular values of the generator, derived: U has orthonormal columns
// after gonum's QR, so the columns of U·diag(sv)·C span the same space).
func lowRank(rng *rand.Rand, r, m, n, k int, sv []float64) Basis {
	L := m * n
	u := mat.NewDense(L, k, nil)
	for i := 0; i < L; i++ {
		for j := 0; j < k; j++ {
			u.Set(i, j, rng.NormFloat64())
		}
	}
	var qr mat.QR
	qr.Factorize(u)
	var q mat.Dense
	qr.QTo(&q)
	data := make([]float64, r*L)
	for t := 0; t < r; t++ {
		c := make([]float64, k)
		for j := range c {
			c[j] = rng.NormFloat64()
			if sv != nil {
				c[j] *= sv[j]
			}
		}
		for i := 0; i < L; i++ {
			var s float64
			for j := 0; j < k; j++ {
				s += q.At(i, j) * c[j]
			}
			data[t*L+i] = s
		}
	}
	return Basis{Count: r, Rows: m, Cols: n, Data: data}
}

// unitColumns returns the L×r matrix of the unit-normalised inputs (the
// matrix New factors), with gonum.
func unitColumns(b Basis) *mat.Dense {
	L := b.Rows * b.Cols
	a := mat.NewDense(L, b.Count, nil)
	for t := 0; t < b.Count; t++ {
		col := mat.NewVecDense(L, append([]float64(nil), b.Data[t*L:(t+1)*L]...))
		col.ScaleVec(1/mat.Norm(col, 2), col)
		a.SetCol(t, col.RawVector().Data)
	}
	return a
}

// distToSpan returns the distance of each column of a to the span of the
// columns listed in kept, by gonum's QR of those columns (a general-purpose
// reference library).
func distToSpan(a *mat.Dense, kept []int) []float64 {
	L, r := a.Dims()
	out := make([]float64, r)
	if len(kept) == 0 {
		for j := range out {
			out[j] = mat.Norm(a.ColView(j), 2)
		}
		return out
	}
	ak := mat.NewDense(L, len(kept), nil)
	for c, j := range kept {
		ak.SetCol(c, mat.Col(nil, j, a))
	}
	var qr mat.QR
	qr.Factorize(ak)
	var q mat.Dense
	qr.QTo(&q)
	qk := q.Slice(0, L, 0, len(kept))
	for j := 0; j < r; j++ {
		col := a.ColView(j)
		var c, p mat.VecDense
		c.MulVec(qk.T(), col)
		p.MulVec(qk, &c)
		p.SubVec(col, &p)
		out[j] = mat.Norm(&p, 2)
	}
	return out
}

// The blocked factorisation keeps the rank rule of Options.RankTol on
// shapes where the sketch chooses the pivots (more than qrPanelMax
// columns and rows), with the rank reached inside a block (100, 110), the
// complement stored, more matrices than entries, all entries kept (144 of
// 160, the whole space), and graded singular values: every column
// kept had, at its step, distance greater than tol to the span of those
// kept before it (its |R_jj|, checked against gonum's QR of the kept
// columns), and every column left out is within tol of the span of those
// kept (gonum). Tolerances: the computed factorisation is that of A + ΔA
// with ‖Δa_j‖ ≤ γ̃_{cL}‖a_j‖ (Higham 2002, Thm 19.4), so the computed and
// reference distances agree to about L·u·√k ≤ 1e-12 for these sizes
// (L ≤ 256, k ≤ 150); the promise is checked with an allowance of 1e-11.
func TestBlockedQRRankRule(t *testing.T) {
	rng := rand.New(rand.NewPCG(41, 42))
	graded := make([]float64, 120)
	for i := range graded {
		graded[i] = math.Pow(10, -float64(i)/12) // 1 down to 1e-10 (derived: 10^(−119/12))
	}
	cases := []struct {
		name    string
		b       Basis
		tol     float64
		wantDim int // from the construction (0: no claim beyond the rule)
	}{
		{"full-space", randBasis(rng, 160, 12, 12), 0, 144},
		{"wide-rank-100", lowRank(rng, 300, 10, 15, 100, nil), 0, 100},
		{"tall-rank-110", lowRank(rng, 170, 16, 16, 110, nil), 0, 110},
		{"graded-1e-6", lowRank(rng, 170, 16, 16, 120, graded), 1e-6, 0},
	}
	const slack = 1e-11
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			w, err := New(context.Background(), c.b, Options{RankTol: c.tol})
			if err != nil {
				t.Fatal(err)
			}
			if c.wantDim > 0 && w.Dim() != c.wantDim {
				t.Errorf("Dim = %d, want %d", w.Dim(), c.wantDim)
			}
			// The same factorisation as New's, to see its pivots.
			in, err := normalise(c.b, false)
			if err != nil {
				t.Fatal(err)
			}
			L := c.b.Rows * c.b.Cols
			f := pivotedQR(in.a, len(in.orig), L, w.RankTol(), func() bool { return false })
			if f.k != w.Dim() {
				t.Fatalf("pivotedQR keeps %d, New %d", f.k, w.Dim())
			}
			a := unitColumns(c.b)
			kept := make([]int, f.k)
			for j := range kept {
				kept[j] = in.orig[f.perm[j]]
			}
			tol := w.RankTol()
			// Every step's check would cost f.k gonum QRs: a dozen steps spread
			// over the run, and the last.
			for i := 0; i <= 12; i++ {
				j := min(f.k-1, f.k*i/12)
				d := distToSpan(a, kept[:j])[kept[j]]
				if !(math.Abs(f.diag[j]) > tol) || math.Abs(math.Abs(f.diag[j])-d) > slack {
					t.Fatalf("kept column %d (step %d): |R_jj| = %g, gonum distance %g, tol %g", kept[j], j, f.diag[j], d, tol)
				}
			}
			dist := distToSpan(a, kept)
			worst := 0.0
			for j := 0; j < c.b.Count; j++ {
				worst = math.Max(worst, dist[j])
			}
			if worst > tol+slack {
				t.Errorf("a column left out is %g from the span kept, tol %g", worst, tol)
			}
			if kept, left := w.RankGap(); f.k < c.b.Count && !(left <= tol && kept > tol) {
				t.Errorf("rank gap (%g, %g), tol %g", kept, left, tol)
			}
			rec, orth := w.BackwardError()
			// Householder QR: backward error and loss of orthogonality of order
			// L·u (Higham 2002, Thm 19.4 and §19.3); 1e-12 ≫ 256·1.1e-16. The
			// columns left out add their remaining norms, each at most tol, to
			// the reconstruction: rec² ≤ ((r−k)/r)·tol² + rounding (derived).
			if rec > tol+1e-12 || orth > 1e-12 || w.OrthogonalityBound() < orth {
				t.Errorf("reconstruction %g, orthogonality %g, η %g", rec, orth, w.OrthogonalityBound())
			}
			t.Logf("dim %d, largest distance left out %.3g, rank gap %v", w.Dim(), worst, fmt.Sprint(w.RankGap()))
		})
	}
}

// The stored basis spans the subspace gonum's SVD finds, on shapes where
// the sketch chooses the pivots: Value agrees with gonum's projector at
// random rank-one points (the reference of TestContractionsAgainstGonum),
// whether W or W⊥ is stored, with the assembly tile and the portable one.
func TestBlockedQRAgainstGonum(t *testing.T) {
	rng := rand.New(rand.NewPCG(43, 44))
	cases := []struct {
		name    string
		r, m, n int
	}{
		{"W-stored", 150, 16, 20},
		{"complement", 220, 16, 20},
	}
	kernelPaths(t, func(t *testing.T) {
		for _, c := range cases {
			b := randBasis(rng, c.r, c.m, c.n)
			w, err := New(context.Background(), b, Options{})
			if err != nil {
				t.Fatal(err)
			}
			p, k := refProjector(t, b)
			if w.Dim() != k || w.StoresComplement() != (c.m*c.n-k < k) {
				t.Fatalf("%s: Dim %d (complement %v), gonum rank %d", c.name, w.Dim(), w.StoresComplement(), k)
			}
			rec, orth := w.BackwardError()
			// As in TestContractionsAgainstGonum (Higham 2002, Thm 19.4).
			if rec > 1e-13 || orth > 1e-13 {
				t.Errorf("%s: backward error %g, orthogonality %g", c.name, rec, orth)
			}
			for trial := 0; trial < 5; trial++ {
				x, y := randUnit(rng, c.m), randUnit(rng, c.n)
				v := kronVec(x, y)
				var pv mat.VecDense
				pv.MulVec(p, v)
				if got, want := w.Value(x, y), mat.Dot(v, &pv); math.Abs(got-want) > 1e-12 {
					t.Errorf("%s: Value %v, gonum %v", c.name, got, want)
				}
			}
		}
	})
}

// New gives the same Subspace, bit for bit, whatever GOMAXPROCS (derived:
// the products compute every entry as the same sums in the same order on
// any worker, gemm.go; the norms are computed row by row in fixed chunks).
func TestNewSameForAnyWorkers(t *testing.T) {
	rng := rand.New(rand.NewPCG(45, 46))
	bases := []Basis{randBasis(rng, 200, 16, 20), randBasis(rng, 250, 12, 15), lowRank(rng, 200, 16, 16, 150, nil)}
	keep := runtime.GOMAXPROCS(0)
	defer runtime.GOMAXPROCS(keep)
	for bi, b := range bases {
		var first *Subspace
		for _, procs := range []int{1, 2, 3} {
			runtime.GOMAXPROCS(procs)
			w, err := New(context.Background(), b, Options{})
			if err != nil {
				t.Fatal(err)
			}
			if first == nil {
				first = w
				continue
			}
			if w.k != first.k || w.s != first.s || w.recon != first.recon || w.eta != first.eta || w.rankKept != first.rankKept || w.rankLeft != first.rankLeft {
				t.Fatalf("basis %d, GOMAXPROCS %d: (k %d, s %d, rec %v, η %v) vs (%d, %d, %v, %v)", bi, procs, w.k, w.s, w.recon, w.eta, first.k, first.s, first.recon, first.eta)
			}
			for i := range w.q {
				if math.Float64bits(w.q[i]) != math.Float64bits(first.q[i]) {
					t.Fatalf("basis %d, GOMAXPROCS %d: stored entry %d differs", bi, procs, i)
				}
			}
		}
	}
}

// countCtx reports context.Canceled from its after-th call to Err on:
// a cancellation at a chosen point of New, reproducible.
type countCtx struct {
	context.Context
	calls *atomic.Int64
	after int64
}

func (c countCtx) Err() error {
	if c.calls.Add(1) > c.after {
		return context.Canceled
	}
	return nil
}

// A cancellation anywhere in New (between blocks, inside the products, in
// the reconstruction, the complement, the Gram matrix) returns nil and an
// error wrapping context.Canceled, without panicking or changing the input.
func TestNewCancelledAnywhere(t *testing.T) {
	rng := rand.New(rand.NewPCG(47, 48))
	for _, b := range []Basis{randBasis(rng, 300, 16, 16), randBasis(rng, 200, 16, 16)} {
		keep := append([]float64(nil), b.Data...)
		var total atomic.Int64
		if _, err := New(countCtx{context.Background(), &total, math.MaxInt64}, b, Options{}); err != nil {
			t.Fatal(err)
		}
		n := total.Load()
		for i := int64(0); i < 12; i++ {
			var calls atomic.Int64
			after := n * i / 12
			w, err := New(countCtx{context.Background(), &calls, after}, b, Options{})
			if w != nil || !errors.Is(err, context.Canceled) {
				t.Fatalf("cancelled after %d of %d checks: %v, %v", after, n, w, err)
			}
		}
		for i := range keep {
			if math.Float64bits(keep[i]) != math.Float64bits(b.Data[i]) {
				t.Fatal("input changed")
			}
		}
	}
}

// Options.Progress sees fractions in [0, 1] that never decrease, the last
// being 1; nil is allowed (every other test).
func TestNewProgress(t *testing.T) {
	rng := rand.New(rand.NewPCG(49, 50))
	var got []float64
	_, err := New(context.Background(), randBasis(rng, 300, 16, 16), Options{Progress: func(f float64) { got = append(got, f) }})
	if err != nil {
		t.Fatal(err)
	}
	if len(got) == 0 || got[len(got)-1] != 1 {
		t.Fatalf("progress %v: want a last report of 1", got)
	}
	for i, f := range got {
		if !(f >= 0 && f <= 1) || (i > 0 && f < got[i-1]) {
			t.Fatalf("progress %v", got)
		}
	}
}

// New allocates no more than workBytes promises (the memory limit is
// checked against workBytes before anything is allocated), on the shapes
// of each path: one greedy panel, sketched pivots, W stored, W⊥ stored,
// more matrices than entries, a low rank, more Gram panels than fit in the
// reconstruction's buffer (500 of 2×500). Allocation is counted in total
// (runtime.MemStats.TotalAlloc), which bounds the peak from above.
func TestNewAllocationWithinWorkBytes(t *testing.T) {
	rng := rand.New(rand.NewPCG(51, 52))
	for _, b := range []Basis{
		randBasis(rng, 40, 8, 9), randBasis(rng, 60, 8, 9), randBasis(rng, 300, 20, 20),
		randBasis(rng, 150, 20, 20), randBasis(rng, 500, 10, 20), lowRank(rng, 300, 20, 20, 170, nil),
		randBasis(rng, 2, 2, 2000), randBasis(rng, 500, 2, 500),
	} {
		var before, after runtime.MemStats
		runtime.GC()
		runtime.ReadMemStats(&before)
		if _, err := New(context.Background(), b, Options{}); err != nil {
			t.Fatal(err)
		}
		runtime.ReadMemStats(&after)
		got, limit := after.TotalAlloc-before.TotalAlloc, workBytes(b.Count, b.Rows*b.Cols)
		if got > uint64(limit) {
			t.Errorf("%d matrices of %d×%d: allocated %d bytes, workBytes %d", b.Count, b.Rows, b.Cols, got, limit)
		}
	}
}
