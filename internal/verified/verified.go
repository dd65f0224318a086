// Package verified proves eigenvalue bounds of symmetric floating-point
// matrices: the matrix as stored is exact data, and every returned bound holds
// for its exact eigenvalues, rounding errors of the test included.
package verified

import (
	"math"

	"gonum.org/v1/gonum/mat"

	"github.com/segre-lab/segre/internal/accurate"
)

// MinEigLower returns a proven lower bound on λmin(A) for the symmetric
// matrix A exactly as stored. guess is a hint for λmin (for example from
// gonum's EigenSym); a poor guess gives a weaker but still valid bound. The
// bound is -Inf only if A has a non-finite entry.
//
// Method (the floating-point Cholesky test of Rump, "Verification of positive
// definiteness", BIT 46 (2006) 433–452, in a form derived here):
// choose a float s just below guess and form Ã = fl(A − sI); only the diagonal
// is rounded, each entry by at most u·|Ã_ii|/(1−u) ≤ 2u|Ã_ii|, so
// A − sI ⪰ Ã − δ_d·I with δ_d = 2u·max|Ã_ii|. If the plain floating-point
// Cholesky factorisation of Ã runs to completion with positive pivots, its
// factor L̃ satisfies L̃L̃ᵀ = Ã + ΔA with |ΔA| ≤ γ_{n+1}|L̃||L̃ᵀ| (Higham,
// "Accuracy and Stability of Numerical Algorithms", 2002, Theorem 10.3; the
// bound holds for any order of the inner sums and with fused multiply-adds).
// Hence ‖ΔA‖₂ ≤ γ_{n+1}‖ |L̃| ‖₂² ≤ γ_{n+1}‖L̃‖_F², and Ã ⪰ −ΔA gives
//
//	λmin(A) ≥ s − γ_{n+1}‖L̃‖_F² − δ_d − δ_u,
//
// where δ_u covers underflow: each underflowing product or quotient errs by
// at most 2^-1075, which changes an entry of ΔA by at most (n + max L̃_ii)·2^-1074,
// and we add n·(n + max L̃_ii + 1)·accurate.Tiny. The right-hand side is
// evaluated with upward-rounded operations. If the factorisation breaks down
// the shift is lowered and the test retried; after repeated failure the
// Gershgorin bound min_i(a_ii − Σ_{j≠i}|a_ij|), rounded downwards, is returned.
func MinEigLower(a mat.Symmetric, guess float64) float64 {
	return MinEigLowerStop(a, guess, nil)
}

// MinEigLowerStop is MinEigLower that gives up the Cholesky test when stop
// (checked every 16 rows) reports true, returning the Gershgorin bound:
// still proven, possibly loose.
func MinEigLowerStop(a mat.Symmetric, guess float64, stop func() bool) float64 {
	n := a.SymmetricDim()
	if n == 0 {
		return math.Inf(1)
	}
	if sd, ok := a.(*mat.SymDense); ok {
		// The upper triangle, as MinEigLowerTri (the same bound bit for bit).
		raw := sd.RawSymmetric()
		var ws Workspace
		return ws.tri(raw.Data, n, raw.Stride, 1, guess, stop)
	}
	full := make([]float64, n*n)
	for i := 0; i < n; i++ {
		for j := 0; j < n; j++ {
			full[i*n+j] = a.At(i, j)
		}
	}
	return minEigLowerDense(full, n, guess, stop, nil)
}

// minEigLowerDense is MinEigLower for a full symmetric row-major matrix,
// which it may not modify. If stop is non-nil and reports true, the test is
// abandoned and the Gershgorin bound (valid, maybe loose) returned.
func minEigLowerDense(full []float64, n int, guess float64, stop func() bool, work []float64) float64 {
	// One pass: the finiteness check, the largest absolute row sum (for
	// the margin) and the Gershgorin bound min_i(a_ii − Σ_{j≠i}|a_ij|),
	// proven with one correction for the whole matrix (derived here): the
	// float off-diagonal sum r̃_i of n − 1 nonnegative terms has
	// |r̃_i − r_i| ≤ γ_{n−2}r_i ≤ 2γ_n r̃_i (r_i ≤ r̃_i/(1 − γ), γ ≤ 1/2),
	// and t̃_i = fl(a_ii − r̃_i) errs by at most u|t̃_i| (exact when
	// subnormal; sums of nonnegative subnormals are exact too), so
	// a_ii − r_i ≥ min_j t̃_j − u·max_j|t̃_j| − 2γ_n·max_j r̃_j, and
	// (n + 1)·Tiny more covers any underflow, as UpperRel does.
	var rowMax, maxR, maxT float64
	minT := math.Inf(1)
	for i := 0; i < n; i++ {
		var r, off float64
		for j, v := range full[i*n : (i+1)*n] {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return math.Inf(-1)
			}
			av := math.Abs(v)
			r += av
			if j != i {
				off += av
			}
		}
		rowMax = math.Max(rowMax, r)
		t := full[i*n+i] - off
		minT, maxT, maxR = math.Min(minT, t), math.Max(maxT, math.Abs(t)), math.Max(maxR, off)
	}
	return minEigLowerFrom(full, n, guess, stop, work, rowMax, gershgorinFrom(n, minT, maxT, maxR))
}

// gershgorinFrom is the proven Gershgorin bound from the float row data
// (derivation on minEigLowerDense): min_i t̃_i − u·max|t̃_i| − 2γ_n·max r̃_i
// − (n + 1)·Tiny, rounded down.
func gershgorinFrom(n int, minT, maxT, maxR float64) float64 {
	corr := accurate.AddUp(accurate.MulUp(accurate.U, maxT), accurate.MulUp(2*accurate.Gamma(n), maxR))
	corr = accurate.AddUp(corr, float64(float64(n+1)*accurate.Tiny))
	return accurate.Down(minT - corr)
}

// minEigLowerFrom is the rest of minEigLowerDense once the matrix is known
// finite, with its largest absolute row sum (which only sizes the shift)
// and its proven Gershgorin bound. It reads only the lower triangle and the
// diagonal of full.
func minEigLowerFrom(full []float64, n int, guess float64, stop func() bool, work []float64, rowMax, gersh float64) float64 {
	if math.IsNaN(guess) || math.IsInf(guess, 0) {
		guess = gersh
	}
	if rowMax == 0 {
		return 0 // the zero matrix: all eigenvalues are exactly 0
	}
	margin := float64(4*float64(n+1)*accurate.U*rowMax) + 0x1p-1000
	if len(work) < n*n {
		work = make([]float64, n*n)
	}
	work = work[:n*n]
	best := gersh
	for try := 0; try < 12; try++ {
		s := guess - margin
		if s <= best {
			break // the Gershgorin bound is already at least as good
		}
		lb, ok := shiftedCholesky(full, work, n, s, stop)
		if ok {
			if lb > best {
				best = lb
			}
			break
		}
		if stop != nil && stop() {
			break
		}
		margin *= 16
	}
	return best
}

// Workspace holds the buffers of MaxEigUpperTri and MinEigLowerTri (two
// n×n arrays, grown on first use), for callers that test many matrices
// (branch-and-bound's cells). The zero value is ready; not safe for
// concurrent use.
type Workspace struct{ full, work, sums []float64 }

func (w *Workspace) size(n int) ([]float64, []float64) {
	if len(w.full) < n*n {
		w.full, w.work, w.sums = make([]float64, n*n), make([]float64, n*n), make([]float64, 2*n)
	}
	return w.full[:n*n], w.work[:n*n]
}

// tri runs the test on sign·A for A the upper triangle of a: one pass over
// the triangle writes the lower triangle of full (all the Cholesky test
// reads) and the row sums of |sign·A| (each entry counted in its row and
// its column), from which the Gershgorin bound follows as in
// minEigLowerDense (any order of the nonnegative sums: the same bound).
func (w *Workspace) tri(a []float64, n, stride int, sign, guess float64, stop func() bool) float64 {
	full, work := w.size(n)
	r, off := w.sums[:n], w.sums[n:2*n]
	clear(r)
	clear(off)
	for i := 0; i < n; i++ {
		row := a[i*stride : i*stride+n]
		for j := i; j < n; j++ {
			v := sign * row[j]
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return math.Inf(-1)
			}
			full[j*n+i] = v
			av := math.Abs(v)
			r[i] += av
			if j != i {
				r[j] += av
				off[i] += av
				off[j] += av
			}
		}
	}
	var rowMax, maxR, maxT float64
	minT := math.Inf(1)
	for i := 0; i < n; i++ {
		t := full[i*n+i] - off[i]
		rowMax = math.Max(rowMax, r[i])
		minT, maxT, maxR = math.Min(minT, t), math.Max(maxT, math.Abs(t)), math.Max(maxR, off[i])
	}
	return minEigLowerFrom(full, n, guess, stop, work, rowMax, gershgorinFrom(n, minT, maxT, maxR))
}

// MaxEigUpperTri is MaxEigUpper for the symmetric n×n matrix given by the
// upper triangle (j ≥ i) of the row-major a, with the caller's workspace:
// the same operations in the same order as MaxEigUpper on a *mat.SymDense
// (both go through the same one-pass routine), so the same bound bit for
// bit.
func MaxEigUpperTri(a []float64, n int, guess float64, ws *Workspace) float64 {
	if n == 0 {
		return math.Inf(-1)
	}
	return -ws.tri(a, n, n, -1, -guess, nil)
}

// MinEigLowerTri is MinEigLower for the upper triangle of a, as
// MaxEigUpperTri.
func MinEigLowerTri(a []float64, n int, guess float64, ws *Workspace) float64 {
	if n == 0 {
		return math.Inf(1)
	}
	return ws.tri(a, n, n, 1, guess, nil)
}

// MaxEigUpper returns a proven upper bound on λmax(A), by MinEigLower(−A).
func MaxEigUpper(a mat.Symmetric, guess float64) float64 {
	return MaxEigUpperStop(a, guess, nil)
}

// MaxEigUpperStop is MaxEigUpper that gives up the Cholesky test as soon as
// stop (checked every 16 rows of the factorisation) reports true, returning
// the Gershgorin bound instead: still proven, possibly loose. Long tests
// (order in the thousands) use it to honour a deadline.
func MaxEigUpperStop(a mat.Symmetric, guess float64, stop func() bool) float64 {
	if sd, ok := a.(*mat.SymDense); ok {
		n := sd.SymmetricDim()
		if n == 0 {
			return math.Inf(-1)
		}
		// The upper triangle, as MaxEigUpperTri (the same bound bit for bit).
		raw := sd.RawSymmetric()
		var ws Workspace
		return -ws.tri(raw.Data, n, raw.Stride, -1, -guess, stop)
	}
	return -MinEigLower(negated{a}, -guess)
}

type negated struct{ mat.Symmetric }

func (m negated) At(i, j int) float64 { return -m.Symmetric.At(i, j) }
func (m negated) T() mat.Matrix       { return m }

// shiftedCholesky runs the test described on MinEigLower for shift s and
// returns the proven bound on success.
func shiftedCholesky(a, l []float64, n int, s float64, stop func() bool) (float64, bool) {
	var maxDiag float64
	for i := 0; i < n; i++ {
		for j := 0; j < i; j++ {
			l[i*n+j] = a[i*n+j]
		}
		d := a[i*n+i] - s
		l[i*n+i] = d
		maxDiag = math.Max(maxDiag, math.Abs(d))
	}
	var frob float64 // Σ L̃ᵢⱼ², evaluated in floating point
	var maxL float64
	for i := 0; i < n; i++ {
		if stop != nil && i%16 == 15 && stop() {
			return 0, false
		}
		ri := l[i*n : i*n+i+1]
		for j := 0; j < i; j++ {
			rj := l[j*n : j*n+j]
			v := ri[j]
			for k := range rj {
				v -= float64(ri[k] * rj[k])
			}
			v /= l[j*n+j]
			ri[j] = v
			frob += float64(v * v)
		}
		d := ri[i]
		for k := 0; k < i; k++ {
			d -= float64(ri[k] * ri[k])
		}
		if !(d > 0) || math.IsInf(d, 0) {
			return 0, false
		}
		ri[i] = math.Sqrt(d)
		frob += d
		maxL = math.Max(maxL, ri[i])
	}
	frobUp := accurate.UpperRel(frob, n*n+n+2)
	c := accurate.MulUp(accurate.Gamma(n+1), frobUp)
	c = accurate.AddUp(c, accurate.MulUp(2*accurate.U, maxDiag))
	c = accurate.AddUp(c, float64(float64(n)*(float64(n)+maxL+1)*accurate.Tiny))
	if math.IsInf(c, 0) || math.IsNaN(c) {
		return 0, false
	}
	return accurate.Down(s - c), true
}
