package rankone_test

import (
	"context"
	"errors"
	"math"
	"math/rand/v2"
	"slices"
	"testing"

	"github.com/segre-lab/segre/internal/reference"
	"github.com/segre-lab/segre/rankone"
	"github.com/segre-lab/segre/rankone/searchtest"
	"github.com/segre-lab/segre/rankone/suite"
	"github.com/segre-lab/segre/subspace"
)

// batchSubspaces covers each way a batched ALS computes: operators through
// the pair form (formed: true), factors with formed matrices (20×30, the
// 6×40 G side), factors with Lanczos on the factored form (the 6×40 H
// side, order 40 > 32), W⊥ stored with either form (4×5 with k = 15, 3×3
// with k = 5; 8×8 with k = 60), and a complex subspace (factors).
func batchSubspaces(t *testing.T) map[string]*subspace.Subspace {
	t.Helper()
	out := map[string]*subspace.Subspace{}
	for _, c := range []struct {
		name   string
		in     suite.Instance
		formed bool
	}{
		{"random/5x7/k9", suite.Random(5, 7, 9, 1), true},
		{"planted/20x30/k40", suite.Planted(20, 30, 40, 1), false},
		{"planted/6x40/k8", suite.Planted(6, 40, 8, 2), false},
		{"random/4x5/k15/complement", suite.Random(4, 5, 15, 3), true},
		{"random/8x8/k60/complement", suite.Random(8, 8, 60, 5), false},
		{"random/3x3/k5/complement", suite.Random(3, 3, 5, 6), true},
	} {
		w := suite.MustNew(t, c.in)
		var ob subspace.OperatorBatch
		w.SearchGBatch(&ob, [][]float64{make([]float64, w.Cols())})
		if ob.Formed() != c.formed {
			t.Fatalf("%s: Formed %v, the case is meant for %v", c.name, ob.Formed(), c.formed)
		}
		out[c.name] = w
	}
	out["complex/planted/3x4/k5"] = suite.MustNewComplex(t, suite.ComplexPlanted(3, 4, 5, 1))
	return out
}

// randomStarts returns count unit starts for w from a fixed seed.
func randomStarts(w *subspace.Subspace, count int, seed uint64) (xs, ys [][]float64) {
	rng := rand.New(rand.NewPCG(seed, 99))
	unit := func(k int) []float64 { return reference.RandUnit(rng, k) }
	for range count {
		xs, ys = append(xs, unit(w.Rows())), append(ys, unit(w.Cols()))
	}
	return xs, ys
}

func cloneAll(v [][]float64) [][]float64 {
	out := make([][]float64, len(v))
	for i := range v {
		out[i] = slices.Clone(v[i])
	}
	return out
}

func sameBits(a, b []float64) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if math.Float64bits(a[i]) != math.Float64bits(b[i]) {
			return false
		}
	}
	return true
}

func sameStats(a, b rankone.Stats) bool {
	return a.Iterations == b.Iterations && a.Evaluations == b.Evaluations && a.Status == b.Status &&
		math.Float64bits(a.Value) == math.Float64bits(b.Value) && math.Float64bits(a.Gradient) == math.Float64bits(b.Gradient)
}

// ALS from 32 starts stepped together, in batches of 3 taken in reverse
// order, and one by one through Refine (a batch of one) gives every start
// the same end point and Stats, bit for bit: a start's numbers depend on
// its own operators only (subspace.SearchGBatch's notes, and ALS's
// eigensolver reads nothing else). MaxIter 60 keeps the Gaussian starts
// short; some stop by it, which must agree too.
func TestALSBatchSameAsSingle(t *testing.T) {
	ctx := context.Background()
	for name, w := range batchSubspaces(t) {
		t.Run(name, func(t *testing.T) {
			const count = 32
			xs, ys := randomStarts(w, count, 3)
			a := &rankone.ALS{MaxIter: 60}
			bx, by := cloneAll(xs), cloneAll(ys)
			all, err := a.RefineBatch(ctx, w, bx, by)
			if err != nil {
				t.Fatal(err)
			}
			tx, ty := cloneAll(xs), cloneAll(ys)
			threes := make([]rankone.Stats, count)
			for hi := count; hi > 0; hi -= 3 {
				lo := max(0, hi-3)
				st, err := a.RefineBatch(ctx, w, tx[lo:hi], ty[lo:hi])
				if err != nil {
					t.Fatal(err)
				}
				copy(threes[lo:hi], st)
			}
			converged := 0
			for i := range count {
				x, y := slices.Clone(xs[i]), slices.Clone(ys[i])
				one, err := a.Refine(ctx, w, x, y)
				if err != nil {
					t.Fatal(err)
				}
				if !sameStats(one, all[i]) || !sameBits(x, bx[i]) || !sameBits(y, by[i]) {
					t.Fatalf("start %d: batch of %d %+v, alone %+v", i, count, all[i], one)
				}
				if !sameStats(one, threes[i]) || !sameBits(x, tx[i]) || !sameBits(y, ty[i]) {
					t.Fatalf("start %d: batch of 3 %+v, alone %+v", i, threes[i], one)
				}
				if one.Status == rankone.Converged {
					converged++
				}
			}
			// The comparison is of real runs: some starts must have
			// converged (else the test could pass on starts that never moved).
			if converged == 0 {
				t.Errorf("no start converged in %d iterations", a.MaxIter)
			}
		})
	}
}

// A batched run ends at the points ALS's stopping rule claims: the Value
// it reports is h at the returned point (to rounding: a fresh Value of
// the subspace, 1e-12, common practice for two orders of the same sums),
// and a converged start's Riemannian gradient is at most GradTol or the
// floating-point floor that floorStatus accepts (1e-6), recomputed here
// from the subspace's own Gradient (derived here: grad_x h = 2G(y)x,
// grad_y h = 2H(x)y, projected on the tangent spaces).
func TestALSBatchEndPoints(t *testing.T) {
	ctx := context.Background()
	for name, w := range batchSubspaces(t) {
		t.Run(name, func(t *testing.T) {
			xs, ys := randomStarts(w, 8, 4)
			st, err := (&rankone.ALS{}).RefineBatch(ctx, w, xs, ys)
			if err != nil {
				t.Fatal(err)
			}
			for i := range xs {
				x, y := xs[i], ys[i]
				if h := w.Value(x, y); math.Abs(h-st[i].Value) > 1e-12 {
					t.Errorf("start %d: Value %v, h at the point %v", i, st[i].Value, h)
				}
				if st[i].Status != rankone.Converged {
					continue
				}
				gx, gy := make([]float64, len(x)), make([]float64, len(y))
				h := w.Gradient(gx, gy, x, y, nil)
				var g float64
				for k := range gx {
					d := gx[k] - 2*h*x[k]
					g += d * d
				}
				for k := range gy {
					d := gy[k] - 2*h*y[k]
					g += d * d
				}
				if g = math.Sqrt(g); g > 1e-6 {
					t.Errorf("start %d converged with gradient %v", i, g)
				}
			}
		})
	}
}

// A cancelled context: every start reports Cancelled with its value and
// RefineBatch returns ctx.Err(); the points are still unit vectors.
func TestALSBatchCancelled(t *testing.T) {
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	w := suite.MustNew(t, suite.Random(6, 7, 9, 8))
	xs, ys := randomStarts(w, 5, 5)
	st, err := (&rankone.ALS{}).RefineBatch(ctx, w, xs, ys)
	if err != context.Canceled {
		t.Fatalf("error %v", err)
	}
	for i := range st {
		if st[i].Status != rankone.Cancelled || !(st[i].Value >= 0 && st[i].Value <= 1+1e-12) {
			t.Errorf("start %d: %+v", i, st[i])
		}
	}
}

// RefineBatch panics on starts of the wrong length (a programming error).
func TestALSBatchPanics(t *testing.T) {
	w := suite.MustNew(t, suite.Random(3, 4, 5, 9))
	for name, f := range map[string]func(){
		"count": func() { (&rankone.ALS{}).RefineBatch(context.Background(), w, [][]float64{{1, 0, 0}}, nil) },
		"length": func() {
			(&rankone.ALS{}).RefineBatch(context.Background(), w, [][]float64{{1, 0}}, [][]float64{{1, 0, 0, 0}})
		},
	} {
		func() {
			defer func() {
				if recover() == nil {
					t.Errorf("%s: no panic", name)
				}
			}()
			f()
		}()
	}
}

// MultiStart over ALS passes the conformance suite, and its Result is the
// same bit for bit for batches of 1, 3 and 32 starts and for 1 and 2
// workers (searchtest's SameAs). Accuracy 1e-10 as claimed for ALS alone
// (conformance_test.go): start 0 is ALS's own spectral start, and
// MultiStart keeps the best start.
func TestMultiStartALSBatches(t *testing.T) {
	variant := func(batch, workers int) func() rankone.Searcher {
		return func() rankone.Searcher {
			return &rankone.MultiStart{Method: &rankone.ALS{}, Starts: 12, Seed: 4, Batch: batch, Workers: workers}
		}
	}
	searchtest.Run(t, variant(32, 1), searchtest.Options{
		Accuracy: 1e-10,
		SameAs:   []func() rankone.Searcher{variant(1, 1), variant(3, 1), variant(3, 2), variant(32, 2)},
	})
}

// A negative MultiStart.Batch is refused like every other setting.
func TestMultiStartBatchSetting(t *testing.T) {
	w := suite.MustNew(t, suite.Random(3, 4, 5, 9))
	_, err := (&rankone.MultiStart{Method: &rankone.ALS{}, Batch: -1}).Search(context.Background(), w)
	if !errors.Is(err, rankone.ErrOption) {
		t.Fatalf("error %v, want ErrOption", err)
	}
}
