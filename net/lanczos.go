package net

import (
	"math"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
	"gonum.org/v1/gonum/mat"

	"github.com/segre-lab/segre/internal/eigen"
)

// lanczos holds one worker's buffers for topDense: nothing is allocated per
// call once they are sized, so the cells of a branch-and-bound batch cost no
// garbage collection for their estimates. Nothing here is certified: the
// estimate only aims the verified test (see maxEigUpper and BlockForm.upper),
// which proves the bound whatever the estimate is. Products that meet an
// addition are still written float64(a*b), so that the compiler fuses
// nothing in this file (which then needs no entry in .ci/fusion-allowed).
type lanczos struct {
	p, steps  int
	v         []float64 // the Lanczos basis, row j = v_j (steps×p)
	w         []float64 // the next residual vector (p)
	h         []float64 // the reorthogonalisation coefficients (steps)
	alpha     []float64 // diagonal of T (steps)
	beta      []float64 // off-diagonal of T, β_j = ‖w_j‖ (steps)
	s         []float64 // top eigenvector of T_k (steps)
	d, du, dl []float64 // inverse iteration's elimination (steps)
	du2       []float64
}

// lanczosSteps is the most Lanczos vectors topDense keeps: up to this order
// the iteration runs without a restart until the Krylov space is the whole
// space, which in exact arithmetic makes it a tridiagonalisation; above it,
// it restarts from the best Ritz vector, as eigen.Top does.
const lanczosSteps = 64

// lanczosRestarts bounds the restarts of topDense (orders above lanczosSteps).
const lanczosRestarts = 8

// resize makes the buffers fit order p; it allocates only when p grows.
func (lz *lanczos) resize(p int) {
	if lz.p == p && lz.v != nil {
		return
	}
	steps := min(p, lanczosSteps)
	lz.p, lz.steps = p, steps
	lz.v = make([]float64, steps*p)
	lz.w = make([]float64, p)
	lz.h = make([]float64, steps)
	lz.alpha = make([]float64, steps)
	lz.beta = make([]float64, steps)
	lz.s = make([]float64, steps)
	lz.d, lz.du, lz.dl, lz.du2 = make([]float64, steps), make([]float64, steps), make([]float64, steps), make([]float64, steps)
}

// topDense approximates the largest eigenvalue of B = sign·A + shift·I and
// its unit eigenvector, for the symmetric p×p matrix A stored in full
// (row-major; both triangles are read), sign = −1 if neg, else +1. x holds
// the start vector on entry (a zero or non-finite x is replaced by a fixed
// vector) and the estimate on return. It is Lanczos with full
// reorthogonalisation (Golub & Van Loan, "Matrix Computations", 4th ed.,
// 2013, §10.1; see reorthogonalise), stopped when the residual
// ‖Bx − θx‖ = β_k|s_k| is at most tol·max(|θ|, ‖T‖), or when the Krylov
// space fills the space (k = p).
//
// At each test the top Ritz value θ of the tridiagonal T_k comes from
// Newton's method on det(λI − T_k) (topTridiagNewton), its eigenvector s
// from two steps of inverse iteration, and the residual is β_k|s_k|; the
// tests are spaced by the rate the residuals fall at (nextCheck). The
// result depends only on A, sign, shift, x and tol. Entries beyond about
// 2^450 in magnitude may overflow the tridiagonal's squares and give a NaN
// estimate; the verified tests then fall back to their Gershgorin bounds
// (valid, loose). Branch-and-bound's matrices have entries at most about
// ‖c‖² ≤ d, the stored basis being orthonormal.
func (lz *lanczos) topDense(a []float64, p int, neg bool, shift float64, x []float64, tol float64) float64 {
	if p == 0 {
		return 0
	}
	lz.resize(p)
	sign := 1.0
	if neg {
		sign = -1
	}
	gm := blas64.General{Rows: p, Cols: p, Stride: p, Data: a}
	if nrm := eigen.Norm(x); nrm == 0 || math.IsNaN(nrm) || math.IsInf(nrm, 0) {
		eigen.FillStart(x)
	}
	eigen.Scale(x, 1/eigen.Norm(x))
	var theta float64
	for r := 0; r < lanczosRestarts; r++ {
		copy(lz.v[:p], x)
		var anorm float64
		lo := math.Inf(-1) // a lower bound on λmax(T_k) (interlacing)
		res := math.Inf(1) // the residual of the last check
		lastK, lastRes := 0, math.Inf(1)
		check := min(4, lz.steps) // the step count of the next check
		for j := 0; j < lz.steps; j++ {
			vj := lz.v[j*p : (j+1)*p]
			w := lz.w
			blas64.Gemv(blas.NoTrans, sign, gm, vec(vj), 0, vec(w))
			if shift != 0 {
				eigen.Axpy(shift, vj, w)
			}
			// The three-term recurrence, then full reorthogonalisation.
			lz.alpha[j] = eigen.Dot(vj, w)
			eigen.Axpy(-lz.alpha[j], vj, w)
			if j > 0 {
				eigen.Axpy(-lz.beta[j-1], lz.v[(j-1)*p:j*p], w)
			}
			lz.beta[j] = lz.reorthogonalise(j, w)
			anorm = math.Max(anorm, math.Abs(lz.alpha[j])+lz.beta[j])
			k := j + 1
			breakdown := lz.beta[j] <= 1e-14*anorm || anorm == 0
			if breakdown {
				lz.beta[j] = 0 // an invariant subspace
			}
			if k == 1 {
				lo = lz.alpha[0]
			}
			if breakdown || k == lz.steps || k == check {
				theta = eigen.TridiagTop(lz.alpha[:k], lz.beta[:k-1], lo, res)
				lo = theta
				lz.tridiagVector(k, theta)
				res = math.Abs(lz.beta[j] * lz.s[k-1])
				target := tol * math.Max(math.Abs(theta), anorm)
				done := res <= target || k == p || breakdown
				if done || k == lz.steps {
					basis := blas64.General{Rows: k, Cols: p, Stride: p, Data: lz.v[:k*p]}
					blas64.Gemv(blas.Trans, 1, basis, vec(lz.s[:k]), 0, vec(x))
					eigen.Scale(x, 1/eigen.Norm(x))
				}
				if done {
					return theta
				}
				if k == lz.steps {
					break
				}
				check = k + eigen.NextCheck(lastK, lastRes, k, res, target)
				lastK, lastRes = k, res
			}
			next := lz.v[k*p : (k+1)*p]
			copy(next, w)
			eigen.Scale(next, 1/lz.beta[j])
		}
	}
	return theta
}

// reorthogonalise makes w (the new Lanczos vector before normalisation)
// orthogonal to v_0, …, v_j by classical Gram–Schmidt, whose two
// matrix-vector products go through gonum's kernels, repeated once when the
// pass removed more than 1 − 1/√2 of w's norm (the criterion of Daniel,
// Gragg, Kaufman and Stewart, "Reorthogonalization and stable algorithms
// for updating the Gram–Schmidt QR factorization", Math. Comp. 30 (1976)
// 772–795). The corrections along v_j are added to α_j. It returns ‖w‖.
func (lz *lanczos) reorthogonalise(j int, w []float64) float64 {
	p := lz.p
	basis := blas64.General{Rows: j + 1, Cols: p, Stride: p, Data: lz.v[:(j+1)*p]}
	h := vec(lz.h[:j+1])
	before := norm2(w)
	after := before
	for pass := 0; pass < 2; pass++ {
		blas64.Gemv(blas.NoTrans, 1, basis, vec(w), 0, h)
		blas64.Gemv(blas.Trans, -1, basis, h, 1, vec(w))
		lz.alpha[j] += lz.h[j]
		after = norm2(w)
		if after > 0.7071*before {
			break
		}
		before = after
	}
	return after
}

// tridiagVector writes into lz.s[:k] a unit eigenvector of T_k for the
// eigenvalue estimate theta: by inverse iteration (tridiagEigvec), or if
// that breaks down from eigen.Sym, or if that fails too, e_1.
func (lz *lanczos) tridiagVector(k int, theta float64) {
	s := lz.s[:k]
	if lz.tridiagEigvec(k, theta) {
		return
	}
	t := mat.NewSymDense(k, nil)
	for i := 0; i < k; i++ {
		t.SetSym(i, i, lz.alpha[i])
		if i+1 < k {
			t.SetSym(i, i+1, lz.beta[i])
		}
	}
	clear(s)
	_, vecs, ok := eigen.Sym(t, true)
	if !ok {
		s[0] = 1
		return
	}
	for i := range s {
		s[i] = vecs.At(i, k-1)
	}
}

// tridiagEigvec writes into lz.s[:k] the unit eigenvector of T_k for the
// eigenvalue estimate theta by two steps of inverse iteration from the
// all-ones vector, with the tridiagonal elimination with partial pivoting of
// LAPACK's xGTSV. It reports false if the iteration broke down.
func (lz *lanczos) tridiagEigvec(k int, theta float64) bool {
	a, b, s := lz.alpha[:k], lz.beta[:k], lz.s[:k]
	if k == 1 {
		s[0] = 1
		return true
	}
	d, du, dl, du2 := lz.d[:k], lz.du[:k], lz.dl[:k], lz.du2[:k]
	var scale float64
	for i := 0; i < k; i++ {
		scale = math.Max(scale, math.Abs(a[i]))
		if i < k-1 {
			scale = math.Max(scale, math.Abs(b[i]))
		}
	}
	return eigen.InverseIterate(a, b, theta, scale, s, d, du, dl, du2)
}

// norm2 returns ‖x‖ as √(xᵀx) by gonum's vectorised Dot, and by its
// overflow-safe (slower) Nrm2 when xᵀx is not a normal positive number.
func norm2(x []float64) float64 {
	d := eigen.Dot(x, x)
	if d > 0x1p-900 && d < 0x1p900 {
		return math.Sqrt(d)
	}
	return eigen.Norm(x)
}

func vec(x []float64) blas64.Vector { return blas64.Vector{N: len(x), Data: x, Inc: 1} }
