package rankone

import (
	"math"

	"gonum.org/v1/gonum/mat"

	"github.com/segre-lab/segre/internal/eigen"
)

// TopEigen approximates the largest eigenvalue of a symmetric operator of
// order len(x) and its unit eigenvector by restarted Lanczos with full
// reorthogonalisation (Golub & Van Loan, "Matrix Computations", 4th ed.,
// 2013, §10.1), without forming a full decomposition. apply(dst, src) must
// set dst = A·src; x holds the start vector (zero: a fixed pseudo-random one)
// and receives the eigenvector estimate. It stops when ‖Ax − θx‖ ≤
// tol·max(|θ|, ‖T‖) or after the restarts (zero steps or restarts mean 24
// and 8). It returns θ and the number of calls of apply. It is exported so
// that users' strategies can share it.
func TopEigen(apply func(dst, src []float64), x []float64, steps, restarts int, tol float64) (theta float64, calls int) {
	return eigen.Top(apply, x, steps, restarts, tol)
}

func dotv(a, b []float64) float64                       { return eigen.Dot(a, b) }
func norm(a []float64) float64                          { return eigen.Norm(a) }
func axpy(alpha float64, x, y []float64)                { eigen.Axpy(alpha, x, y) }
func scale(x []float64, a float64)                      { eigen.Scale(x, a) }
func symApply(a *mat.SymDense) func(dst, src []float64) { return eigen.SymApply(a) }

// lanczos is the work space of topLanczos, reused across calls so that a
// search's eigenproblems allocate nothing once it is sized. Nothing here is
// certified: its eigenvectors are steps of a local search, whose witness
// Verify certifies.
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

// Lanczos runs without a restart up to lanczosSteps vectors (then the
// Krylov space of an operator of that order fills the space, which makes
// the run a tridiagonalisation in exact arithmetic); larger operators keep
// at most lanczosSteps vectors (fewer when they would take more than
// lanczosWords numbers, but at least 24, as eigen.Top) and restart from
// the best Ritz vector up to lanczosRestarts times.
const (
	lanczosSteps    = 64
	lanczosWords    = 1 << 21
	lanczosRestarts = 8
)

// resize makes the buffers fit order p; it allocates only when p changes.
func (lz *lanczos) resize(p int) {
	if lz.p == p && lz.v != nil {
		return
	}
	steps := min(p, lanczosSteps, max(24, lanczosWords/p))
	lz.p, lz.steps = p, steps
	lz.v = make([]float64, steps*p)
	lz.w = make([]float64, p)
	lz.h = make([]float64, steps)
	lz.alpha = make([]float64, steps)
	lz.beta = make([]float64, steps)
	lz.s = make([]float64, steps)
	lz.d, lz.du, lz.dl, lz.du2 = make([]float64, steps), make([]float64, steps), make([]float64, steps), make([]float64, steps)
}

// top approximates the largest eigenvalue θ of the symmetric operator
// apply (dst = A·src) of order p = len(x) and its unit eigenvector, which
// it writes into x; x holds the start vector on entry (a zero or
// non-finite x is replaced by a fixed one). It is Lanczos with full
// reorthogonalisation (Golub & Van Loan, "Matrix Computations", 4th ed.,
// 2013, §10.1), stopped when the residual ‖Ax − θx‖ = β_k|s_k| is at most
// tol·max(|θ|, ‖T_k‖) or when the Krylov space fills the space (k = p).
// The method is that of net's per-cell estimate (net/lanczos.go): the top
// Ritz value of T_k by Newton's method from above (topTridiagNewton), its
// vector by inverse iteration, tests spaced by the rate the residuals fall
// at (nextCheck); the loops here are plain Go, which for the small orders
// of a formed G(y) or H(x) costs less than calls into a BLAS. The result
// depends only on the operator, x and tol.
func (lz *lanczos) top(apply func(dst, src []float64), x []float64, tol float64) float64 {
	p := len(x)
	if p == 0 {
		return 0
	}
	lz.resize(p)
	if nrm := norm2(x); nrm == 0 || math.IsNaN(nrm) || math.IsInf(nrm, 0) {
		eigen.FillStart(x)
	}
	scale(x, 1/norm2(x))
	var theta float64
	for r := 0; r < lanczosRestarts; r++ {
		copy(lz.v[:p], x)
		var anorm float64
		lo := math.Inf(-1) // a lower bound on λmax(T_k) (interlacing)
		res := math.Inf(1) // the residual of the last test
		lastK, lastRes := 0, math.Inf(1)
		check := min(4, lz.steps) // the step count of the next test
		for j := 0; j < lz.steps; j++ {
			vj := lz.v[j*p : (j+1)*p]
			w := lz.w
			apply(w, vj)
			// The three-term recurrence, then full reorthogonalisation.
			lz.alpha[j] = dot4(vj, w)
			axpy4(-lz.alpha[j], vj, w)
			if j > 0 {
				axpy4(-lz.beta[j-1], lz.v[(j-1)*p:j*p], w)
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
					clear(x)
					for i := 0; i < k; i++ {
						axpy4(lz.s[i], lz.v[i*p:(i+1)*p], x)
					}
					scale(x, 1/norm2(x))
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
			scale(next, 1/lz.beta[j])
		}
	}
	return theta
}

// reorthogonalise makes w (the new Lanczos vector before normalisation)
// orthogonal to v_0, …, v_j by classical Gram–Schmidt, repeated once when
// the pass removed more than 1 − 1/√2 of w's norm (the criterion of
// Daniel, Gragg, Kaufman and Stewart, "Reorthogonalization and stable
// algorithms for updating the Gram–Schmidt QR factorization", Math. Comp.
// 30 (1976) 772–795). The corrections along v_j are added to α_j. It
// returns ‖w‖.
func (lz *lanczos) reorthogonalise(j int, w []float64) float64 {
	p := lz.p
	h := lz.h[:j+1]
	before := norm2(w)
	after := before
	for pass := 0; pass < 2; pass++ {
		rowsTimes(h, lz.v, p, w)
		subRowsTimes(w, lz.v, p, h)
		lz.alpha[j] += h[j]
		after = norm2(w)
		if after > 0.7071*before {
			break
		}
		before = after
	}
	return after
}

// tridiagVector writes into lz.s[:k] a unit eigenvector of T_k for the
// eigenvalue estimate theta: by two steps of inverse iteration
// (eigen.InverseIterate), or if that breaks down from eigen.Sym, or if
// that fails too, e_1.
func (lz *lanczos) tridiagVector(k int, theta float64) {
	a, b, s := lz.alpha[:k], lz.beta[:k], lz.s[:k]
	if k == 1 {
		s[0] = 1
		return
	}
	var sc float64
	for i := 0; i < k; i++ {
		sc = math.Max(sc, math.Abs(a[i]))
		if i < k-1 {
			sc = math.Max(sc, math.Abs(b[i]))
		}
	}
	if eigen.InverseIterate(a, b, theta, sc, s, lz.d[:k], lz.du[:k], lz.dl[:k], lz.du2[:k]) {
		return
	}
	t := mat.NewSymDense(k, nil)
	for i := 0; i < k; i++ {
		t.SetSym(i, i, a[i])
		if i+1 < k {
			t.SetSym(i, i+1, b[i])
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

// norm2 returns ‖x‖ as √(xᵀx), and by gonum's overflow-safe Nrm2 when xᵀx
// is not a normal positive number.
func norm2(x []float64) float64 {
	d := dot4(x, x)
	if d > 0x1p-900 && d < 0x1p900 {
		return math.Sqrt(d)
	}
	return norm(x)
}

// dot4 returns aᵀb (len(b) ≥ len(a)) with four partial sums, so that the
// additions do not wait on each other.
func dot4(a, b []float64) float64 {
	b = b[:len(a)]
	var s0, s1, s2, s3 float64
	i := 0
	for ; i+4 <= len(a); i += 4 {
		s0 += a[i] * b[i]
		s1 += a[i+1] * b[i+1]
		s2 += a[i+2] * b[i+2]
		s3 += a[i+3] * b[i+3]
	}
	for ; i < len(a); i++ {
		s0 += a[i] * b[i]
	}
	return (s0 + s1) + (s2 + s3)
}

// rowsTimes sets h_i = (row i of a)·x for the len(h) rows of length
// p = len(x) of a (row-major), four rows at a time so that each x_j is
// loaded once for four products and the sums are eight independent
// chains.
func rowsTimes(h, a []float64, p int, x []float64) {
	x = x[:p]
	i := 0
	for ; i+4 <= len(h); i += 4 {
		r0, r1 := a[i*p:(i+1)*p:(i+1)*p], a[(i+1)*p:(i+2)*p:(i+2)*p]
		r2, r3 := a[(i+2)*p:(i+3)*p:(i+3)*p], a[(i+3)*p:(i+4)*p:(i+4)*p]
		var s0, s1, s2, s3, t0, t1, t2, t3 float64
		j := 0
		for ; j+2 <= p; j += 2 {
			u, v := x[j], x[j+1]
			s0 += r0[j] * u
			s1 += r1[j] * u
			s2 += r2[j] * u
			s3 += r3[j] * u
			t0 += r0[j+1] * v
			t1 += r1[j+1] * v
			t2 += r2[j+1] * v
			t3 += r3[j+1] * v
		}
		if j < p {
			u := x[j]
			s0 += r0[j] * u
			s1 += r1[j] * u
			s2 += r2[j] * u
			s3 += r3[j] * u
		}
		h[i], h[i+1], h[i+2], h[i+3] = s0+t0, s1+t1, s2+t2, s3+t3
	}
	for ; i < len(h); i++ {
		h[i] = dot4(a[i*p:(i+1)*p], x)
	}
}

// subRowsTimes sets w −= Σ_i h_i·(row i of a) for the len(h) rows of
// length p = len(w) of a, four rows at a time (one load and store of w_j
// for four multiply-adds).
func subRowsTimes(w, a []float64, p int, h []float64) {
	w = w[:p]
	i := 0
	for ; i+4 <= len(h); i += 4 {
		r0, r1 := a[i*p:(i+1)*p:(i+1)*p], a[(i+1)*p:(i+2)*p:(i+2)*p]
		r2, r3 := a[(i+2)*p:(i+3)*p:(i+3)*p], a[(i+3)*p:(i+4)*p:(i+4)*p]
		h0, h1, h2, h3 := h[i], h[i+1], h[i+2], h[i+3]
		for j := range w {
			w[j] -= (h0*r0[j] + h1*r1[j]) + (h2*r2[j] + h3*r3[j])
		}
	}
	for ; i < len(h); i++ {
		axpy4(-h[i], a[i*p:(i+1)*p], w)
	}
}

// axpy4 sets y += alpha·x (len(y) ≥ len(x)).
func axpy4(alpha float64, x, y []float64) {
	y = y[:len(x)]
	for i, v := range x {
		y[i] += alpha * v
	}
}
