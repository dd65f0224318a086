package subspace

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
)

// kernelPaths runs f with each tile this machine runs: the portable one,
// then AVX2, then AVX-512 (where available).
func kernelPaths(t *testing.T, f func(t *testing.T)) {
	keep := tileKind
	defer func() { tileKind = keep }()
	for kind := tileGo; kind <= bestTile; kind++ {
		tileKind = kind
		t.Run([]string{"go", "avx2", "avx512"}[kind], f)
	}
}

// The blocked product against gonum's Dgemm (a general-purpose reference
// library) on shapes that cut tiles, strips and slices at odd places, for
// every combination of transposes and signs. Tolerance: both sums have
// rounding error at most γ_k·Σ|a||b| (Higham 2002, eq. 3.5, any order), so
// they differ by at most 2γ_k·Σ|a_il||b_lj|, checked entry by entry.
func TestGemmAgainstGonum(t *testing.T) {
	kernelPaths(t, func(t *testing.T) {
		rng := rand.New(rand.NewPCG(5, 6))
		// Shapes that cross tileK (257, 300, 513), tileM (197, 200, 400) and
		// tileN (390, 700), and strips of 4 and of 12 or 24 (3, 5, 7, 13, 30).
		shapes := [][3]int{{1, 1, 1}, {3, 5, 7}, {4, 12, 256}, {5, 13, 257}, {200, 30, 260}, {64, 700, 40}}
		if !testing.Short() {
			shapes = append(shapes, [3]int{197, 390, 300}, [3]int{400, 30, 513})
		}
		for _, sh := range shapes {
			m, n, k := sh[0], sh[1], sh[2]
			for _, ta := range []bool{false, true} {
				for _, tb := range []bool{false, true} {
					for _, neg := range []bool{false, true} {
						a := randSlice(rng, m*k)
						b := randSlice(rng, k*n)
						c := randSlice(rng, m*n)
						ld := func(tr bool, rows, cols int) int {
							if tr {
								return rows
							}
							return cols
						}
						lda, ldb := ld(ta, m, k), ld(tb, k, n)
						want := append([]float64(nil), c...)
						alpha := 1.0
						if neg {
							alpha = -1
						}
						tr := func(x bool) blas.Transpose {
							if x {
								return blas.Trans
							}
							return blas.NoTrans
						}
						ar, ac := m, k
						if ta {
							ar, ac = k, m
						}
						br, bc := k, n
						if tb {
							br, bc = n, k
						}
						blas64.Gemm(tr(ta), tr(tb), alpha,
							blas64.General{Rows: ar, Cols: ac, Stride: lda, Data: a},
							blas64.General{Rows: br, Cols: bc, Stride: ldb, Data: b},
							1, blas64.General{Rows: m, Cols: n, Stride: n, Data: want})
						g := newGemmPool(max(m, n, k))
						g.mul(m, n, k, neg, operand{a, lda, ta}, operand{b, ldb, tb}, c, n, nil)
						gam := 2 * float64(k+1) * 0x1p-53 / (1 - float64(k+1)*0x1p-53)
						for i := 0; i < m; i++ {
							for j := 0; j < n; j++ {
								var abs float64
								for l := 0; l < k; l++ {
									ai, bi := i*lda+l, l*ldb+j
									if ta {
										ai = l*lda + i
									}
									if tb {
										bi = j*ldb + l
									}
									av, bv := a[ai], b[bi]
									abs += math.Abs(av * bv)
								}
								if d := math.Abs(c[i*n+j] - want[i*n+j]); d > gam*(abs+1) {
									t.Fatalf("%v trans %v %v neg %v: entry (%d, %d) = %v, gonum %v", sh, ta, tb, neg, i, j, c[i*n+j], want[i*n+j])
								}
							}
						}
					}
				}
			}
		}
	})
}

// The product is the same, bit for bit, for any number of workers
// (derived: every entry is computed by one tile as the same sums in the
// same order).
func TestGemmWorkersBitIdentical(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 8))
	m, n, k := 450, 800, 600
	a, b := randSlice(rng, m*k), randSlice(rng, k*n)
	var first []float64
	for _, w := range []int{1, 2, 3, 8} {
		c := make([]float64, m*n)
		g := newGemmPoolN(w, max(m, n, k))
		g.mul(m, n, k, false, operand{a, k, false}, operand{b, n, false}, c, n, nil)
		if first == nil {
			first = c
			continue
		}
		for i := range c {
			if math.Float64bits(c[i]) != math.Float64bits(first[i]) {
				t.Fatalf("%d workers: entry %d = %v, 1 worker %v", w, i, c[i], first[i])
			}
		}
	}
}

func randSlice(rng *rand.Rand, n int) []float64 {
	v := make([]float64, n)
	for i := range v {
		v[i] = rng.NormFloat64()
	}
	return v
}

// The panels' dot product and axpy against gonum's Ddot and Daxpy (a
// general-purpose reference library) on lengths around the kernels' step
// of 16; tolerance: both dot products are within γ_n·Σ|x_i y_i| of the
// exact value (Higham 2002, eq. 3.5, any order, fused or not), and each
// axpy entry is one rounding apart (fused) or equal.
func TestRowKernels(t *testing.T) {
	kernelPaths(t, func(t *testing.T) {
		rng := rand.New(rand.NewPCG(9, 10))
		for _, n := range []int{0, 1, 15, 16, 17, 33, 100, 4096} {
			x, y := randSlice(rng, n), randSlice(rng, n)
			var abs float64
			for i := range x {
				abs += math.Abs(x[i] * y[i])
			}
			g := 2 * float64(n+1) * 0x1p-53 / (1 - float64(n+1)*0x1p-53)
			if got, want := rowDot(x, y), dotGo(x, y); math.Abs(got-want) > g*abs {
				t.Errorf("n %d: dot %v, gonum %v", n, got, want)
			}
			y2 := append([]float64(nil), y...)
			rowAxpy(0.7, x, y)
			axpyGo(0.7, x, y2)
			for i := range y {
				if math.Abs(y[i]-y2[i]) > 0x1p-52*(math.Abs(y2[i])+math.Abs(0.7*x[i])) {
					t.Fatalf("n %d: axpy entry %d = %v, gonum %v", n, i, y[i], y2[i])
				}
			}
		}
	})
}

// gramFull is the Gram product that orthogonality used before issue 16,
// kept here as the reference for gramCols: it sets the upper triangle of
// the s×s matrix c (row stride s) to fl(SSᵀ) in one call (s² words), by
// column blocks of the whole triangle, with the unfused tile.
func (g *gemmPool) gramFull(s, L int, S, c []float64, stop func() bool) bool {
	if s == 0 {
		return true
	}
	clear(c[:s*s])
	if L == 0 {
		return true
	}
	nr := stripN()
	width := g.unitSize(s, tileN, nr)
	units := (s + width - 1) / width
	kc := min(tileK, L)
	mp, np := (min(s, tileM)+3)/4*4, (min(s, tileN)+nr-1)/nr*nr
	return g.fan(units, mp, np, kc, stop, func(u int, buf *packBuf, halt func() bool) {
		u = units - 1 - u
		j0 := u * width
		j1 := min(s, j0+width)
		mulCols(j1, j1-j0, L, false, operand{S, L, false}, operand{S, L, true}, j0, c, s, buf, halt, false)
	})
}

// The Gram matrix of orthogonality. gramFull with every tile is bit for
// bit the same as with the portable tile (derived: the unfused tiles and
// mulTileGo do the same IEEE operations, fl(acc + fl(a·b)) in order of l,
// so a fused multiply-add anywhere would show), and within
// γ_L·Σ_ℓ|s_iℓ s_jℓ| of gonum's Dsyrk (Higham 2002, eq. 3.5: both are inner
// products of length L evaluated in some order). gramCols, with every
// tile, 1 to 3 workers and panels of several widths (cutting tileN, tileM
// and the strips at odd places), gives entry (j, i), j ≥ i, with the bits of
// the portable gramFull's entry (i, j) (derived: the same rounded products,
// S_jℓ·S_iℓ = S_iℓ·S_jℓ, summed in the same order; see gramCols).
func TestGramUnfused(t *testing.T) {
	rng := rand.New(rand.NewPCG(11, 12))
	for _, sh := range [][2]int{{1, 1}, {5, 3}, {37, 600}, {450, 300}, {800, 40}} {
		t.Run(fmt.Sprintf("%dx%d", sh[0], sh[1]), func(t *testing.T) { gramCase(t, rng, sh[0], sh[1]) })
	}
}

func gramCase(t *testing.T, rng *rand.Rand, s, L int) {
	sh := [2]int{s, L}
	q := randSlice(rng, s*L)
	keep := tileKind
	tileKind = tileGo
	ref := make([]float64, s*s)
	newGemmPoolN(2, max(s, L)).gramFull(s, L, q, ref, nil)
	tileKind = keep
	kernelPaths(t, func(t *testing.T) {
		got := make([]float64, s*s)
		newGemmPoolN(3, max(s, L)).gramFull(s, L, q, got, nil)
		for i := 0; i < s; i++ {
			for j := i; j < s; j++ {
				if math.Float64bits(got[i*s+j]) != math.Float64bits(ref[i*s+j]) {
					t.Fatalf("%v: entry (%d, %d) = %v, portable tile %v", sh, i, j, got[i*s+j], ref[i*s+j])
				}
			}
		}
		for workers := 1; workers <= 3; workers++ {
			for _, p := range []int{1, 7, 200, gramPanel, 500} {
				p = min(p, s)
				buf := make([]float64, s*p)
				gp := newGemmPoolN(workers, max(s, L))
				for j0 := 0; j0 < s; j0 += p {
					j1 := min(s, j0+p)
					if !gp.gramCols(s, L, q, j0, j1, buf, p, nil) {
						t.Fatal("gramCols stopped without a stop function")
					}
					for i := j0; i < j1; i++ {
						for j := i; j < s; j++ {
							if v := buf[(j-j0)*p+i-j0]; math.Float64bits(v) != math.Float64bits(ref[i*s+j]) {
								t.Fatalf("%v, %d workers, panels of %d: entry (%d, %d) = %v, portable gramFull's (%d, %d) %v", sh, workers, p, j, i, v, i, j, ref[i*s+j])
							}
						}
					}
				}
			}
		}
	})
	want := blas64.Symmetric{N: s, Stride: s, Data: make([]float64, s*s), Uplo: blas.Upper}
	blas64.Syrk(blas.NoTrans, 1, blas64.General{Rows: s, Cols: L, Stride: L, Data: q}, 0, want)
	g := float64(L) * 0x1p-53 / (1 - float64(L)*0x1p-53)
	for i := 0; i < s; i++ {
		for j := i; j < s; j++ {
			var abs float64
			for l := 0; l < L; l++ {
				abs += math.Abs(q[i*L+l] * q[j*L+l])
			}
			if d := math.Abs(ref[i*s+j] - want.Data[i*s+j]); d > 2*g*abs {
				t.Fatalf("%v: entry (%d, %d) = %v, gonum %v", sh, i, j, ref[i*s+j], want.Data[i*s+j])
			}
		}
	}
}
