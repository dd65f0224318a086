package rankone

import (
	"context"
	"math"
	"math/big"
	"math/rand/v2"
	"sync/atomic"
	"testing"

	"github.com/segre-lab/segre/internal/reference"
	"github.com/segre-lab/segre/subspace"
)

// ParallelFor runs each index exactly once for any number of workers, and
// starts no index after its context is done (derived: the contract).
func TestParallelFor(t *testing.T) {
	for _, workers := range []int{0, 1, 2, 7, 100} {
		const n = 1000
		var hits [n]atomic.Int32
		if err := ParallelFor(context.Background(), n, workers, func(k, i int) { hits[i].Add(1) }); err != nil {
			t.Fatal(err)
		}
		for i := range hits {
			if hits[i].Load() != 1 {
				t.Fatalf("workers %d: index %d run %d times", workers, i, hits[i].Load())
			}
		}
	}
	// Cancelled mid-run: after cancel() has returned, each worker finishes
	// at most the item it had already started (the contract), so the count
	// ends at most workers above the count seen when cancel returned.
	ctx, cancel := context.WithCancel(context.Background())
	var ran, atCancel atomic.Int32
	err := ParallelFor(ctx, 1000, 2, func(k, i int) {
		if ran.Add(1) == 10 {
			cancel()
			atCancel.Store(ran.Load())
		}
	})
	if err == nil || ran.Load() > atCancel.Load()+1 {
		t.Errorf("cancelled: err %v, %d items after %d at cancel (at most one more per worker)", err, ran.Load(), atCancel.Load())
	}
	// Cancelled before the start: nothing runs.
	var none atomic.Int32
	if err := ParallelFor(ctx, 100, 2, func(k, i int) { none.Add(1) }); err == nil || none.Load() != 0 {
		t.Errorf("already cancelled: err %v, %d items run", err, none.Load())
	}
	if err := ParallelFor(context.Background(), 0, 4, func(k, i int) { t.Error("called for n = 0") }); err != nil {
		t.Error(err)
	}
}

// WitnessResult's Upper is Verify at the returned (unit) witness; an
// unusable witness gives the trivial result, still valid.
func TestWitnessResult(t *testing.T) {
	rng := rand.New(rand.NewPCG(71, 72))
	w, err := subspace.New(context.Background(), subspace.Basis{Count: 3, Rows: 3, Cols: 4, Data: reference.RandMatrices(rng, 3, 3, 4)}, subspace.Options{})
	if err != nil {
		t.Fatal(err)
	}
	x, y := []float64{3, -1, 2}, []float64{0.5, 1, 0, -2}
	r := WitnessResult(w, "mine", x, y)
	u, err := Verify(w, r.X, r.Y)
	if err != nil || u != r.Upper {
		t.Errorf("Upper %v, Verify at the witness %v (%v)", r.Upper, u, err)
	}
	// Unit length to rounding (common practice: a few ulps).
	for _, v := range [][]float64{r.X, r.Y} {
		var s float64
		for _, a := range v {
			s += a * a
		}
		if math.Abs(s-1) > 1e-15 {
			t.Errorf("witness not unit: ‖·‖² = %v", s)
		}
	}
	for _, bad := range [][2][]float64{{{0, 0, 0}, y}, {x, {math.NaN(), 1, 1, 1}}, {x[:2], y}} {
		r := WitnessResult(w, "mine", bad[0], bad[1])
		tx, ty, tu := TrivialWitness(w)
		if r.Upper != tu || len(r.X) != len(tx) || len(r.Y) != len(ty) {
			t.Errorf("bad witness %v: %+v", bad, r)
		}
	}
}

// DistanceLower and ValueLower round in the safe direction, checked in
// 200-bit arithmetic: DistanceLower(h)² ≤ 1 − h and ValueLower(u) ≤ 1 − u².
func TestSafeConversions(t *testing.T) {
	rng := rand.New(rand.NewPCG(73, 74))
	one := new(big.Float).SetPrec(200).SetInt64(1)
	for i := 0; i < 20000; i++ {
		h := rng.Float64()
		if i%3 == 0 {
			h = 1 - math.Ldexp(rng.Float64(), -rng.IntN(50))
		}
		d := new(big.Float).SetPrec(200).SetFloat64(DistanceLower(h))
		d.Mul(d, d)
		rest := new(big.Float).SetPrec(200).Sub(one, new(big.Float).SetPrec(200).SetFloat64(h))
		if d.Cmp(rest) > 0 {
			t.Fatalf("DistanceLower(%v)² above 1 − h", h)
		}
		u := rng.Float64()
		v := new(big.Float).SetPrec(200).SetFloat64(ValueLower(u))
		uu := new(big.Float).SetPrec(200).SetFloat64(u)
		uu.Mul(uu, uu)
		if v.Cmp(new(big.Float).SetPrec(200).Sub(one, uu)) > 0 {
			t.Fatalf("ValueLower(%v) above 1 − u²", u)
		}
	}
	if DistanceLower(1) != 0 || DistanceLower(math.NaN()) != 0 || DistanceLower(2) != 0 {
		t.Error("DistanceLower of h ≥ 1 or NaN must be 0")
	}
}
