package sdp

import (
	"context"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// The assembled Schur complement equals M_ij = tr(A_i Z⁻¹ A_j X) computed
// from dense matrices with gonum (the reference library), on two blocks,
// with constraints of 0 to 3 entries per block (an odd count takes the
// lone-entry path), diagonal and repeated entries; on both paths. Bound:
// both sides sum the same terms v·w·W_bp·X_qa, in different orders, so
// they differ by at most 2γ_m·S with S = tr(|A_i||W||A_j||X|) and m below
// 4n + 64 terms per entry (Higham 2002, §3.1); 1e-13·S is above that at
// these orders.
func TestSchurAgainstDense(t *testing.T) {
	paths(t, func(t *testing.T) {
		rng := rand.New(rand.NewPCG(11, 12))
		orders := []int{7, 5}
		var p Problem
		p.Blocks = orders
		for i := 0; i < 40; i++ {
			var row []Entry
			for b, n := range orders {
				for e := 0; e < (i+b)%4; e++ {
					a, c := rng.IntN(n), rng.IntN(n)
					row = append(row, Entry{Block: b, I: min(a, c), J: max(a, c), V: rng.NormFloat64()})
				}
			}
			if i%7 == 3 && len(row) > 0 {
				row = append(row, row[0]) // a repeated entry adds up
			}
			p.A = append(p.A, row)
			p.B = append(p.B, 0)
		}
		s := newHKM(p, Settings{})
		dense := func(b int, a []Entry) *mat.Dense {
			n := orders[b]
			d := mat.NewDense(n, n, nil)
			for _, e := range a {
				if e.Block == b {
					d.Set(e.I, e.J, d.At(e.I, e.J)+e.V)
					if e.I != e.J {
						d.Set(e.J, e.I, d.At(e.J, e.I)+e.V)
					}
				}
			}
			return d
		}
		abs := func(m *mat.Dense) *mat.Dense {
			var o mat.Dense
			o.Apply(func(_, _ int, v float64) float64 { return math.Abs(v) }, m)
			return &o
		}
		var ws, xs []*mat.Dense
		for b, bl := range s.blocks {
			n := orders[b]
			g := randomMatrix(rng, n)
			var pr product
			pr.gemm(n, false, g, true, g, bl.w) // W = GGᵀ, X random symmetric
			symPart(n, bl.w, bl.w)
			copy(bl.x, randomSym(rng, n))
			ws = append(ws, mat.NewDense(n, n, append([]float64(nil), bl.w...)))
			xs = append(xs, mat.NewDense(n, n, append([]float64(nil), bl.x...)))
		}
		s.schur(context.Background())
		k := len(p.A)
		for i := 0; i < k; i++ {
			for j := i; j < k; j++ {
				var want, bound float64
				for b := range orders {
					ai, aj := dense(b, p.A[i]), dense(b, p.A[j])
					var t1, t2, t3 mat.Dense
					t1.Mul(ai, ws[b])
					t2.Mul(&t1, aj)
					t3.Mul(&t2, xs[b])
					want += mat.Trace(&t3)
					t1.Mul(abs(ai), abs(ws[b]))
					t2.Mul(&t1, abs(aj))
					t3.Mul(&t2, abs(xs[b]))
					bound += mat.Trace(&t3)
				}
				if got := s.m[i*k+j]; math.Abs(got-want) > 1e-13*bound {
					t.Fatalf("M[%d][%d] = %v, dense %v (scale %v)", i, j, got, want, bound)
				}
			}
		}
	})
}
