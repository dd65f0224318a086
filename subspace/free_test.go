package subspace

import (
	"context"
	"math"
	"math/rand/v2"
	"testing"
)

// A search operator held free of its factor (freeSide) gives the factored
// operator's numbers bit for bit (derived at ApplyG and ApplyH, which it
// calls: the factor's rows are made by the same kernels, and the batches
// add in order of t as one axpyRows does), alone and in a batch, for
// both sides, with W and with W⊥ stored, src and dst the same slice or
// not. The batch's free operators
// agree with its factored ones (tiles, which may fuse) to 1e-12 relative,
// common practice for two orderings of the same sums (see
// TestBatchMatchesOperators).
func TestFreeOperators(t *testing.T) {
	rng := rand.New(rand.NewPCG(21, 22))
	for _, sh := range [][3]int{{2, 300, 250}, {2, 300, 450}, {300, 3, 200}, {4, 90, 100}} {
		m, n, k := sh[0], sh[1], sh[2]
		w, err := New(context.Background(), randBasis(rng, k, m, n), Options{})
		if err != nil {
			t.Fatal(err)
		}
		name := itoa(m) + "x" + itoa(n) + "/k" + itoa(k)
		if w.StoresComplement() {
			name += "/complement"
		}
		const B = 6
		xs, ys := randPoints(rng, B, m), randPoints(rng, B, n)
		var factored [2]OperatorBatch
		w.SearchGBatch(&factored[0], ys)
		w.SearchHBatch(&factored[1], xs)
		saved := freeMinEntries
		freeMinEntries = 1
		var free [2]OperatorBatch
		w.SearchGBatch(&free[0], ys)
		w.SearchHBatch(&free[1], xs)
		for side := 0; side < 2; side++ {
			p := []int{m, n}[side]
			if other := []int{n, m}[side]; other > freeMaxSide {
				if free[side].free != nil {
					t.Fatalf("%s side %d: free with the other side %d", name, side, other)
				}
				continue
			}
			if free[side].free == nil {
				t.Fatalf("%s side %d: not free", name, side)
			}
			for b := 0; b < B; b++ {
				var alone, ref *Operator
				if side == 0 {
					alone, ref = w.SearchGOperator(ys[b]), w.GOperator(ys[b])
				} else {
					alone, ref = w.SearchHOperator(xs[b]), w.HOperator(xs[b])
				}
				if alone.free == nil {
					t.Fatalf("%s side %d: the single operator is not free", name, side)
				}
				v := randSlice(rng, p)
				// SearchApply: the operator's Apply without its factor.
				direct, viaOp := make([]float64, p), make([]float64, p)
				if side == 0 {
					w.SearchApplyG(direct, ys[b], v)
				} else {
					w.SearchApplyH(direct, xs[b], v)
				}
				ref.Apply(viaOp, v)
				if !bitsEqual(direct, viaOp) {
					t.Fatalf("%s side %d point %d: SearchApply differs from the operator's Apply", name, side, b)
				}
				want, got, inPlace, batch, tiles := make([]float64, p), make([]float64, p), append([]float64(nil), v...), make([]float64, p), make([]float64, p)
				ref.Apply(want, v)
				alone.Apply(got, v)
				alone.Apply(inPlace, inPlace)
				free[side].Apply(b, batch, v)
				factored[side].Apply(b, tiles, v)
				for i, out := range [][]float64{got, inPlace, batch} {
					if !bitsEqual(out, want) {
						t.Fatalf("%s side %d point %d: free result %d differs from the factored operator's", name, side, b, i)
					}
				}
				var diff, nrm float64
				for i := range want {
					diff += (want[i] - tiles[i]) * (want[i] - tiles[i])
					nrm += want[i] * want[i]
				}
				if math.Sqrt(diff) > 1e-12*math.Sqrt(nrm) {
					t.Errorf("%s side %d point %d: free and tiled batches differ by %g (|A v| %g)", name, side, b, math.Sqrt(diff), math.Sqrt(nrm))
				}
			}
			// Matrix of a free operator: its columns are Apply's.
			a := make([]float64, p*p)
			free[side].Matrix(0, a)
			e, col := make([]float64, p), make([]float64, p)
			for j := 0; j < p; j += max(1, p/7) {
				e[j] = 1
				free[side].Apply(0, col, e)
				e[j] = 0
				for i := 0; i <= j; i++ {
					if a[i*p+j] != col[i] || a[j*p+i] != col[i] {
						t.Fatalf("%s side %d: Matrix (%d, %d) is not Apply's column", name, side, i, j)
					}
				}
			}
		}
		freeMinEntries = saved
	}
}

// SearchApplyG and SearchApplyH give the search operators' Apply bit for
// bit (derived at ApplyG and ApplyH, which they call for a real
// subspace), for both sides of real subspaces with W and with W⊥ stored,
// and of a complex one (where they are that Apply).
func TestSearchApply(t *testing.T) {
	rng := rand.New(rand.NewPCG(23, 24))
	for _, c := range batchCases(t, rng) {
		w := c.w
		for trial := 0; trial < 3; trial++ {
			x, y := randSlice(rng, w.Rows()), randSlice(rng, w.Cols())
			u, v := randSlice(rng, w.Rows()), randSlice(rng, w.Cols())
			g1, g2 := make([]float64, w.Rows()), make([]float64, w.Rows())
			h1, h2 := make([]float64, w.Cols()), make([]float64, w.Cols())
			w.SearchApplyG(g1, y, u)
			w.SearchGOperator(y).Apply(g2, u)
			w.SearchApplyH(h1, x, v)
			w.SearchHOperator(x).Apply(h2, v)
			if !bitsEqual(g1, g2) || !bitsEqual(h1, h2) {
				t.Fatalf("%s: SearchApply differs from the operator's Apply", c.name)
			}
		}
	}
}

// An OperatorBatch reused from a free batch for another subspace (pair
// form, factors) gives what a fresh one gives, bit for bit: no mark of
// the free batch is left (derived here: every builder sets or clears it).
func TestFreeBatchReused(t *testing.T) {
	rng := rand.New(rand.NewPCG(25, 26))
	ctx := context.Background()
	tiny, err := New(ctx, randBasis(rng, 250, 2, 300), Options{})
	if err != nil {
		t.Fatal(err)
	}
	saved := freeMinEntries
	freeMinEntries = 1
	defer func() { freeMinEntries = saved }()
	for _, sh := range [][3]int{{5, 7, 9}, {20, 30, 40}} {
		w, err := New(ctx, randBasis(rng, sh[2], sh[0], sh[1]), Options{})
		if err != nil {
			t.Fatal(err)
		}
		var reused, fresh OperatorBatch
		tiny.SearchHBatch(&reused, randPoints(rng, 5, 2))
		if reused.free == nil {
			t.Fatal("the first batch is not free")
		}
		ys := randPoints(rng, 5, sh[1])
		w.SearchGBatch(&reused, ys)
		w.SearchGBatch(&fresh, ys)
		if reused.free != nil {
			t.Fatalf("%dx%d: the reused batch keeps the free mark", sh[0], sh[1])
		}
		p := sh[0]
		a, b := make([]float64, p*p), make([]float64, p*p)
		for k := 0; k < 5; k++ {
			reused.Matrix(k, a)
			fresh.Matrix(k, b)
			if !bitsEqual(a, b) {
				t.Fatalf("%dx%d: point %d: the reused batch differs", sh[0], sh[1], k)
			}
		}
	}
}
