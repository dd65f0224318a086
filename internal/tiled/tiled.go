// Package tiled holds the Gram products shared by the subspace and the
// bound builders, computed in tiles so that a long product can be stopped.
package tiled

import (
	"math"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
	"gonum.org/v1/gonum/mat"

	"github.com/segre-lab/segre/internal/accurate"
)

// Sym returns fl(AAᵀ) (NoTrans) or fl(AᵀA) (Trans) for the rows×cols
// row-major A, as a symmetric matrix (upper triangle), or ok = false if
// stop reported true first.
func Sym(tr blas.Transpose, rows, cols int, a []float64, stop func() bool) (*mat.SymDense, bool) {
	p := rows
	if tr == blas.Trans {
		p = cols
	}
	out := blas64.Symmetric{N: p, Stride: p, Data: make([]float64, p*p), Uplo: blas.Upper}
	if rows > 0 && cols > 0 && !Gram(tr, blas64.General{Rows: rows, Cols: cols, Stride: cols, Data: a}, out, stop) {
		return nil, false
	}
	return mat.NewSymDense(p, out.Data), true
}

// Gram sets the upper triangle of c to fl(AAᵀ) (NoTrans) or fl(AᵀA)
// (Trans) in column tiles of 32, calling stop between tiles; it returns
// false, leaving c incomplete, if stop reported true. Every entry is one
// dot product of the inner dimension, summed in some order, so the
// rounding bounds of a single Syrk apply unchanged.
func Gram(tr blas.Transpose, a blas64.General, c blas64.Symmetric, stop func() bool) bool {
	p := c.N
	// part(i0, i1) is the slice of A whose Gram block gives rows/columns
	// [i0, i1) of C: rows of A (NoTrans) or columns of A (Trans).
	part := func(i0, i1 int) blas64.General {
		if tr == blas.NoTrans {
			return blas64.General{Rows: i1 - i0, Cols: a.Cols, Stride: a.Stride, Data: a.Data[i0*a.Stride:]}
		}
		return blas64.General{Rows: a.Rows, Cols: i1 - i0, Stride: a.Stride, Data: a.Data[i0:]}
	}
	const tile = 32
	for c0 := 0; c0 < p; c0 += tile {
		if stop != nil && stop() {
			return false
		}
		c1 := min(p, c0+tile)
		// C[0:c0, c0:c1] = part(0, c0)·part(c0, c1)ᵀ (NoTrans) or
		// part(0, c0)ᵀ·part(c0, c1) (Trans), in row blocks of 256 so that
		// no single product is long.
		ta, tb := blas.NoTrans, blas.Trans
		if tr == blas.Trans {
			ta, tb = blas.Trans, blas.NoTrans
		}
		for r0 := 0; r0 < c0; r0 += 256 {
			if r0 > 0 && stop != nil && stop() {
				return false
			}
			r1 := min(c0, r0+256)
			blas64.Gemm(ta, tb, 1, part(r0, r1), part(c0, c1), 0,
				blas64.General{Rows: r1 - r0, Cols: c1 - c0, Stride: c.Stride, Data: c.Data[r0*c.Stride+c0:]})
		}
		blas64.Syrk(tr, 1, part(c0, c1), 0,
			blas64.Symmetric{N: c1 - c0, Stride: c.Stride, Data: c.Data[c0*c.Stride+c0:], Uplo: blas.Upper})
	}
	return true
}

// ComplementDiag replaces s by c·I − s in place and returns the bound
// 2u·max|c − s_ii| on the rounding of its new diagonal.
func ComplementDiag(s blas64.Symmetric, c float64) float64 {
	var mx float64
	for i := range s.Data {
		s.Data[i] = -s.Data[i]
	}
	for i := 0; i < s.N; i++ {
		s.Data[i*s.N+i] += c
		mx = math.Max(mx, math.Abs(s.Data[i*s.N+i]))
	}
	return accurate.MulUp(2*accurate.U, mx)
}
