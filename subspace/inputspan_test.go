package subspace

import (
	"context"
	"errors"
	"math"
	"math/big"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"
)

const refPrec = 400

// bigOrthonormal returns an orthonormal basis (rows) of the span of the
// given rows by Gram–Schmidt applied twice in 400-bit arithmetic (rounding
// errors of order 2^-400, far below anything tested here).
func bigOrthonormal(rows [][]float64) [][]*big.Float {
	var out [][]*big.Float
	for _, r := range rows {
		v := make([]*big.Float, len(r))
		for i, x := range r {
			v[i] = new(big.Float).SetPrec(refPrec).SetFloat64(x)
		}
		for pass := 0; pass < 2; pass++ {
			for _, q := range out {
				d := bigDot(q, v)
				for i := range v {
					v[i].Sub(v[i], new(big.Float).SetPrec(refPrec).Mul(d, q[i]))
				}
			}
		}
		nrm := new(big.Float).SetPrec(refPrec).Sqrt(bigDot(v, v))
		for i := range v {
			v[i].Quo(v[i], nrm)
		}
		out = append(out, v)
	}
	return out
}

func bigDot(a, b []*big.Float) *big.Float {
	s := new(big.Float).SetPrec(refPrec)
	for i := range a {
		s.Add(s, new(big.Float).SetPrec(refPrec).Mul(a[i], b[i]))
	}
	return s
}

// exactSpanDistance returns ‖P_V − P_W‖₂ for V = span of b's nonzero
// matrices and W the subspace of w, from 400-bit orthonormal bases
// (‖(I − P_W)U_V‖₂ for equal dimensions; the final 2-norm of a small
// float matrix by gonum's SVD, accurate to a few units of 2^-53 relative).
func exactSpanDistance(b Basis, w *Subspace) float64 {
	L := b.Rows * b.Cols
	var rows [][]float64
	for t := 0; t < b.Count; t++ {
		rows = append(rows, b.Data[t*L:(t+1)*L])
	}
	uv := bigOrthonormal(rows)
	var srows [][]float64
	for t := 0; t < w.Stored().Count(); t++ {
		srows = append(srows, w.Stored().Vector(t, nil))
	}
	us := bigOrthonormal(srows)
	m := mat.NewDense(L, len(uv), nil)
	for j, u := range uv {
		// (I − P_W)u: with W stored, u − Σ ⟨s,u⟩s; with W⊥ stored, Σ ⟨s,u⟩s.
		proj := make([]*big.Float, L)
		for i := range proj {
			proj[i] = new(big.Float).SetPrec(refPrec)
		}
		for _, s := range us {
			d := bigDot(s, u)
			for i := range proj {
				proj[i].Add(proj[i], new(big.Float).SetPrec(refPrec).Mul(d, s[i]))
			}
		}
		for i := range proj {
			v := proj[i]
			if !w.StoresComplement() {
				v = new(big.Float).SetPrec(refPrec).Sub(u[i], proj[i])
			}
			f, _ := v.Float64()
			m.Set(i, j, f)
		}
	}
	var svd mat.SVD
	svd.Factorize(m, mat.SVDNone)
	return svd.Values(nil)[0]
}

// InputDistance's θ bounds the true distance between the input's span and
// the stored subspace (computed independently in 400-bit arithmetic), for
// W stored and W⊥ stored, well- and ill-conditioned inputs; and it is
// small when the input is well conditioned (θ ≤ 1e-12, derived: about
// u·cond·√L).
func TestInputDistanceBoundsTruth(t *testing.T) {
	rng := rand.New(rand.NewPCG(51, 52))
	gauss := func(n int) []float64 {
		v := make([]float64, n)
		for i := range v {
			v[i] = rng.NormFloat64()
		}
		return v
	}
	nearPair := func(m, n int, eps float64, extra int) Basis {
		a, c := gauss(m*n), gauss(m*n)
		b2 := make([]float64, m*n)
		for i := range b2 {
			b2[i] = a[i] + eps*c[i]
		}
		data := append(append([]float64(nil), a...), b2...)
		for e := 0; e < extra; e++ {
			data = append(data, gauss(m*n)...)
		}
		return Basis{Count: 2 + extra, Rows: m, Cols: n, Data: data}
	}
	cases := []struct {
		name   string
		b      Basis
		wellTh float64 // θ must be below this (0: no requirement)
	}{
		{"well-W", Basis{Count: 4, Rows: 3, Cols: 3, Data: gauss(36)}, 1e-12},
		{"well-complement", Basis{Count: 7, Rows: 3, Cols: 3, Data: gauss(63)}, 1e-12},
		{"ill-2x4-W", nearPair(2, 4, 3e-14, 0), 0},
		{"ill-2x2-complement", nearPair(2, 2, 1e-13, 1), 0},
		{"ill-3x3-1e-10", nearPair(3, 3, 1e-10, 2), 0},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			w, err := New(context.Background(), c.b, Options{RankTol: 1e-16})
			if err != nil {
				t.Fatal(err)
			}
			th, err := InputDistance(context.Background(), c.b, w)
			if err != nil {
				t.Fatalf("InputDistance: %v", err)
			}
			truth := exactSpanDistance(c.b, w)
			// The reference's own error: its last step is a float SVD of
			// entries accurate to 2^-53 relative, so allow 4 units.
			if th < truth*(1-0x1p-51) {
				t.Errorf("θ = %g below the true distance %g", th, truth)
			}
			if c.wellTh > 0 && th > c.wellTh {
				t.Errorf("θ = %g for a well-conditioned input", th)
			}
			t.Logf("θ = %.3g, true distance %.3g, stores complement %v", th, truth, w.StoresComplement())
		})
	}
}

// A duplicated matrix makes the inputs dependent: ErrDependent, and the
// rank gap reports what was left out.
func TestInputDistanceDependent(t *testing.T) {
	a := []float64{1, 2, 3, 4}
	b := Basis{Count: 2, Rows: 2, Cols: 2, Data: append(append([]float64(nil), a...), a...)}
	w, err := New(context.Background(), b, Options{})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := InputDistance(context.Background(), b, w); !errors.Is(err, ErrDependent) {
		t.Errorf("error %v, want ErrDependent", err)
	}
	kept, left := w.RankGap()
	// Derived: the unit-normalised inputs are identical, so the second
	// pivot's remaining norm is at rounding level and the first is 1.
	if !(math.Abs(kept-1) < 1e-15 && left < 1e-15) {
		t.Errorf("rank gap (%g, %g), want (1, ~0)", kept, left)
	}
}
