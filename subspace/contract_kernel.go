package subspace

import (
	"math"
	"sync"
)

// The two kernels behind the contractions (contract.go): dotRows, many
// dot products of short rows with one vector (Q_t y for every stored
// matrix at once: its rows are only n long, too short for a matrix-vector
// product to run at full speed), and axpyRows, a weighted sum of rows
// (Q_tᵀ x, and Zᵀc in the operators). Each streams its matrix once, with
// the assembly of contract_amd64.s when the processor has AVX2, or the
// portable code below, which does the same sums in the same order: the
// results are the same bit for bit on every platform and GOAMD64 level.
//
// Rounding. Every product is rounded to binary64 and then added (the
// assembly multiplies and adds separately; the Go code writes float64(a*b),
// which the Go specification forbids to fuse), and every sum starts from
// an exact zero or from the caller's value. So a computed entry
// ŝ = fl(Σ_{l<k} a_l b_l) is one evaluation order of a sum of k rounded
// products, and |ŝ − Σ a_l b_l| ≤ γ_k Σ|a_l||b_l| with γ_k = ku/(1 − ku)
// (Higham 2002, eq. 3.5, which holds for every order of summation). The
// operators' factor Z is computed this way (k = n for G(y), k = m for
// H(x)), as the certified bounds that read it assume (net.MaxEigH).

// dotRows sets out[r] = Σ_{j<n} a[r·lda + j]·y[j] for r < len(out), with
// n = len(y), in the order of dotRowGo. a holds the rows at stride lda ≥ n.
// It panics if a is too short.
func dotRows(out, a []float64, lda int, y []float64) {
	rows, n := len(out), len(y)
	if rows == 0 {
		return
	}
	if n == 0 {
		clear(out)
		return
	}
	_ = a[(rows-1)*lda+n-1]
	done := 0
	if n4 := n &^ 3; contractAsm && n4 > 0 && rows >= 4 {
		done = rows &^ 3
		dotRows4Asm(done, n4, a, lda, y, out)
		if n4 < n {
			for r := 0; r < done; r++ {
				s := out[r]
				row := a[r*lda : r*lda+n]
				for j := n4; j < n; j++ {
					s += float64(row[j] * y[j])
				}
				out[r] = s
			}
		}
	}
	for r := done; r < rows; r++ {
		out[r] = dotRowGo(a[r*lda:r*lda+n], y)
	}
}

// dotRowGo returns Σ_j a[j]·y[j] (len(a) = len(y) = n) in the order of
// the assembly: four lanes, lane q summing the products of the entries
// j ≡ q mod 4 below n4 = 4⌊n/4⌋ in order of j from zero, combined as
// (l0 + l1) + (l2 + l3), then the last n − n4 products added in order.
func dotRowGo(a, y []float64) float64 {
	n := len(y)
	a = a[:n]
	n4 := n &^ 3
	var l0, l1, l2, l3 float64
	for j := 0; j < n4; j += 4 {
		av := a[j : j+4 : j+4]
		yv := y[j : j+4 : j+4]
		l0 += float64(av[0] * yv[0])
		l1 += float64(av[1] * yv[1])
		l2 += float64(av[2] * yv[2])
		l3 += float64(av[3] * yv[3])
	}
	s := (l0 + l1) + (l2 + l3)
	for j := n4; j < n; j++ {
		s += float64(a[j] * y[j])
	}
	return s
}

// axpyRows adds Σ_{i<m} x[i]·a[i·lda + j] to out[j] for j < len(out), with
// m = len(x): out[j] = (…(out[j] + x_0·a[j]) + …) + x_{m−1}·a[(m−1)·lda + j],
// in order of i. a holds the rows at stride lda ≥ len(out). It panics if a
// is too short.
func axpyRows(out, x, a []float64, lda int) {
	m, nc := len(x), len(out)
	if m == 0 || nc == 0 {
		return
	}
	_ = a[(m-1)*lda+nc-1]
	if n4 := nc &^ 3; contractAsm && n4 > 0 {
		axpyRowsAccAsm(m, n4, x, a, lda, out)
		if n4 < nc {
			axpyRowsGo(out[n4:], x, a[n4:], lda)
		}
		return
	}
	axpyRowsGo(out, x, a, lda)
}

// axpyRowsGo is axpyRows in Go: the same additions in the same order.
func axpyRowsGo(out, x, a []float64, lda int) {
	nc := len(out)
	for i, xi := range x {
		row := a[i*lda : i*lda+nc]
		for j, v := range row {
			out[j] += float64(xi * v)
		}
	}
}

// contractScratch hands out float64 buffers for the contractions' intermediates,
// so that repeated calls (the searches make thousands) do not allocate.
var contractScratch sync.Pool

// getScratch returns a buffer of length n (contents undefined) and the
// handle to give back to putScratch.
func getScratch(n int) (*[]float64, []float64) {
	if p, ok := contractScratch.Get().(*[]float64); ok && cap(*p) >= n {
		return p, (*p)[:n]
	}
	b := make([]float64, n)
	return &b, b
}

func putScratch(p *[]float64) { contractScratch.Put(p) }

// gramPad is the number of entries past the end of Z that gramUpper may
// read: the buffers of G and H carry them, zeroed.
const gramPad = 8

// gramUpper sets the entries (i, j), i ≤ j < p, of c (row stride ldc) to
// (ZᵀZ)_ij = Σ_{t<s} z[t·p + i]·z[t·p + j] for s ≥ 1, each sum accumulated
// in order of t from zero with fused multiply-adds (the matrices G and H
// that it forms are estimates; nothing certified reads them). z holds the
// s×p matrix Z and gramPad more entries, which the 4×8 tiles at the right
// and bottom edges read but whose products they discard. Entries below
// the diagonal of c are left as they are: tiles that cross the diagonal
// go through a scratch tile.
func gramUpper(z []float64, s, p int, c []float64, ldc int) {
	_ = z[s*p+gramPad-1]
	var tile [32]float64
	for a0 := 0; a0 < p; a0 += 4 {
		rows := min(4, p-a0)
		for b0 := a0 &^ 7; b0 < p; b0 += 8 {
			cols := min(8, p-b0)
			if contractAsm && rows == 4 && cols == 8 && b0 > a0 {
				gramTile4x8Asm(s, z[a0:], z[b0:], p, c[a0*ldc+b0:], ldc)
				continue
			}
			if contractAsm {
				gramTile4x8Asm(s, z[a0:], z[b0:], p, tile[:], 8)
			} else {
				gramTileGo(s, z[a0:], z[b0:], p, tile[:], 8, rows, cols)
			}
			for i := 0; i < rows; i++ {
				for j := max(0, a0+i-b0); j < cols; j++ {
					c[(a0+i)*ldc+b0+j] = tile[i*8+j]
				}
			}
		}
	}
}

// gramTileGo is gramTile4x8 in Go for the first rows×cols entries of the
// tile: c[i·ldc + j] = Σ_{t<s} a[t·ld + i]·b[t·ld + j] by math.FMA in order
// of t from zero, the same operations as the assembly.
func gramTileGo(s int, a, b []float64, ld int, c []float64, ldc, rows, cols int) {
	for i := 0; i < rows; i++ {
		for j := 0; j < cols; j++ {
			var acc float64
			for t := 0; t < s; t++ {
				acc = math.FMA(a[t*ld+i], b[t*ld+j], acc)
			}
			c[i*ldc+j] = acc
		}
	}
}
