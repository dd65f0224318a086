// Package net proves the global optimum for subspaces whose smaller side is
// small: deterministic nets on the sphere with a proven covering radius, the
// exhaustive search over such a net, and branch-and-bound over cells of the
// sphere.
//
// Mathematics (the derivations every bound here relies on). Let the net
// side have dimension d = min(m, n), say x ∈ S^{d−1} (the other case is
// symmetric, with G in place of H). The other side is solved exactly:
//
//	s(x)² = max over unit y of h(x, y) = λmax(H(x)),
//
// with s(x) = max_y ‖P_W(x⊗y)‖ a seminorm in x (homogeneous, and
// s(x+x') ≤ s(x) + s(x') by the triangle inequality for each y). Hence
// |s(x) − s(x')| ≤ s(x − x') ≤ ‖x − x'‖·√h*, and s(−x) = s(x), so one
// hemisphere suffices. Every λmax(H(·)) in a bound is a proven upper bound
// (subspace.MaxEigH: verified Cholesky test, rounding and loss of
// orthogonality of the stored basis accounted).
//
// The cube-face net. Every unit x has a multiple p = ±x/‖x‖_∞ on one of
// the d faces {p_k = 1, |p_j| ≤ 1} of the cube. For nonzero a, b,
// ‖a/‖a‖ − b/‖b‖‖² = (‖a − b‖² − (‖a‖ − ‖b‖)²)/(‖a‖‖b‖) ≤ ‖a − b‖²/(‖a‖‖b‖),
// and points of a face have norm ≥ 1, so the spherical distance between the
// directions of two face points is at most their Euclidean distance. On each
// face the grid of N^{d−1} cell centres −1 + (2i+1)/N has every face point
// within √(d−1)/N; the stored coordinates (2i+1−N)/N are one rounded
// division away (error ≤ u), so the covering radius of the stored net is
// ε = √(d−1)·(1/N + u), rounded upwards. Then
//
//	√h* = s(x*) ≤ s(ĝ) + ε√h*  ⇒  √h* ≤ max_g s(ĝ)/(1 − ε)
//
// over the net points g (ĝ = g/‖g‖, s(ĝ) = s(g)/‖g‖ by homogeneity).
package net

import (
	"math"

	"github.com/segre-lab/segre/internal/accurate"
)

// CoveringRadius returns the proven covering radius ε of the cube-face net
// with N points per face coordinate on S^{d−1}: every unit vector lies
// within ε of the direction of some net point (or of its negative).
func CoveringRadius(d, N int) float64 {
	if d <= 1 {
		return 0
	}
	r := accurate.AddUp(accurate.MulUp(1/float64(N), 1+4*accurate.U), accurate.U)
	return accurate.MulUp(accurate.SqrtUp(float64(d-1)), r)
}

// GridSize returns the smallest N with CoveringRadius(d, N) ≤ eps.
func GridSize(d int, eps float64) int {
	if d <= 1 {
		return 1
	}
	n := int(math.Ceil(math.Sqrt(float64(d-1)) / eps))
	if n < 1 {
		n = 1
	}
	for CoveringRadius(d, n) > eps {
		n++
	}
	return n
}

// NetSize returns the number of points d·N^(d−1) of the cube-face net, or
// -1 if it exceeds limit.
func NetSize(d, N int, limit int64) int64 {
	total := int64(d)
	for i := 0; i < d-1; i++ {
		total *= int64(N)
		if total > limit || total < 0 {
			return -1
		}
	}
	if total > limit {
		return -1
	}
	return total
}

// NetPoint writes net point idx (0 ≤ idx < NetSize) of the cube-face net
// into p (length d): face idx / N^(d−1) has coordinate 1, the other
// coordinates are (2i+1−N)/N for the base-N digits i of the remainder.
func NetPoint(p []float64, d, N int, idx int64) {
	per := int64(1)
	for i := 0; i < d-1; i++ {
		per *= int64(N)
	}
	face := int(idx / per)
	rem := idx % per
	for j := 0; j < d; j++ {
		if j == face {
			p[j] = 1
			continue
		}
		i := rem % int64(N)
		rem /= int64(N)
		p[j] = float64(2*i+1-int64(N)) / float64(N)
	}
}
