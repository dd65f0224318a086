package subspace

import (
	"context"
	"math"
	"math/big"
	"math/rand/v2"
	"testing"
)

const prec = 2000

func bf(v float64) *big.Float { return new(big.Float).SetPrec(prec).SetFloat64(v) }

// exactDist returns dist(x⊗y, W) for the subspace the stored vectors define
// exactly (not assuming orthonormality), in 2000-bit arithmetic: with
// c = Sv and G = SSᵀ, the squared distance is ‖v‖² − cᵀG⁻¹c when W is
// stored and cᵀG⁻¹c when W⊥ is (derived: P_span(S) = SᵀG⁻¹S).
func exactDist(w *Subspace, x, y []float64) *big.Float {
	m, n, L, s := w.m, w.n, w.m*w.n, w.s
	v := make([]*big.Float, L)
	vv := bf(0)
	for i := 0; i < m; i++ {
		for j := 0; j < n; j++ {
			p := bf(x[i])
			p.Mul(p, bf(y[j]))
			v[i*n+j] = p
			vv.Add(vv, new(big.Float).SetPrec(prec).Mul(p, p))
		}
	}
	c := make([]*big.Float, s)
	for t := 0; t < s; t++ {
		c[t] = bf(0)
		for l := 0; l < L; l++ {
			c[t].Add(c[t], new(big.Float).SetPrec(prec).Mul(bf(w.q[t*L+l]), v[l]))
		}
	}
	g := make([][]*big.Float, s)
	for a := 0; a < s; a++ {
		g[a] = make([]*big.Float, s+1)
		for b := 0; b < s; b++ {
			e := bf(0)
			for l := 0; l < L; l++ {
				e.Add(e, new(big.Float).SetPrec(prec).Mul(bf(w.q[a*L+l]), bf(w.q[b*L+l])))
			}
			g[a][b] = e
		}
		g[a][s] = new(big.Float).SetPrec(prec).Set(c[a])
	}
	// Gaussian elimination (G is symmetric positive definite: no pivoting needed).
	for k := 0; k < s; k++ {
		for r := k + 1; r < s; r++ {
			f := new(big.Float).SetPrec(prec).Quo(g[r][k], g[k][k])
			for col := k; col <= s; col++ {
				g[r][col].Sub(g[r][col], new(big.Float).SetPrec(prec).Mul(f, g[k][col]))
			}
		}
	}
	z := make([]*big.Float, s)
	for k := s - 1; k >= 0; k-- {
		acc := new(big.Float).SetPrec(prec).Set(g[k][s])
		for col := k + 1; col < s; col++ {
			acc.Sub(acc, new(big.Float).SetPrec(prec).Mul(g[k][col], z[col]))
		}
		z[k] = acc.Quo(acc, g[k][k])
	}
	q := bf(0)
	for t := 0; t < s; t++ {
		q.Add(q, new(big.Float).SetPrec(prec).Mul(c[t], z[t]))
	}
	d2 := q
	if !w.comp {
		d2 = new(big.Float).SetPrec(prec).Sub(vv, q)
	}
	if d2.Sign() < 0 {
		d2 = bf(0)
	}
	return new(big.Float).SetPrec(prec).Sqrt(d2)
}

// ResidualBound never underestimates the exact distance for the stored
// basis (2000-bit reference, derived above), on random points, on planted
// points where d is of the order of rounding, and for both storages.
func TestResidualBoundIsRigorous(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 6))
	type tc struct {
		name    string
		r, m, n int
		planted bool
	}
	for _, c := range []tc{{"stored-W", 3, 3, 4, false}, {"stored-complement", 9, 3, 4, false},
		{"planted-W", 4, 4, 4, true}, {"planted-complement", 11, 3, 5, true}, {"full", 6, 2, 3, false}} {
		t.Run(c.name, func(t *testing.T) {
			L := c.m * c.n
			b := randBasis(rng, c.r, c.m, c.n)
			var x0, y0 []float64
			if c.planted {
				x0, y0 = randUnit(rng, c.m), randUnit(rng, c.n)
				for i := 0; i < c.m; i++ {
					for j := 0; j < c.n; j++ {
						b.Data[i*c.n+j] = x0[i] * y0[j] // B_0 = x₀y₀ᵀ, then scramble
					}
				}
				for l := 0; l < L; l++ {
					b.Data[L+l] += 0.5 * b.Data[l]
				}
			}
			w, err := New(context.Background(), b, Options{})
			if err != nil {
				t.Fatal(err)
			}
			for trial := 0; trial < 8; trial++ {
				x, y := randUnit(rng, c.m), randUnit(rng, c.n)
				if c.planted && trial%2 == 0 {
					x, y = x0, y0
				}
				// Unnormalised inputs too: the bound is for x, y as given.
				if trial%3 == 2 {
					for i := range x {
						x[i] *= 3.7
					}
				}
				ub := w.ResidualBound(x, y)
				ex := exactDist(w, x, y)
				if ex.Cmp(bf(ub)) > 0 {
					t.Fatalf("bound %v below exact distance %v", ub, ex)
				}
				exf, _ := ex.Float64()
				// Tightness (derived: compensated evaluation, error ~ u·d + γ²): the
				// bound exceeds the exact value by at most 1e-15 absolute + 1e-12 relative.
				if ub > exf*(1+1e-12)+1e-15*norm(x)*norm(y) {
					t.Errorf("bound %v much above exact %v", ub, exf)
				}
				if c.planted && trial%2 == 0 && ub > 1e-14 {
					t.Errorf("planted point: bound %v, want ≤ 1e-14", ub)
				}
			}
		})
	}
}

func norm(v []float64) float64 {
	var s float64
	for _, x := range v {
		s += x * x
	}
	return math.Sqrt(s)
}

// Overflowing inputs give +Inf (nothing proved), never a panic or a NaN.
func TestResidualBoundOverflow(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 7))
	for _, r := range []int{2, 10} { // stores W, then W⊥
		w, err := New(context.Background(), randBasis(rng, r, 3, 4), Options{})
		if err != nil {
			t.Fatal(err)
		}
		x := []float64{1e300, -1e300, 1e300}
		y := []float64{1e300, 1, 2, 3}
		if ub := w.ResidualBound(x, y); !math.IsInf(ub, 1) {
			t.Errorf("r=%d: overflowing input gave %v, want +Inf", r, ub)
		}
	}
}
