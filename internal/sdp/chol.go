package sdp

import (
	"context"
	"math"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
)

// chol is a Cholesky factorisation A = UᵀU of a symmetric positive definite
// k×k matrix (upper triangle, row-major), computed so that a cancelled
// context stops it within one tile of work: the Schur complement of the
// largest relaxations is the solver's one long computation (k = 2026 at
// m = n = 10, about 0.1 s per factorisation on the tile path), and a
// deadline must not wait for it.
//
// Algorithm: right-looking blocked Cholesky (Golub, Van Loan, Matrix
// Computations, 4th ed., 2013, §4.2.9). For the block column j of width nb,
// with A = [A11 A12; A12ᵀ A22]:
//
//	U11 = chol(A11)            (unblocked, §4.2.5)
//	U12 = U11⁻ᵀ A12            (triangular solve)
//	A22 ← A22 − U12ᵀ U12       (symmetric update, done in column tiles of A22,
//	                            the context checked between tiles)
//
// Two implementations: with the kernels of kernel_amd64.s, every O(k³)
// step runs through one register-tiled product kernel (tiles.go, nb = 128,
// the diagonal blocks factored the same way with nb = 16, the update split
// between goroutines); without them, gonum's Trsm, Gemm and Syrk
// (factorBLAS, nb = 64). Only the upper triangle of U is meaningful.
type chol struct {
	k      int
	u      []float64 // row-major k×k, upper triangle holds U
	ap, bp []float64 // packed panels of the tile path (tiles.go)
}

const (
	cholBlock = 64  // block column width of factorBLAS
	cholTile  = 256 // columns of A22 updated between context checks in factorBLAS
)

// factor computes the factorisation of the upper triangle of a (row-major
// k×k, stride k) into c, reusing c's storage. It returns false if A is not
// numerically positive definite, and ctx.Err() if cancelled. It runs the
// tile kernel's path (factorTiles) where the processor has one, else
// gonum's BLAS (factorBLAS).
func (c *chol) factor(ctx context.Context, a []float64, k int) (bool, error) {
	if cap(c.u) < k*k {
		c.u = make([]float64, k*k)
	}
	c.k, c.u = k, c.u[:k*k]
	copy(c.u, a[:k*k])
	if useKernels {
		return c.factorTiles(ctx)
	}
	return c.factorBLAS(ctx)
}

// factorBLAS is the blocked factorisation of the doc of chol with gonum's
// Trsm, Gemm and Syrk, in place on c.u.
func (c *chol) factorBLAS(ctx context.Context) (bool, error) {
	k, u := c.k, c.u
	// gen is the rows×cols block of U at (r0, c0); every caller's block is
	// nonempty.
	gen := func(r0, c0, rows, cols int) blas64.General {
		return blas64.General{Rows: rows, Cols: cols, Stride: k, Data: u[r0*k+c0:]}
	}
	for j0 := 0; j0 < k; j0 += cholBlock {
		if err := ctx.Err(); err != nil {
			return false, err
		}
		jb := min(cholBlock, k-j0)
		// Unblocked upper Cholesky of the diagonal block (row-oriented):
		// u_ii = √(a_ii − Σ_{p<i} u_pi²), u_ij = (a_ij − Σ_{p<i} u_pi u_pj)/u_ii.
		if !diagonalBlock(u, k, j0, jb) {
			return false, nil
		}
		rest := k - j0 - jb
		if rest == 0 {
			break
		}
		u11 := blas64.Triangular{Uplo: blas.Upper, Diag: blas.NonUnit, N: jb, Stride: k, Data: u[j0*k+j0:]}
		a12 := gen(j0, j0+jb, jb, rest)
		blas64.Trsm(blas.Left, blas.Trans, 1, u11, a12)
		// A22 ← A22 − U12ᵀU12, upper triangle, in column tiles [c0, c1).
		for c0 := 0; c0 < rest; c0 += cholTile {
			if err := ctx.Err(); err != nil {
				return false, err
			}
			c1 := min(rest, c0+cholTile)
			w := c1 - c0
			// Rows [0, c0) of the tile: a full block, Gemm.
			if c0 > 0 {
				blas64.Gemm(blas.Trans, blas.NoTrans, -1, gen(j0, j0+jb, jb, c0), gen(j0, j0+jb+c0, jb, w), 1, gen(j0+jb, j0+jb+c0, c0, w))
			}
			// Rows [c0, c1): the diagonal block, Syrk on its upper triangle.
			blas64.Syrk(blas.Trans, -1, gen(j0, j0+jb+c0, jb, w), 1,
				blas64.Symmetric{Uplo: blas.Upper, N: w, Stride: k, Data: u[(j0+jb+c0)*k+j0+jb+c0:]})
		}
	}
	return true, nil
}

// diagonalBlock overwrites the jb×jb diagonal block at (j0, j0) of the
// row-major k×k u (upper triangle) with its unblocked upper Cholesky
// factor, row by row: u_ii = √(a_ii − Σ_{p<i} u_pi²),
// u_ij = (a_ij − Σ_{p<i} u_pi u_pj)/u_ii (sums over the block's rows). It
// reports false if a pivot is not positive and finite.
func diagonalBlock(u []float64, k, j0, jb int) bool {
	for i := j0; i < j0+jb; i++ {
		d := u[i*k+i]
		for p := j0; p < i; p++ {
			d -= u[p*k+i] * u[p*k+i]
		}
		if !(d > 0) || math.IsInf(d, 0) {
			return false
		}
		d = math.Sqrt(d)
		u[i*k+i] = d
		for j := i + 1; j < j0+jb; j++ {
			s := u[i*k+j]
			for p := j0; p < i; p++ {
				s -= u[p*k+i] * u[p*k+j]
			}
			u[i*k+j] = s / d
		}
	}
	return true
}

// solve overwrites b with A⁻¹b = U⁻¹U⁻ᵀb, both triangular solves by rows
// of U (contiguous): Uᵀy = b column by column (y_p = b_p/u_pp, then b
// loses y_p times row p right of the diagonal), then Ux = y from the last
// row up (x_i = (y_i − Σ_{j>i} u_ij x_j)/u_ii).
func (c *chol) solve(b []float64) {
	k, u := c.k, c.u
	b = b[:k]
	for p := 0; p < k; p++ {
		y := b[p] / u[p*k+p]
		b[p] = y
		row, rest := u[p*k+p+1:(p+1)*k], b[p+1:]
		for j := range rest {
			rest[j] -= y * row[j]
		}
	}
	for i := k - 1; i >= 0; i-- {
		row, rest := u[i*k+i+1:(i+1)*k], b[i+1:]
		var s float64
		for j := range rest {
			s += row[j] * rest[j]
		}
		b[i] = (b[i] - s) / u[i*k+i]
	}
}
