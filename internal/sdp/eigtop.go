package sdp

import "math"

// maxEigSym returns the largest eigenvalue of the symmetric n×n matrix a
// (full storage, row-major; overwritten), or false if an entry of a is not
// finite. work is scratch of at least 4n values (allocated if shorter).
//
// Method (Golub, Van Loan, Matrix Computations, 4th ed., 2013): a is
// scaled by the power of two that brings its largest entry into [1, 2)
// (exact), reduced to a symmetric tridiagonal T = QᵀaQ by n−2 Householder
// reflections (Algorithm 8.3.1: for column j, the reflector H = I − τvvᵀ
// with Hx = βe₁ of x = a[j+1:, j], then a₂₂ ← Ha₂₂H = a₂₂ − vwᵀ − wvᵀ with
// p = τa₂₂v and w = p − (τ/2)(pᵀv)v), and T's largest eigenvalue is found
// by bisection on Sturm counts (§8.4.1): the number of eigenvalues of T
// below x is the number of negative pivots q_i = (d_i − x) − e_{i−1}²/q_{i−1}
// of the LDLᵀ factorisation of T − xI (Sylvester's law of inertia); a pivot
// smaller in magnitude than pivmin is replaced by −pivmin, as LAPACK's
// dstebz does, which perturbs T by at most pivmin. Both steps are
// backward stable, so the result is the largest eigenvalue of a matrix
// within a modest multiple of machine precision times ‖a‖ of a. The upper
// end of the final bisection interval is returned, so the value errs
// towards larger eigenvalues (shorter steps).
func maxEigSym(n int, a, work []float64) (float64, bool) {
	var big float64
	for _, v := range a[:n*n] {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return 0, false
		}
		big = math.Max(big, math.Abs(v))
	}
	if big == 0 {
		return 0, true
	}
	_, ex := math.Frexp(big) // big = f·2^ex, f ∈ [1/2, 1)
	for i := range a[:n*n] {
		a[i] = math.Ldexp(a[i], 1-ex)
	}
	if n == 1 {
		return math.Ldexp(a[0], ex-1), true
	}
	if len(work) < 4*n {
		work = make([]float64, 4*n)
	}
	d, e, v, p := work[:n], work[n:2*n], work[2*n:3*n], work[3*n:4*n]
	for j := 0; j < n-2; j++ {
		m := n - j - 1
		x := a[j*n+j+1 : j*n+n] // column j below the diagonal, read as row j
		d[j] = a[j*n+j]
		alpha := x[0]
		var xs float64
		for _, t := range x[1:] {
			xs += t * t
		}
		if xs == 0 {
			e[j] = alpha // already tridiagonal in this column: H = I
			continue
		}
		beta := -math.Copysign(math.Sqrt(alpha*alpha+xs), alpha)
		tau := (beta - alpha) / beta
		sc := 1 / (alpha - beta)
		e[j] = beta
		v[0] = 1
		for i := 1; i < m; i++ {
			v[i] = x[i] * sc
		}
		var pv float64
		for r := 0; r < m; r++ {
			row := a[(j+1+r)*n+j+1 : (j+2+r)*n]
			var s float64
			for c, t := range row {
				s += t * v[c]
			}
			p[r] = tau * s
			pv += p[r] * v[r]
		}
		h := tau * pv / 2
		for r := 0; r < m; r++ {
			p[r] -= h * v[r]
		}
		for r := 0; r < m; r++ {
			row := a[(j+1+r)*n+j+1 : (j+2+r)*n]
			vr, wr := v[r], p[r]
			for c := range row {
				row[c] -= vr*p[c] + wr*v[c]
			}
		}
	}
	d[n-2], d[n-1], e[n-2] = a[(n-2)*n+n-2], a[(n-1)*n+n-1], a[(n-2)*n+n-1]
	e = e[:n-1]

	// Gershgorin interval of T, and the pivot threshold.
	lo, hi := math.Inf(1), math.Inf(-1)
	var e2max float64
	for i := 0; i < n; i++ {
		var r float64
		if i > 0 {
			r += math.Abs(e[i-1])
		}
		if i < n-1 {
			r += math.Abs(e[i])
			e2max = math.Max(e2max, e[i]*e[i])
		}
		lo, hi = math.Min(lo, d[i]-r), math.Max(hi, d[i]+r)
	}
	const eps, tiny = 0x1p-52, 0x1p-1022
	pivmin := tiny * math.Max(1, e2max)
	slack := 2*eps*math.Max(math.Abs(lo), math.Abs(hi)) + pivmin
	lo, hi = lo-slack, hi+slack
	// below returns the number of eigenvalues of T below x.
	below := func(x float64) int {
		cnt, prev := 0, 1.0
		for i := 0; i < n; i++ {
			q := d[i] - x
			if i > 0 {
				q -= e[i-1] * e[i-1] / prev
			}
			if math.Abs(q) < pivmin {
				q = -pivmin
			}
			prev = q
			if q < 0 {
				cnt++
			}
		}
		return cnt
	}
	// Invariant: below(lo) < n ≤ below(hi), i.e. lo ≤ λmax < hi.
	for it := 0; it < 200 && hi-lo > 2*eps*math.Max(math.Abs(lo), math.Abs(hi))+pivmin; it++ {
		mid := lo + (hi-lo)/2
		if below(mid) == n {
			hi = mid
		} else {
			lo = mid
		}
	}
	return math.Ldexp(hi, ex-1), true
}
