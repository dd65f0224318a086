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
// largest relaxations is the solver's one long computation (k ≈ 2500 at
// m = n = 10, about a second per factorisation), and a deadline must not
// wait for it.
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
// Only the upper triangle is read and written.
type chol struct {
	k int
	u []float64 // row-major k×k, upper triangle holds U
}

const (
	cholBlock = 64  // block column width
	cholTile  = 256 // columns of A22 updated between context checks
)

// factor computes the factorisation of the upper triangle of a (row-major
// k×k, stride k) into c, reusing c's storage. It returns false if A is not
// numerically positive definite, and ctx.Err() if cancelled.
func (c *chol) factor(ctx context.Context, a []float64, k int) (bool, error) {
	if cap(c.u) < k*k {
		c.u = make([]float64, k*k)
	}
	c.k, c.u = k, c.u[:k*k]
	copy(c.u, a[:k*k])
	u := c.u
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
		for i := j0; i < j0+jb; i++ {
			d := u[i*k+i]
			for p := j0; p < i; p++ {
				d -= u[p*k+i] * u[p*k+i]
			}
			if !(d > 0) || math.IsInf(d, 0) {
				return false, nil
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

// solve overwrites b with A⁻¹b = U⁻¹U⁻ᵀb.
func (c *chol) solve(b []float64) {
	t := blas64.Triangular{Uplo: blas.Upper, Diag: blas.NonUnit, N: c.k, Stride: max(c.k, 1), Data: c.u}
	v := blas64.Vector{N: c.k, Inc: 1, Data: b}
	blas64.Trsv(blas.Trans, t, v)
	blas64.Trsv(blas.NoTrans, t, v)
}
