package subspace

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"

	"github.com/segre-lab/segre/internal/accurate"
)

// The contraction kernels and the contractions built on them, against
// straightforward loops. References are compensated sums (accurate.Acc:
// Ogita, Rump, Oishi 2005, with its proven bound b on |ref − exact|), and
// the tolerance for a computed sum of K rounded products is
// γ_K·Σ|terms| + b (Higham 2002, eq. 3.5, any order of summation, fused or
// not): the computed value is within γ_K·Σ|terms| of the exact sum, the
// reference within b. Where a value is computed in stages, K counts the
// roundings along the longest path of one term (derived beside each check).

// withPaths runs f on the portable kernels and, where this machine runs
// them, on the assembly kernels.
func withPaths(t *testing.T, f func(t *testing.T)) {
	keep := contractAsm
	defer func() { contractAsm = keep }()
	contractAsm = false
	t.Run("go", f)
	if !keep {
		t.Log("no assembly kernels on this machine or build: portable path only")
		return
	}
	contractAsm = true
	t.Run("asm", f)
}

// within reports whether got is within γ_K·abs + b of the reference r.
func within(got, r, b, abs float64, k int) bool {
	return math.Abs(got-r) <= accurate.Gamma(k)*abs+b
}

func randVec(rng *rand.Rand, n int) []float64 {
	v := make([]float64, n)
	for i := range v {
		v[i] = rng.NormFloat64()
	}
	return v
}

// kernelShapes are (rows, cols) pairs that cut the assembly's blocks of 4
// rows and its 4-, 16- and 32-column chunks at every remainder.
var kernelShapes = [][2]int{
	{0, 3}, {1, 0}, {1, 1}, {1, 3}, {3, 4}, {4, 1}, {4, 4}, {5, 7}, {7, 8},
	{8, 16}, {9, 17}, {4, 31}, {13, 32}, {6, 33}, {11, 36}, {2, 48}, {17, 52}, {12, 67}, {33, 130},
}

func TestDotRowsAgainstLoops(t *testing.T) {
	withPaths(t, func(t *testing.T) {
		rng := rand.New(rand.NewPCG(21, 1))
		for _, sh := range kernelShapes {
			rows, n := sh[0], sh[1]
			lda := n + rng.IntN(3) // rows may be apart
			a := randVec(rng, max(rows*lda, 1))
			y := randVec(rng, n)
			out := randVec(rng, rows) // overwritten
			dotRows(out, a, lda, y)
			for r := 0; r < rows; r++ {
				var acc accurate.Acc
				var abs float64
				for j := 0; j < n; j++ {
					acc.AddProd(a[r*lda+j], y[j])
					abs += math.Abs(a[r*lda+j] * y[j])
				}
				ref, b := acc.Result()
				// n rounded products summed: γ_n.
				if !within(out[r], ref, b, abs, max(n, 1)) {
					t.Errorf("%d×%d row %d: %v, reference %v", rows, n, r, out[r], ref)
				}
			}
		}
	})
}

func TestAxpyRowsAgainstLoops(t *testing.T) {
	withPaths(t, func(t *testing.T) {
		rng := rand.New(rand.NewPCG(21, 2))
		for _, sh := range kernelShapes {
			m, nc := sh[0], sh[1]
			lda := nc + rng.IntN(3)
			a := randVec(rng, max(m*lda, 1))
			x := randVec(rng, m)
			start := randVec(rng, nc) // axpyRows adds to what is there
			out := append([]float64(nil), start...)
			axpyRows(out, x, a, lda)
			for j := 0; j < nc; j++ {
				var acc accurate.Acc
				acc.Add(start[j])
				abs := math.Abs(start[j])
				for i := 0; i < m; i++ {
					acc.AddProd(x[i], a[i*lda+j])
					abs += math.Abs(x[i] * a[i*lda+j])
				}
				ref, b := acc.Result()
				// m rounded products added to the start: γ_{m+1}.
				if !within(out[j], ref, b, abs, m+1) {
					t.Errorf("%d×%d column %d: %v, reference %v", m, nc, j, out[j], ref)
				}
			}
		}
	})
}

// gramUpper fills the upper triangle of c with ZᵀZ and leaves the rest of
// c's storage (the lower triangle and the columns beyond p) as it was.
func TestGramUpperAgainstLoops(t *testing.T) {
	withPaths(t, func(t *testing.T) {
		rng := rand.New(rand.NewPCG(21, 3))
		for _, sh := range [][2]int{{1, 1}, {1, 5}, {3, 4}, {2, 8}, {5, 9}, {17, 12}, {4, 13}, {7, 32}, {3, 33}, {64, 20}} {
			s, p := sh[0], sh[1]
			ldc := p + rng.IntN(3)
			z := append(randVec(rng, s*p), make([]float64, gramPad)...)
			c := randVec(rng, p*ldc)
			before := append([]float64(nil), c...)
			gramUpper(z, s, p, c, ldc)
			for i := 0; i < p; i++ {
				for j := 0; j < ldc; j++ {
					got := c[i*ldc+j]
					if j < i || j >= p {
						if got != before[i*ldc+j] {
							t.Fatalf("s%d p%d: entry (%d, %d) outside the upper triangle changed", s, p, i, j)
						}
						continue
					}
					var acc accurate.Acc
					var abs float64
					for u := 0; u < s; u++ {
						acc.AddProd(z[u*p+i], z[u*p+j])
						abs += math.Abs(z[u*p+i] * z[u*p+j])
					}
					ref, b := acc.Result()
					// s fused multiply-adds in order: at most s roundings a term, γ_s.
					if !within(got, ref, b, abs, s) {
						t.Errorf("s%d p%d (%d, %d): %v, reference %v", s, p, i, j, got, ref)
					}
				}
			}
		}
	})
}

// The assembly and the portable kernels do the same operations in the
// same order (contract_kernel.go), so every contraction gives the same
// bits on both paths (derived: IEEE 754 arithmetic is deterministic).
func TestContractionsSameBitsOnEveryPath(t *testing.T) {
	if !contractAsm {
		t.Skip("no assembly kernels on this machine or build: nothing to compare")
	}
	defer func() { contractAsm = true }()
	rng := rand.New(rand.NewPCG(21, 4))
	for _, sh := range contractionShapes {
		w, err := New(context.Background(), randBasis(rng, sh.r, sh.m, sh.n), Options{})
		if err != nil {
			t.Fatal(err)
		}
		x, y := randVec(rng, sh.m), randVec(rng, sh.n)
		u, v := randVec(rng, sh.m), randVec(rng, sh.n)
		run := func() []float64 {
			var out []float64
			out = append(out, w.Value(x, y))
			var g, h mat.SymDense
			w.G(&g, y)
			w.H(&h, x)
			out = append(out, g.RawSymmetric().Data...)
			out = append(out, h.RawSymmetric().Data...)
			gop, hop := w.GOperator(y), w.HOperator(x)
			out = append(out, gop.z...)
			out = append(out, hop.z...)
			du, dv := make([]float64, sh.m), make([]float64, sh.n)
			gop.Apply(du, u)
			hop.Apply(dv, v)
			out = append(out, du...)
			out = append(out, dv...)
			w.ApplyG(du, y, u)
			w.ApplyH(dv, x, v)
			out = append(out, du...)
			return append(out, dv...)
		}
		contractAsm = false
		want := run()
		contractAsm = true
		got := run()
		for i := range want {
			if math.Float64bits(got[i]) != math.Float64bits(want[i]) {
				t.Fatalf("%s: output %d is %v on the assembly path, %v on the portable one", sh.name, i, got[i], want[i])
			}
		}
	}
}

// contractionShapes include m = 1, n = 1, one stored vector (of W, or of
// W⊥: r = mn − 1), no stored vector (W the whole space), and shapes that
// cut the kernels' blocks.
var contractionShapes = []struct {
	name    string
	r, m, n int
}{
	{"m1", 2, 1, 5},
	{"n1", 3, 6, 1},
	{"m1n1", 1, 1, 1},
	{"s1-W", 1, 4, 5},
	{"s1-complement", 11, 3, 4},
	{"complement", 20, 5, 7},
	{"whole-space", 12, 3, 4},
	{"general", 9, 7, 6},
	{"blocks", 13, 9, 37},
	{"tall", 6, 35, 5},
}

func TestContractionsAgainstLoops(t *testing.T) {
	withPaths(t, func(t *testing.T) {
		rng := rand.New(rand.NewPCG(21, 5))
		shapes := contractionShapes
		for i := 0; i < 6; i++ { // and random ones
			m, n := 1+rng.IntN(12), 1+rng.IntN(12)
			shapes = append(shapes, struct {
				name    string
				r, m, n int
			}{fmt.Sprintf("random%d", i), 1 + rng.IntN(m*n), m, n})
		}
		for _, sh := range shapes {
			t.Run(sh.name, func(t *testing.T) {
				w, err := New(context.Background(), randBasis(rng, sh.r, sh.m, sh.n), Options{})
				if err != nil {
					t.Fatal(err)
				}
				checkContractions(t, w, rng)
			})
		}
	})
}

// checkContractions compares every contraction of w at random points
// with loops over the stored vectors.
func checkContractions(t *testing.T, w *Subspace, rng *rand.Rand) {
	m, n, s, L := w.m, w.n, w.s, w.m*w.n
	q := func(u, i, j int) float64 { return w.q[u*L+i*n+j] }
	x, y := randVec(rng, m), randVec(rng, n)

	// Z of G(y): z_ui = Σ_j Q_u[i, j]·y_j, n products: γ_n (the γ_n that
	// net.MaxEigG assumes of these entries).
	gop := w.GOperator(y)
	for u := 0; u < s; u++ {
		for i := 0; i < m; i++ {
			var acc accurate.Acc
			var abs float64
			for j := 0; j < n; j++ {
				acc.AddProd(q(u, i, j), y[j])
				abs += math.Abs(q(u, i, j) * y[j])
			}
			ref, b := acc.Result()
			if got := gop.z[u*m+i]; !within(got, ref, b, abs, n) {
				t.Fatalf("GOperator z[%d, %d] = %v, reference %v", u, i, got, ref)
			}
		}
	}
	// Z of H(x): z_uj = Σ_i x_i·Q_u[i, j], γ_m.
	hop := w.HOperator(x)
	for u := 0; u < s; u++ {
		for j := 0; j < n; j++ {
			var acc accurate.Acc
			var abs float64
			for i := 0; i < m; i++ {
				acc.AddProd(x[i], q(u, i, j))
				abs += math.Abs(x[i] * q(u, i, j))
			}
			ref, b := acc.Result()
			if got := hop.z[u*n+j]; !within(got, ref, b, abs, m) {
				t.Fatalf("HOperator z[%d, %d] = %v, reference %v", u, j, got, ref)
			}
		}
	}

	// Value. c_u = xᵀQ_u y is formed as Σ_i x_i (Q_u y)_i: each term
	// x_i Q_u[i,j] y_j meets at most n roundings in (Q_u y)_i and m in the
	// outer sum, so |ĉ_u − c_u| ≤ γ_{m+n} Σ_ij |x_i Q_u[i,j] y_j| (Higham
	// 2002, Lemma 3.1); the reference rounds x_i y_j once more, so e_u uses
	// γ_{m+n+1}. Then |ĉ_u² − c_u²| ≤ e_u(2|c_u| + e_u), and Σ ĉ_u² (s
	// squares, s additions) is within γ_{s+1} Σ ĉ_u² of its exact value.
	// When W⊥ is stored the value is ‖x‖²‖y‖² − Σ ĉ_u²: the two norms (γ_m,
	// γ_n), their product and the difference put γ_{m+n+2} on ‖x‖²‖y‖² and
	// one more rounding on the sum; the reference's own product and
	// difference two more on each (hence γ_{m+n+4} and γ_{s+4}).
	var ccAcc accurate.Acc
	var tol float64
	for u := 0; u < s; u++ {
		var acc accurate.Acc
		var abs float64
		for i := 0; i < m; i++ {
			for j := 0; j < n; j++ {
				acc.AddProd(x[i]*y[j], q(u, i, j))
				abs += math.Abs(x[i] * y[j] * q(u, i, j))
			}
		}
		c, b := acc.Result()
		e := accurate.Gamma(m+n+1)*abs + b
		ccAcc.AddProd(c, c)
		tol += e * (2*math.Abs(c) + e)
	}
	cc, ccErr := ccAcc.Result()
	tol = 1.01*(tol+ccErr) + accurate.Gamma(s+4)*(cc+tol)
	want := cc
	if w.comp {
		xx, yy := dotRef(x, x), dotRef(y, y)
		want = xx*yy - cc
		tol += accurate.Gamma(m+n+4) * xx * yy
	}
	if got := w.Value(x, y); math.Abs(got-want) > tol {
		t.Errorf("Value = %v, reference %v (tolerance %g)", got, want, tol)
	}

	for side, op := range []*Operator{gop, hop} {
		p := op.p
		// Apply, on the operator's own Z (its entries checked above):
		// dst_b = Σ_u z_ub Σ_a z_ua src_a, each term through at most p
		// roundings in c_u, one in c_u·z_ub and s in the sum over u (from
		// zero, or from the rounded shift·src_b): γ_{p+s+1} (Lemma 3.1).
		src := randVec(rng, p)
		dst := make([]float64, p)
		op.Apply(dst, src)
		for b := 0; b < p; b++ {
			var acc accurate.Acc
			var abs float64
			sign := 1.0
			if op.comp {
				acc.AddProd(op.shift, src[b])
				abs += math.Abs(op.shift * src[b])
				sign = -1
			}
			for u := 0; u < s; u++ {
				for a := 0; a < p; a++ {
					acc.AddProd(sign*op.z[u*p+b]*op.z[u*p+a], src[a]) // one more rounding: γ_{p+s+2}
					abs += math.Abs(op.z[u*p+b] * op.z[u*p+a] * src[a])
				}
			}
			ref, bd := acc.Result()
			if !within(dst[b], ref, bd, abs, p+s+2) {
				t.Errorf("side %d: Apply entry %d = %v, reference %v", side, b, dst[b], ref)
			}
		}
		// Apply may write over its argument.
		alias := append([]float64(nil), src...)
		op.Apply(alias, alias)
		if !bitsEqual(alias, dst) {
			t.Errorf("side %d: Apply(v, v) differs from Apply(dst, v)", side)
		}
		// ApplyG and ApplyH are Apply on the operator, bit for bit (their
		// doc: the same sums in the same order), also when dst is the
		// vector applied to.
		other := make([]float64, p)
		if side == 0 {
			w.ApplyG(other, y, src)
		} else {
			w.ApplyH(other, x, src)
		}
		if !bitsEqual(other, dst) {
			t.Errorf("side %d: ApplyG/ApplyH differ from the operator's Apply", side)
		}
		copy(other, src)
		if side == 0 {
			w.ApplyG(other, y, other)
		} else {
			w.ApplyH(other, x, other)
		}
		if !bitsEqual(other, dst) {
			t.Errorf("side %d: ApplyG/ApplyH with dst = its vector differ", side)
		}

		// G and H: (ZᵀZ)_ab from the same Z (s fused multiply-adds, γ_s),
		// shift − that when W⊥ is stored (one more rounding, γ_{s+1}), into
		// a fresh matrix and into a view with a row stride larger than p,
		// whose storage outside the upper triangle must stay as it was.
		big := mat.NewSymDense(p+3, randVec(rng, (p+3)*(p+3)))
		view := big.SliceSym(1, p+1).(*mat.SymDense)
		before := append([]float64(nil), big.RawSymmetric().Data...)
		var fresh mat.SymDense
		for _, dst := range []*mat.SymDense{&fresh, view} {
			if side == 0 {
				w.G(dst, y)
			} else {
				w.H(dst, x)
			}
			for a := 0; a < p; a++ {
				for b := a; b < p; b++ {
					var acc accurate.Acc
					var abs float64
					sign := 1.0
					if op.comp {
						if a == b {
							acc.Add(op.shift)
							abs += op.shift
						}
						sign = -1
					}
					for u := 0; u < s; u++ {
						acc.AddProd(sign*op.z[u*p+a], op.z[u*p+b])
						abs += math.Abs(op.z[u*p+a] * op.z[u*p+b])
					}
					ref, bd := acc.Result()
					if got := dst.At(a, b); !within(got, ref, bd, abs, s+1) {
						t.Errorf("side %d: matrix entry (%d, %d) = %v, reference %v", side, a, b, got, ref)
					}
				}
			}
		}
		raw := big.RawSymmetric()
		for i := 0; i < p+3; i++ {
			for j := 0; j < p+3; j++ {
				inView := i >= 1 && i <= p && j >= i && j <= p
				if !inView && raw.Data[i*raw.Stride+j] != before[i*raw.Stride+j] {
					t.Fatalf("side %d: entry (%d, %d) of the parent outside the view's upper triangle changed", side, i, j)
				}
			}
		}
	}
}

func dotRef(a, b []float64) float64 {
	var acc accurate.Acc
	for i := range a {
		acc.AddProd(a[i], b[i])
	}
	r, _ := acc.Result()
	return r
}
