package sos

import (
	"context"
	"encoding/binary"
	"math"
	"testing"

	"github.com/segre-lab/segre/rankone"
	"github.com/segre-lab/segre/rankone/suite"
	"github.com/segre-lab/segre/subspace"
)

// floatsFrom reads little-endian float64 values from data, cycling, so that
// every fuzz input gives n values (NaN, ±Inf, subnormals included).
func floatsFrom(data []byte, n int) []float64 {
	out := make([]float64, n)
	if len(data) < 8 {
		return out
	}
	words := len(data) / 8
	for i := range out {
		out[i] = math.Float64frombits(binary.LittleEndian.Uint64(data[8*(i%words):]))
	}
	return out
}

// FuzzVerify feeds the certificate verifier arbitrary matrices K on the
// 2×3 subspaces of three families. Two kinds of certificate are built from
// the fuzz bytes: the raw values (almost always rejected) and the exactly
// T-antisymmetric symmetric part S − T(S) of a symmetric S (accepted when
// finite). Verify must never panic, and an accepted certificate's bound must
// be at least the value h at the best point local search finds (derived:
// Verify's bound is a proven upper bound on h*, and 1 − Upper² of a
// certified Upper is at most h* when Upper is computed with rounding
// accounted, which rankone.Verify does).
func FuzzVerify(f *testing.F) {
	f.Add(uint8(0), []byte{})
	f.Add(uint8(1), make([]byte, 8*36))
	seed := make([]byte, 8*36)
	for i := 0; i < 36; i++ {
		binary.LittleEndian.PutUint64(seed[8*i:], math.Float64bits(float64(i%5)-2))
	}
	f.Add(uint8(2), seed)
	nan := make([]byte, 16)
	binary.LittleEndian.PutUint64(nan, math.Float64bits(math.NaN()))
	binary.LittleEndian.PutUint64(nan[8:], math.Float64bits(1e308))
	f.Add(uint8(3), nan)
	ws := make([]*subspace.Subspace, 3)
	lows := make([]float64, 3)
	for i, in := range []suite.Instance{suite.Random(2, 3, 3, 1), suite.Planted(2, 3, 2, 2), suite.OneMatrix(2, 3, 3)} {
		w, err := subspace.New(context.Background(), in.Basis, subspace.Options{})
		if err != nil {
			f.Fatal(err)
		}
		ws[i] = w
		res, _ := (&rankone.MultiStart{Method: &rankone.ALS{}}).Search(f.Context(), w)
		lo, _ := res.ValueBounds()
		lows[i] = lo
	}
	const m, n, L = 2, 3, 6
	f.Fuzz(func(t *testing.T, which uint8, data []byte) {
		w, lo := ws[int(which)%3], lows[int(which)%3]
		raw := floatsFrom(data, L*L)
		if hb, err := Verify(w, Certificate{M: m, N: n, K: raw}); err == nil && !(hb >= lo) {
			t.Fatalf("accepted raw certificate bounds h* by %v below a found value %v", hb, lo)
		}
		k := make([]float64, L*L)
		for a := 0; a < L; a++ {
			for b := 0; b < L; b++ {
				pa, pb := partner(a, b, n)
				s := func(i, j int) float64 { return raw[min(i, j)*L+max(i, j)] } // symmetric S
				k[a*L+b] = s(a, b) - s(pa, pb)
			}
		}
		hb, err := Verify(w, Certificate{M: m, N: n, K: k})
		finite := true
		for _, v := range k {
			finite = finite && !math.IsNaN(v) && !math.IsInf(v, 0)
		}
		if finite && err != nil {
			t.Fatalf("an exactly T-antisymmetric finite certificate was rejected: %v", err)
		}
		if err == nil && !(hb >= lo) {
			t.Fatalf("certificate bounds h* by %v below a found value %v", hb, lo)
		}
		// A certificate of the wrong shape is an error, not a panic.
		if _, err := Verify(w, Certificate{M: m, N: n, K: k[:len(k)-int(which)%2]}); err == nil && which%2 == 1 {
			t.Fatal("short certificate accepted")
		}
	})
}
