package rankone

import (
	"math"
	"math/rand/v2"

	"gonum.org/v1/gonum/blas/blas64"
	"gonum.org/v1/gonum/mat"
)

// TopEigen approximates the largest eigenvalue of a symmetric operator of
// order p and its unit eigenvector, without forming a full decomposition:
// Lanczos with full reorthogonalisation (Golub & Van Loan, "Matrix
// Computations", 4th ed., 2013, §10.1), restarted explicitly from the best
// Ritz vector until the residual ‖A x − θ x‖ ≤ tol·max(|θ|, ‖T‖) or the
// restarts run out. Only the small tridiagonal matrix is diagonalised (with
// gonum's EigenSym).
//
// apply(dst, src) must set dst = A·src. x holds the start vector on entry
// (a zero x is replaced by a fixed pseudo-random vector) and the eigenvector
// estimate on return. It returns the Ritz value and the number of calls of
// apply. It is exported so that users' strategies can share it.
func TopEigen(apply func(dst, src []float64), x []float64, steps, restarts int, tol float64) (theta float64, calls int) {
	p := len(x)
	if p == 0 {
		return 0, 0
	}
	if steps <= 0 {
		steps = 24
	}
	steps = min(steps, p)
	if restarts <= 0 {
		restarts = 8
	}
	if nrm := norm(x); nrm == 0 || math.IsNaN(nrm) {
		rng := rand.New(rand.NewPCG(0x5e97e, uint64(p)))
		for i := range x {
			x[i] = rng.NormFloat64()
		}
	}
	scale(x, 1/norm(x))
	v := make([]float64, steps*p)
	wv := make([]float64, p)
	alpha := make([]float64, steps)
	beta := make([]float64, steps)
	var es mat.EigenSym
	for r := 0; r < restarts; r++ {
		copy(v[:p], x)
		j := 0
		var anorm float64
		for j < steps {
			vj := v[j*p : (j+1)*p]
			apply(wv, vj)
			calls++
			alpha[j] = dotv(vj, wv)
			// Full reorthogonalisation, twice ("twice is enough", Parlett,
			// "The Symmetric Eigenvalue Problem", 1998, §6.9).
			for pass := 0; pass < 2; pass++ {
				for i := 0; i <= j; i++ {
					vi := v[i*p : (i+1)*p]
					axpy(-dotv(vi, wv), vi, wv)
				}
			}
			beta[j] = norm(wv)
			anorm = math.Max(anorm, math.Abs(alpha[j])+beta[j])
			j++
			if beta[j-1] <= 1e-14*anorm || anorm == 0 {
				beta[j-1] = 0 // invariant subspace found
				break
			}
			if j < steps {
				copy(v[j*p:(j+1)*p], wv)
				scale(v[j*p:(j+1)*p], 1/beta[j-1])
			}
		}
		k := j
		t := mat.NewSymDense(k, nil)
		for i := 0; i < k; i++ {
			t.SetSym(i, i, alpha[i])
			if i+1 < k {
				t.SetSym(i, i+1, beta[i])
			}
		}
		if !es.Factorize(t, true) {
			return alpha[0], calls
		}
		vals := es.Values(nil)
		var vecs mat.Dense
		es.VectorsTo(&vecs)
		top := k - 1
		theta = vals[top]
		clear(x)
		for i := 0; i < k; i++ {
			axpy(vecs.At(i, top), v[i*p:(i+1)*p], x)
		}
		scale(x, 1/norm(x))
		res := math.Abs(beta[k-1] * vecs.At(k-1, top))
		if res <= tol*math.Max(math.Abs(theta), anorm) || k == p || beta[k-1] == 0 {
			return theta, calls
		}
	}
	return theta, calls
}

func dotv(a, b []float64) float64 {
	return blas64.Dot(blas64.Vector{N: len(a), Data: a, Inc: 1}, blas64.Vector{N: len(b), Data: b, Inc: 1})
}

func norm(a []float64) float64 {
	return blas64.Nrm2(blas64.Vector{N: len(a), Data: a, Inc: 1})
}

func axpy(alpha float64, x, y []float64) {
	blas64.Axpy(alpha, blas64.Vector{N: len(x), Data: x, Inc: 1}, blas64.Vector{N: len(y), Data: y, Inc: 1})
}

func scale(x []float64, a float64) {
	for i := range x {
		x[i] *= a
	}
}

// symApply returns the operator of a dense symmetric matrix.
func symApply(a *mat.SymDense) func(dst, src []float64) {
	raw := a.RawSymmetric()
	return func(dst, src []float64) {
		blas64.Symv(1, raw, blas64.Vector{N: len(src), Data: src, Inc: 1}, 0, blas64.Vector{N: len(dst), Data: dst, Inc: 1})
	}
}
