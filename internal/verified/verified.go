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

// cholPair computes rows i and i+1 of L̃ (rows < i done; i even, as
// shiftedCholesky takes the rows in pairs from 0, so the columns j < i
// come in pairs too) in place in l and
// returns their pivots before the square root, or ok = false if either
// pivot is not a positive finite number (row i's is tested first). The
// operations on each entry are the one-at-a-time form's (shiftedCholesky).
func cholPair(l []float64, n, i int) (d0, d1 float64, ok bool) {
	ri, ri1 := l[i*n:i*n+i+1], l[(i+1)*n:(i+1)*n+i+2]
	j := 0
	for ; j+1 < i; j += 2 {
		rj, rj1 := l[j*n:j*n+j], l[(j+1)*n:(j+1)*n+j+1]
		v00, v01, v10, v11 := ri[j], ri[j+1], ri1[j], ri1[j+1]
		a0, a1 := ri[:j], ri1[:j]
		b1 := rj1[:j]
		for k, b0 := range rj {
			x0, x1, y1 := a0[k], a1[k], b1[k]
			v00 -= float64(x0 * b0)
			v01 -= float64(x0 * y1)
			v10 -= float64(x1 * b0)
			v11 -= float64(x1 * y1)
		}
		ljj, lj1 := l[j*n+j], l[(j+1)*n+j+1]
		v00 /= ljj
		v10 /= ljj
		v01 -= float64(v00 * rj1[j]) // the term k = j of entry (·, j+1)
		v11 -= float64(v10 * rj1[j])
		v01 /= lj1
		v11 /= lj1
		ri[j], ri[j+1], ri1[j], ri1[j+1] = v00, v01, v10, v11
	}
	// Row i's pivot, entry (i+1, i), and row i+1's pivot up to its term k = i.
	d0, v, d1 := ri[i], ri1[i], ri1[i+1]
	a0, a1 := ri[:i], ri1[:i]
	for k, x := range a0 {
		y := a1[k]
		d0 -= float64(x * x)
		v -= float64(y * x)
		d1 -= float64(y * y)
	}
	if !(d0 > 0) || math.IsInf(d0, 0) {
		return 0, 0, false
	}
	lii := math.Sqrt(d0)
	ri[i] = lii
	v /= lii
	ri1[i] = v
	d1 -= float64(v * v)
	if !(d1 > 0) || math.IsInf(d1, 0) {
		return 0, 0, false
	}
	ri1[i+1] = math.Sqrt(d1)
	return d0, d1, true
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
// reads) and the off-diagonal absolute row sums of sign·A (each entry
// counted in its row and its column), from which the Gershgorin bound
// follows as in minEigLowerDense (its derivation holds for any order of
// the nonnegative sums). The largest absolute row sum, which only sizes the
// Cholesky test's margin, is taken as max_i(off_i + |a_ii|) in plain
// arithmetic. A non-finite entry is caught by v − v ≠ 0 (0 exactly for
// every finite v, NaN for ±Inf and NaN).
func (w *Workspace) tri(a []float64, n, stride int, sign, guess float64, stop func() bool) float64 {
	full, work := w.size(n)
	off := w.sums[:n]
	clear(off)
	for i := 0; i < n; i++ {
		row := a[i*stride : i*stride+n]
		v := float64(sign * row[i]) // sign is ±1: exact; written rounded all the same
		if !(v-v == 0) {
			return math.Inf(-1)
		}
		full[i*n+i] = v
		var si float64
		for j := i + 1; j < n; j++ {
			v := float64(sign * row[j])
			if !(v-v == 0) {
				return math.Inf(-1)
			}
			full[j*n+i] = v
			av := math.Abs(v)
			si += av
			off[j] += av
		}
		off[i] += si
	}
	var rowMax, maxR, maxT float64
	minT := math.Inf(1)
	for i := 0; i < n; i++ {
		t := full[i*n+i] - off[i]
		rowMax = math.Max(rowMax, off[i]+math.Abs(full[i*n+i]))
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
// returns the proven bound on success. a holds the matrix's lower triangle
// and diagonal (row-major n×n; the rest is not read), l is an n×n buffer
// that receives L̃ in its lower triangle.
//
// The factorisation is the row-by-row (left-looking) one, computed two
// rows and two columns at a time (cholPair) so that four independent inner
// products run side by side instead of one chain of dependent
// subtractions. Each entry still sees the same operations in the same order
// as one row and one entry at a time: L̃_ij = fl((a_ij − fl(L̃_i0 L̃_j0) − …
// − fl(L̃_i,j−1 L̃_j,j−1)) / L̃_jj), subtracting k = 0, 1, … in turn, and
// pivot i is fl(a_ii − s) − L̃_i0² − … in the same order; every product is
// rounded before its subtraction (float64 forbids fusing it). So the
// factor, the pivots, the row at which a pivot fails, and ‖L̃‖_F² (summed
// in row order: the off-diagonal squares of row i, then its pivot) are bit
// for bit those of the one-at-a-time form (TestCholeskyFormsAgree).
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
	var frob float64 // Σ L̃ᵢⱼ², evaluated in floating point in row order
	var maxL float64
	i := 0
	for ; i+1 < n; i += 2 {
		if stop != nil && i%16 == 14 && stop() {
			return 0, false
		}
		d0, d1, ok := cholPair(l, n, i)
		if !ok {
			return 0, false
		}
		for r, d := range [2]float64{d0, d1} {
			for _, v := range l[(i+r)*n : (i+r)*n+i+r] {
				frob += float64(v * v)
			}
			frob += d
		}
		maxL = math.Max(maxL, math.Max(l[i*n+i], l[(i+1)*n+i+1]))
	}
	if i < n { // the last row when n is odd
		ri := l[i*n : i*n+i+1]
		for j := 0; j < i; j++ {
			rj := l[j*n : j*n+j]
			v := ri[j]
			for k, b := range rj {
				v -= float64(ri[k] * b)
			}
			v /= l[j*n+j]
			ri[j] = v
			frob += float64(v * v)
		}
		d := ri[i]
		for _, v := range ri[:i] {
			d -= float64(v * v)
		}
		if !(d > 0) || math.IsInf(d, 0) {
			return 0, false
		}
		ri[i] = math.Sqrt(d)
		frob += d
		maxL = math.Max(maxL, ri[i])
	}
	return choleskyBound(n, s, frob, maxDiag, maxL)
}

// choleskyBound is the end of the test described on MinEigLower, once the
// factorisation of fl(A − sI) has succeeded: s − γ_{n+1}‖L̃‖_F² − δ_d − δ_u
// rounded downwards, from the float sum frob of the squares of L̃, the
// largest |Ã_ii| (maxDiag) and the largest L̃_ii (maxL). ok is false when
// the correction overflows.
func choleskyBound(n int, s, frob, maxDiag, maxL float64) (float64, bool) {
	frobUp := accurate.UpperRel(frob, n*n+n+2)
	c := accurate.MulUp(accurate.Gamma(n+1), frobUp)
	c = accurate.AddUp(c, accurate.MulUp(2*accurate.U, maxDiag))
	c = accurate.AddUp(c, float64(float64(n)*(float64(n)+maxL+1)*accurate.Tiny))
	if math.IsInf(c, 0) || math.IsNaN(c) {
		return 0, false
	}
	return accurate.Down(s - c), true
}
