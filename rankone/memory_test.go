package rankone_test

import (
	"context"
	"math"
	"runtime"
	"testing"

	"github.com/segre-lab/segre/rankone"
	"github.com/segre-lab/segre/rankone/suite"
	"github.com/segre-lab/segre/subspace"
)

// The size guard of derived structures: on a 2×200000 subspace the n×n
// partial trace would need 320 GB. With the default limit (4 GiB) and with
// a small settable one (64 MiB) the flattening bound skips that side and
// allocates less than the limit in total (all allocations counted, not only
// the peak), and it, the Flattening searcher and the portfolio still give
// the exact bound from the 2×2 side (one matrix:
// the flattening bound is σ₁²/‖B‖², exact by Eckart–Young; d* from the
// suite, computed with gonum's SVD).
func TestMemoryLimitRespected(t *testing.T) {
	in := suite.OneMatrix(2, 200000, 7)
	for _, limit := range []int64{0, 64 << 20} {
		w, err := subspace.New(context.Background(), in.Basis, subspace.Options{MaxBytes: limit})
		if err != nil {
			t.Fatal(err)
		}
		if rankone.TraceFits(w, 200000) || !rankone.TraceFits(w, 2) {
			t.Fatalf("limit %d: TraceFits wrong", w.MemoryLimit())
		}
		var before, after runtime.MemStats
		runtime.GC()
		runtime.ReadMemStats(&before)
		_, lo := rankone.FlatteningBound(context.Background(), w)
		runtime.ReadMemStats(&after)
		res, err := (&rankone.Portfolio{Members: []rankone.Searcher{rankone.Flattening{}, &rankone.MultiStart{Starts: 2, Workers: 1}}}).Search(context.Background(), w)
		if err != nil {
			t.Fatal(err)
		}
		if alloc := after.TotalAlloc - before.TotalAlloc; alloc > uint64(w.MemoryLimit()) {
			t.Errorf("limit %d: allocated %d bytes", w.MemoryLimit(), alloc)
		}
		// The slack of the stored basis is O(u) here (one matrix); 1e-9 is
		// far above it and far below any other candidate value.
		if math.Abs(lo-in.Optimum) > 1e-9 || res.Lower > in.Optimum+1e-9 || res.Upper < in.Optimum-1e-9 || res.Upper-res.Lower > 1e-9 {
			t.Errorf("limit %d: bound %v, interval [%v, %v], d* = %v", w.MemoryLimit(), lo, res.Lower, res.Upper, in.Optimum)
		}
	}
}
