package suite_test

import (
	"context"
	"encoding/binary"
	"math"
	"testing"

	"github.com/segre-lab/segre/net"
	"github.com/segre-lab/segre/rankone"
	"github.com/segre-lab/segre/sos"
	"github.com/segre-lab/segre/subspace"
)

// FuzzStrategies runs every bundled strategy on subspaces built from
// arbitrary bytes: shape (r ≤ 4 matrices of size m, n ≤ 3) from the first
// bytes, entries from the rest as float64 bit patterns (NaN, ±Inf,
// subnormals, huge and tiny magnitudes). Bad input must be refused by New
// with an error; on an accepted subspace no strategy may panic, every
// interval must be proper, and no certified Lower may exceed any certified
// Upper (both proven for the same stored subspace: derived, no tolerance).
func FuzzStrategies(f *testing.F) {
	seed := func(r, m, n byte, vals ...float64) []byte {
		b := []byte{r, m, n}
		for _, v := range vals {
			b = binary.LittleEndian.AppendUint64(b, math.Float64bits(v))
		}
		return b
	}
	f.Add(seed(1, 2, 2, 1e150, 0, 0, 1e-150))
	f.Add(seed(2, 2, 2, 1, 0, 0, 1, 0, 1, -1, 0))
	f.Add(seed(3, 3, 3, 0, 1, 0, -1, 0, 0, 0, 0, 0, 0, 0, 1, 0, 0, 0, -1, 0, 0, 0, 0, 0, 0, 0, 1, 0, -1, 0))
	f.Add(seed(2, 1, 3, 5e-324, 1, 2, 3, math.MaxFloat64, -1))
	f.Add(seed(1, 3, 1, math.NaN(), 1, 2))
	ctx := context.Background()
	f.Fuzz(func(t *testing.T, data []byte) {
		if len(data) < 3 {
			return
		}
		r, m, n := int(data[0]%4)+1, int(data[1]%3)+1, int(data[2]%3)+1
		vals := make([]float64, r*m*n)
		words := (len(data) - 3) / 8
		for i := range vals {
			if words > 0 {
				vals[i] = math.Float64frombits(binary.LittleEndian.Uint64(data[3+8*(i%words):]))
			}
		}
		b := subspace.Basis{Count: r, Rows: m, Cols: n, Data: vals}
		w, err := subspace.New(context.Background(), b, subspace.Options{})
		if err != nil {
			return
		}
		searchers := []rankone.Searcher{
			rankone.Flattening{}, &rankone.ALS{}, &rankone.Power{}, &rankone.TrustRegion{},
			&rankone.MultiStart{Starts: 3, Workers: 1}, &rankone.AllPoints{},
			&net.BranchBound{Gap: 1e-2, MaxNodes: 300, Workers: 1}, &net.Exhaustive{Epsilon: 0.3, Workers: 1},
			&sos.Bound{MaxIter: 40},
		}
		if msg := inconsistent(intervals(ctx, w, searchers)); msg != "" {
			t.Fatal(msg)
		}
	})
}

// FuzzStrategiesComplex is FuzzStrategies over C: complex bases (r ≤ 3
// matrices of m, n ≤ 2, real and imaginary parts from the bytes' float64
// bit patterns) built by subspace.NewComplex; every strategy runs on the
// realified subspace, its interval is translated to the complex distance
// (complexIntervals), and every interval must be proper with no certified
// Lower above any certified Upper (derived: all are proven for the same
// stored subspace).
func FuzzStrategiesComplex(f *testing.F) {
	seed := func(r, m, n byte, vals ...float64) []byte {
		b := []byte{r, m, n}
		for _, v := range vals {
			b = binary.LittleEndian.AppendUint64(b, math.Float64bits(v))
		}
		return b
	}
	f.Add(seed(2, 2, 2, 1, 0, 0, 0, 0, 0, 1, 0, 0, 0, -1, 0, 1, 0, 0, 0))
	f.Add(seed(1, 2, 2, 1e150, 1e-150, 0, 0, 0, 0, 5e-324, 1))
	f.Add(seed(1, 1, 2, math.NaN(), 1, 2, 3))
	ctx := context.Background()
	f.Fuzz(func(t *testing.T, data []byte) {
		if len(data) < 3 {
			return
		}
		r, m, n := int(data[0]%3)+1, int(data[1]%2)+1, int(data[2]%2)+1
		vals := make([]complex128, r*m*n)
		words := (len(data) - 3) / 8
		for i := range vals {
			if words > 0 {
				re := math.Float64frombits(binary.LittleEndian.Uint64(data[3+8*((2*i)%words):]))
				im := math.Float64frombits(binary.LittleEndian.Uint64(data[3+8*((2*i+1)%words):]))
				vals[i] = complex(re, im)
			}
		}
		w, err := subspace.NewComplex(ctx, subspace.ComplexBasis{Count: r, Rows: m, Cols: n, Data: vals}, subspace.Options{})
		if err != nil {
			return
		}
		searchers := []rankone.Searcher{
			rankone.Flattening{}, &rankone.ALS{}, &rankone.TrustRegion{},
			&rankone.MultiStart{Starts: 3, Workers: 1}, &rankone.AllPoints{},
			&net.BranchBound{Gap: 1e-2, MaxNodes: 300, Workers: 1}, &net.Exhaustive{Epsilon: 0.3, Workers: 1},
			&sos.Bound{MaxIter: 40},
		}
		if msg := inconsistent(complexIntervals(ctx, w, searchers)); msg != "" {
			t.Fatal(msg)
		}
	})
}
