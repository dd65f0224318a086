package subspace

import (
	"context"
	"math"
	"math/rand/v2"
	"slices"
	"testing"
)

// batchCase is a subspace for the batch tests, with a name.
type batchCase struct {
	name string
	w    *Subspace
}

// batchCases covers both forms of a real batch (pair form: 5×7, 3×4,
// 30×20, 2×200, 1×6; factors: the others, see pairSizes), W stored and W⊥
// stored (3×4 and 6×5), a complex subspace, and shapes that cut the
// products at the places gemm.go cuts them: inner dimension above tileK =
// 256 (n = 300; s = 300 in Matrix; the pair form's M = 465), more than
// tileN = 384 columns (s·m = 19200; M = 465), an operator order above
// tileM = 192 (n = 200 and 300), m = 1.
func batchCases(t *testing.T, rng *rand.Rand) []batchCase {
	t.Helper()
	var out []batchCase
	for _, sh := range [][3]int{{5, 7, 9}, {3, 4, 9}, {30, 20, 300}, {2, 200, 3}, {1, 6, 2},
		{20, 30, 40}, {6, 5, 25}, {3, 300, 2}, {64, 64, 300}} {
		w, err := New(context.Background(), randBasis(rng, sh[2], sh[0], sh[1]), Options{})
		if err != nil {
			t.Fatal(err)
		}
		name := itoa(sh[0]) + "x" + itoa(sh[1]) + "/k" + itoa(sh[2])
		if w.StoresComplement() {
			name += "/complement"
		}
		if _, _, pair := w.pairSizes(); pair {
			name += "/pair"
		}
		out = append(out, batchCase{name, w})
	}
	m, n, k := 3, 4, 5
	d := make([]complex128, k*m*n)
	for i := range d {
		d[i] = complex(rng.NormFloat64(), rng.NormFloat64())
	}
	w, err := NewComplex(context.Background(), ComplexBasis{Count: k, Rows: m, Cols: n, Data: d}, Options{})
	if err != nil {
		t.Fatal(err)
	}
	return append(out, batchCase{"complex/3x4/k5", w})
}

func randPoints(rng *rand.Rand, count, length int) [][]float64 {
	pts := make([][]float64, count)
	for b := range pts {
		pts[b] = randSlice(rng, length)
	}
	return pts
}

// The batched operators are SearchGOperator's and SearchHOperator's:
// applied to a random vector, through Apply and through Matrix, they agree
// with the one-point operators to 1e-12 relative (common practice for two
// orderings of the same sums: each has error at most γ_K·Σ|terms|, Higham
// 2002 eq. 3.5, K ≤ 600 here, and for Gaussian data Σ|terms| is a small
// multiple of the result's norm). Matrix is exactly symmetric (derived in
// its doc comment).
func TestBatchMatchesOperators(t *testing.T) {
	rng := rand.New(rand.NewPCG(11, 12))
	cases := batchCases(t, rng)
	kernelPaths(t, func(t *testing.T) {
		for _, c := range cases {
			w := c.w
			const B = 5
			xs, ys := randPoints(rng, B, w.Rows()), randPoints(rng, B, w.Cols())
			var g, h OperatorBatch
			w.SearchGBatch(&g, ys)
			w.SearchHBatch(&h, xs)
			for side, ob := range []*OperatorBatch{&g, &h} {
				if ob.Len() != B {
					t.Fatalf("%s: Len %d", c.name, ob.Len())
				}
				p := ob.Order()
				a := make([]float64, p*p)
				for b := 0; b < B; b++ {
					var ref *Operator
					if side == 0 {
						ref = w.SearchGOperator(ys[b])
					} else {
						ref = w.SearchHOperator(xs[b])
					}
					if ref.Order() != p {
						t.Fatalf("%s: order %d, want %d", c.name, p, ref.Order())
					}
					v := randSlice(rng, p)
					want, got, viaM := make([]float64, p), make([]float64, p), make([]float64, p)
					ref.Apply(want, v)
					ob.Apply(b, got, v)
					ob.Matrix(b, a)
					for i := 0; i < p; i++ {
						for j := 0; j < p; j++ {
							viaM[i] += a[i*p+j] * v[j]
							if a[i*p+j] != a[j*p+i] {
								t.Fatalf("%s side %d: Matrix not symmetric at (%d, %d)", c.name, side, i, j)
							}
						}
					}
					for _, out := range [][]float64{got, viaM} {
						var diff, nrm float64
						for i := range want {
							diff += (want[i] - out[i]) * (want[i] - out[i])
							nrm += want[i] * want[i]
						}
						if math.Sqrt(diff) > 1e-12*math.Sqrt(nrm) {
							t.Errorf("%s side %d point %d: |difference| %g, |A v| %g", c.name, side, b, math.Sqrt(diff), math.Sqrt(nrm))
						}
					}
				}
			}
		}
	})
}

// A point's operator does not depend on the other points of its batch: the
// factors from a batch of seven, from the point alone and from the batch
// reversed give bit for bit the same Apply and Matrix (derived in the
// notes of batch.go: each entry of the product reads one point only). The
// point alone goes through the one-point path (productFew); for the pair
// form and a complex subspace, at first, and through the tiles once its
// side has packed its right factor (after fewUses products): both are
// checked. A real subspace's factors come from the tiles (realG, realH)
// for four points or more, from productFew for fewer.
func TestBatchPointIndependent(t *testing.T) {
	rng := rand.New(rand.NewPCG(13, 14))
	cases := batchCases(t, rng)
	kernelPaths(t, func(t *testing.T) {
		for _, c := range cases {
			w := c.w
			const B = 7
			xs, ys := randPoints(rng, B, w.Rows()), randPoints(rng, B, w.Cols())
			for side := 0; side < 2; side++ {
				build := func(ob *OperatorBatch, idx []int) {
					if side == 0 {
						pts := make([][]float64, len(idx))
						for i, b := range idx {
							pts[i] = ys[b]
						}
						w.SearchGBatch(ob, pts)
						return
					}
					pts := make([][]float64, len(idx))
					for i, b := range idx {
						pts[i] = xs[b]
					}
					w.SearchHBatch(ob, pts)
				}
				all := []int{0, 1, 2, 3, 4, 5, 6}
				rev := slices.Clone(all)
				slices.Reverse(rev)
				var full, back, one, late OperatorBatch
				build(&full, all)
				build(&back, rev)
				for range fewUses {
					build(&late, []int{0})
				}
				p := full.Order()
				v := randSlice(rng, p)
				for b := 0; b < B; b++ {
					build(&one, []int{b}) // reused storage, as a search reuses it
					build(&late, []int{b})
					_, _, pair := w.pairSizes()
					if (pair || w.cx != nil) && !late.basis[side].full {
						t.Fatalf("%s side %d: the one-point path has not switched to the tiles", c.name, side)
					}
					outs := make([][]float64, 0, 8)
					for _, at := range []struct {
						ob *OperatorBatch
						i  int
					}{{&full, b}, {&back, B - 1 - b}, {&one, 0}, {&late, 0}} {
						av, am := make([]float64, p), make([]float64, p*p)
						at.ob.Apply(at.i, av, v)
						at.ob.Matrix(at.i, am)
						outs = append(outs, av, am)
					}
					for k := 2; k < len(outs); k++ {
						if !bitsEqual(outs[k], outs[k%2]) {
							t.Fatalf("%s side %d point %d: result %d differs from the full batch's", c.name, side, b, k)
						}
					}
				}
			}
		}
	})
}

func bitsEqual(a, b []float64) bool {
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

// Wrong lengths are programming errors: they panic with a message.
func TestBatchPanics(t *testing.T) {
	rng := rand.New(rand.NewPCG(15, 16))
	w, err := New(context.Background(), randBasis(rng, 3, 3, 4), Options{})
	if err != nil {
		t.Fatal(err)
	}
	var ob OperatorBatch
	w.SearchGBatch(&ob, [][]float64{randSlice(rng, 4)})
	for name, f := range map[string]func(){
		"G length":     func() { w.SearchGBatch(&ob, [][]float64{randSlice(rng, 3)}) },
		"H length":     func() { w.SearchHBatch(&ob, [][]float64{randSlice(rng, 4)}) },
		"Apply length": func() { ob.Apply(0, make([]float64, 2), make([]float64, 3)) },
		"Apply point":  func() { ob.Apply(1, make([]float64, 3), make([]float64, 3)) },
		"Matrix size":  func() { ob.Matrix(0, make([]float64, 8)) },
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

// BenchmarkBatch reports the speed of a batch's parts on the shapes of the
// issue's ALS benchmark (rankone.BenchmarkALSNumPy): one product for 32
// points on each side (GFLOPS counts 2·s·m·n a point), a point's Matrix
// and Apply (factored, 64×64 with k = 256), and the pair form's products
// (16×16 with k = 128, M·N multiply-adds a point).
//
//	go test ./subspace -run X -bench Batch -cpu 1
func BenchmarkBatch(b *testing.B) {
	rng := rand.New(rand.NewPCG(1, 2))
	for _, sh := range [][3]int{{64, 64, 256}, {16, 16, 128}} {
		m, n, k := sh[0], sh[1], sh[2]
		w, err := New(context.Background(), randBasis(rng, k, m, n), Options{})
		if err != nil {
			b.Fatal(err)
		}
		const B = 32
		xs, ys := randPoints(rng, B, m), randPoints(rng, B, n)
		var ob OperatorBatch
		flops := 2.0 * B * float64(w.s*m*n)
		if M, N, ok := w.pairSizes(); ok {
			flops = 2.0 * B * float64(M*N)
		}
		name := itoa(m) + "x" + itoa(n) + "/k" + itoa(k)
		for side, build := range []func(){func() { w.SearchGBatch(&ob, ys) }, func() { w.SearchHBatch(&ob, xs) }} {
			b.Run(name+"/"+[]string{"G", "H"}[side], func(b *testing.B) {
				build() // packs the basis
				for b.Loop() {
					build()
				}
				b.ReportMetric(flops*float64(b.N)/b.Elapsed().Seconds()/1e9, "GFLOPS")
			})
		}
		if ob.Formed() {
			continue
		}
		p := ob.Order()
		a, v, d := make([]float64, p*p), randSlice(rng, p), make([]float64, p)
		b.Run(name+"/Matrix", func(b *testing.B) {
			for b.Loop() {
				ob.Matrix(0, a)
			}
		})
		b.Run(name+"/Apply", func(b *testing.B) {
			for b.Loop() {
				ob.Apply(0, d, v)
			}
		})
	}
}
