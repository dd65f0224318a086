package eigen

import "math"

// The pieces of the restart-free Lanczos iterations of net (branch-and-
// bound's per-cell λmax estimates) and rankone (ALS's eigenpairs), shared
// here: the step count to the next convergence test, the top eigenvalue of
// the tridiagonal matrix by Newton's method from above, and the fixed start
// vector. Every product is rounded before it is added (float64(a*b)), so
// the estimates are the same bits on every platform; they are estimates
// only (a verified test, or a search's certified Verify, follows).

// NextCheck returns how many Lanczos steps to take before the next
// convergence test: the steps the last two residuals predict at their
// geometric rate (Lanczos converges at least that fast once the top Ritz
// value has separated), at least 1 and at most 8; 4 without a rate.
func NextCheck(k0 int, r0 float64, k1 int, r1, target float64) int {
	if k0 == 0 || !(r1 < r0) || !(r1 > 0) || !(target > 0) {
		return 4
	}
	rate := math.Log(r1/r0) / float64(k1-k0) // < 0
	need := math.Log(target/r1) / rate
	if !(need < 8) {
		return 8
	}
	return max(1, int(math.Ceil(need)))
}

// TridiagTop returns the largest eigenvalue θ of the symmetric
// tridiagonal matrix T with diagonal a and off-diagonal b
// (len(b) = len(a)−1). lo is a hint below θ (the previous Ritz value: by
// Cauchy interlacing the top Ritz value only grows with k) and gap a hint of
// how far above it θ may be; any hints give the right answer, good ones give
// it sooner.
//
// Method (derived here). For λ above every eigenvalue, λI − T is positive
// definite, so its LDLᵀ pivots u_1 = λ − a_1, u_i = λ − a_i − b_{i−1}²/u_{i−1}
// are all positive; conversely a pivot ≤ 0 means an eigenvalue ≥ λ
// (Sylvester's law of inertia). q(λ) = det(λI − T) = Π u_i has only real
// roots, so Newton's method λ ← λ − q/q′ from above the largest root
// decreases monotonically to it (q is convex and increasing there), with
// q′/q = Σ u_i′/u_i, u_1′ = 1, u_i′ = 1 + b_{i−1}² u_{i−1}′/u_{i−1}². A point
// above θ is found by stepping up from lo by growing amounts (each failed
// point, having a pivot ≤ 0, is a new lo); a Newton step that would leave the
// bracket [lo, hi] is replaced by bisection. Compared with bisection alone
// (about 50 Sturm sequences for full precision) Newton needs a handful once
// the top Ritz value has separated.
func TridiagTop(a, b []float64, lo, gap float64) float64 {
	k := len(a)
	if k == 1 {
		return a[0]
	}
	// Gershgorin interval.
	glo, ghi := TridiagGershgorin(a, b)
	scale := math.Max(math.Abs(glo), math.Abs(ghi))
	if scale == 0 {
		return 0
	}
	ghi += float64(1e-14 * scale)
	if !(lo >= glo && lo <= ghi) {
		lo = glo - float64(1e-14*scale)
	}
	pivmin := 0x1p-1000 * scale
	// pivots evaluates the pivots at λ: it reports whether all are
	// positive, and then q′/q.
	pivots := func(lam float64) (above bool, dlog float64) {
		u := lam - a[0]
		du := 1.0
		if !(u > pivmin) {
			return false, 0
		}
		inv := 1 / u
		dlog = inv
		for i := 1; i < k; i++ {
			r := float64(float64(b[i-1]*b[i-1]) * inv)
			du = 1 + float64(float64(r*du)*inv)
			u = lam - a[i] - r
			if !(u > pivmin) {
				return false, 0
			}
			inv = 1 / u
			dlog += float64(du * inv)
		}
		return true, dlog
	}
	// An upper point: step up from lo by growing amounts, from about the
	// distance res²/scale that a Ritz value with residual res is expected
	// to lie below the eigenvalue (the gap taken as large as the scale).
	hi := ghi
	step := math.Max(math.Min(float64(gap*gap)/scale, ghi-lo), float64(1e-15*scale))
	if math.IsNaN(step) || math.IsInf(step, 0) {
		step = ghi - lo
	}
	lam := math.Min(lo+step, ghi)
	var dlog float64
	for it := 0; ; it++ {
		above, dl := pivots(lam)
		if above {
			hi, dlog = lam, dl
			break
		}
		lo = lam
		if it >= 60 || lam >= ghi {
			return lo // rounding defeated the test: the best lower point
		}
		step = float64(step * 16)
		lam = math.Min(lo+step, ghi)
	}
	// Newton from above, safeguarded by the bracket [lo, hi].
	for it := 0; it < 100; it++ {
		next := hi - 1/dlog
		if !(next < hi) || hi-next <= 4e-16*math.Abs(hi) || hi-lo <= 4e-16*scale {
			break // converged: the step is lost in rounding
		}
		if !(next > lo) {
			next = lo + float64((hi-lo)/2)
		}
		above, dl := pivots(next)
		if above {
			hi, dlog = next, dl
		} else {
			lo = next
		}
	}
	return hi
}

// FillStart writes a fixed unit-free start vector (a deterministic
// pseudo-random sequence) into x.
func FillStart(x []float64) {
	z := uint64(0x5e97e) + uint64(len(x))
	for i := range x {
		z += 0x9e3779b97f4a7c15
		t := (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9
		t = (t ^ (t >> 27)) * 0x94d049bb133111eb
		t ^= t >> 31
		x[i] = float64(float64(t>>11)/(1<<53)) - 0.5
	}
}
