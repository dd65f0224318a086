// Package eigen has the partial symmetric eigensolver shared by the
// strategies and the certified bounds.
package eigen

import (
	"math"
	"math/rand/v2"

	"gonum.org/v1/gonum/blas/blas64"
	"gonum.org/v1/gonum/mat"
)

// Top approximates the largest eigenvalue of a symmetric operator of
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
// apply.
func Top(apply func(dst, src []float64), x []float64, steps, restarts int, tol float64) (theta float64, calls int) {
	return TopStop(apply, x, steps, restarts, tol, nil)
}

// TopStop is Top that also ends as soon as stop (checked before each call
// of apply; nil never stops) reports true, returning the best Ritz pair of
// the Lanczos vectors built so far (x unchanged, and θ = 0, if none).
func TopStop(apply func(dst, src []float64), x []float64, steps, restarts int, tol float64, stop func() bool) (theta float64, calls int) {
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
	// ritz computes the top Ritz pair of the first k Lanczos vectors into x
	// and reports whether it has converged.
	svec := make([]float64, steps)
	ritz := func(k int, anorm float64) bool {
		th, ok := topTridiag(alpha[:k], beta[:k-1], svec[:k])
		if !ok {
			t := mat.NewSymDense(k, nil)
			for i := 0; i < k; i++ {
				t.SetSym(i, i, alpha[i])
				if i+1 < k {
					t.SetSym(i, i+1, beta[i])
				}
			}
			vals, vecs, ok := Sym(t, true)
			if !ok {
				theta = alpha[0]
				copy(x, v[:p])
				return true
			}
			th = vals[k-1]
			for i := 0; i < k; i++ {
				svec[i] = vecs.At(i, k-1)
			}
		}
		theta = th
		clear(x)
		for i := 0; i < k; i++ {
			axpy(svec[i], v[i*p:(i+1)*p], x)
		}
		scale(x, 1/norm(x))
		res := math.Abs(beta[k-1] * svec[k-1])
		return res <= tol*math.Max(math.Abs(theta), anorm) || k == p || beta[k-1] == 0
	}
	for r := 0; r < restarts; r++ {
		copy(v[:p], x)
		var anorm float64
		for j := 0; j < steps; j++ {
			if stop != nil && stop() {
				if j > 0 {
					ritz(j, anorm)
				}
				return theta, calls
			}
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
			k := j + 1
			breakdown := beta[j] <= 1e-14*anorm || anorm == 0
			if breakdown {
				beta[j] = 0 // invariant subspace found
			}
			// Test for convergence every 6 steps, at a breakdown and at the end.
			if breakdown || k == steps || k%6 == 0 {
				if ritz(k, anorm) {
					return theta, calls
				}
				if breakdown || k == steps {
					break
				}
			}
			copy(v[k*p:(k+1)*p], wv)
			scale(v[k*p:(k+1)*p], 1/beta[j])
		}
	}
	return theta, calls
}

// Dot returns aᵀb.
func Dot(a, b []float64) float64 { return dotv(a, b) }

// Norm returns ‖a‖₂.
func Norm(a []float64) float64 { return norm(a) }

// Axpy sets y += alpha·x.
func Axpy(alpha float64, x, y []float64) { axpy(alpha, x, y) }

// Scale sets x *= a.
func Scale(x []float64, a float64) { scale(x, a) }

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

// SymApply returns the operator of a dense symmetric matrix.
func SymApply(a *mat.SymDense) func(dst, src []float64) {
	raw := a.RawSymmetric()
	return func(dst, src []float64) {
		blas64.Symv(1, raw, blas64.Vector{N: len(src), Data: src, Inc: 1}, 0, blas64.Vector{N: len(dst), Data: dst, Inc: 1})
	}
}

// topTridiag returns the largest eigenvalue of the symmetric tridiagonal
// matrix with diagonal a and off-diagonal b, found by Sturm-sequence
// bisection (Golub & Van Loan 2013, §8.4.1), and writes a unit eigenvector
// into s, found by two steps of inverse iteration with the tridiagonal
// elimination with partial pivoting of LAPACK's xGTSV. ok is false if the
// inverse iteration broke down.
func topTridiag(a, b, s []float64) (float64, bool) {
	k := len(a)
	if k == 1 {
		s[0] = 1
		return a[0], true
	}
	lo, hi := TridiagGershgorin(a, b)
	scale := math.Max(math.Abs(lo), math.Abs(hi))
	if scale == 0 {
		clear(s)
		s[0] = 1
		return 0, true
	}
	pivmin := 0x1p-1000 * scale
	// below(λ) counts the eigenvalues below λ.
	below := func(lam float64) int {
		c := 0
		d := a[0] - lam
		for i := 0; ; i++ {
			if math.Abs(d) < pivmin {
				d = -pivmin
			}
			if d < 0 {
				c++
			}
			if i+1 == k {
				return c
			}
			d = a[i+1] - lam - b[i]*b[i]/d
		}
	}
	lo -= 1e-15 * scale
	hi += 1e-15 * scale
	for it := 0; it < 200 && hi-lo > 4e-16*scale; it++ {
		mid := lo + (hi-lo)/2
		if below(mid) >= k {
			hi = mid
		} else {
			lo = mid
		}
	}
	theta := lo + (hi-lo)/2
	// Inverse iteration on T − θI from the all-ones vector.
	d, du, dl, du2 := make([]float64, k), make([]float64, k), make([]float64, k), make([]float64, k)
	if !InverseIterate(a, b, theta, scale, s, d, du, dl, du2) {
		return theta, false
	}
	return theta, true
}

// InverseIterate writes into s (length k = len(a) ≥ 2) the unit eigenvector
// of the symmetric tridiagonal matrix with diagonal a and off-diagonal b
// for the eigenvalue estimate theta, by two steps of inverse iteration from
// the all-ones vector with the tridiagonal elimination with partial
// pivoting of LAPACK's xGTSV (Golub & Van Loan 2013, §8.4); scale is the
// largest magnitude of the entries (it sizes the guard against a zero
// pivot), d, du, dl, du2 are scratch of length k. It reports false if the
// iteration broke down.
func InverseIterate(a, b []float64, theta, scale float64, s, d, du, dl, du2 []float64) bool {
	k := len(a)
	for i := range s {
		s[i] = 1
	}
	tiny := 1e-300 + float64(1e-15*scale)
	for pass := 0; pass < 2; pass++ {
		for i := 0; i < k; i++ {
			d[i] = a[i] - theta
			du2[i] = 0
			if i < k-1 {
				du[i], dl[i] = b[i], b[i]
			}
		}
		for i := 0; i < k-1; i++ {
			if math.Abs(d[i]) >= math.Abs(dl[i]) {
				if d[i] == 0 {
					d[i] = tiny
				}
				f := dl[i] / d[i]
				d[i+1] -= float64(f * du[i])
				s[i+1] -= float64(f * s[i])
			} else {
				f := d[i] / dl[i]
				d[i] = dl[i]
				t := d[i+1]
				d[i+1] = du[i] - float64(f*t)
				if i < k-2 {
					du2[i] = du[i+1]
					du[i+1] = -float64(f * du2[i])
				}
				du[i] = t
				s[i], s[i+1] = s[i+1], s[i]-float64(f*s[i+1])
			}
		}
		if d[k-1] == 0 {
			d[k-1] = tiny
		}
		s[k-1] /= d[k-1]
		s[k-2] = (s[k-2] - float64(du[k-2]*s[k-1])) / d[k-2]
		for i := k - 3; i >= 0; i-- {
			s[i] = (s[i] - float64(du[i]*s[i+1]) - float64(du2[i]*s[i+2])) / d[i]
		}
		nr := Norm(s)
		if !(nr > 0) || math.IsInf(nr, 0) || math.IsNaN(nr) {
			return false
		}
		Scale(s, 1/nr)
	}
	return true
}

// TridiagGershgorin returns the Gershgorin interval [lo, hi] of the
// symmetric tridiagonal matrix with diagonal a and off-diagonal b: every
// eigenvalue lies in it (in exact arithmetic; an estimate's bracket).
func TridiagGershgorin(a, b []float64) (lo, hi float64) {
	lo, hi = math.Inf(1), math.Inf(-1)
	k := len(a)
	for i := 0; i < k; i++ {
		r := 0.0
		if i > 0 {
			r += math.Abs(b[i-1])
		}
		if i < k-1 {
			r += math.Abs(b[i])
		}
		lo = math.Min(lo, a[i]-r)
		hi = math.Max(hi, a[i]+r)
	}
	return lo, hi
}
