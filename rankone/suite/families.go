// Package suite holds instance families of the nearest-rank-one problem with
// what is known of their optima. It is the one home of test and benchmark
// instances: the conformance suite (rankone/searchtest), the tests and the
// benchmarks all draw from it, and users can benchmark their own Searchers on
// it.
//
// Every family is deterministic given its size and seed. Optimum is d*, the
// distance from W to the nearest unit rank-one matrix, for the exact basis
// the generator describes (closed form or reference computation named in
// each doc comment); NaN when unknown.
package suite

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"

	"github.com/segre-lab/segre/subspace"
)

// Instance is one subspace with what is known about its optimum.
type Instance struct {
	Family string
	Name   string
	Basis  subspace.Basis
	// Optimum is d* (NaN if unknown).
	Optimum float64
	// X0, Y0 are a known optimal point (unit), or nil.
	X0, Y0 []float64
	// Bound is a known upper bound on d* when Optimum is unknown (0 if none).
	Bound float64
	// Points is the number of rank-one points of W when known (0 if not).
	Points int
	// Degree is the generic number of complex rank-one points (0 if not
	// applicable).
	Degree int
}

func newRand(seed uint64, family string) *rand.Rand {
	var h uint64 = 1469598103934665603
	for i := 0; i < len(family); i++ {
		h = (h ^ uint64(family[i])) * 1099511628211
	}
	return rand.New(rand.NewPCG(seed, h))
}

func gaussian(rng *rand.Rand, n int) []float64 {
	v := make([]float64, n)
	for i := range v {
		v[i] = rng.NormFloat64()
	}
	return v
}

func unit(v []float64) []float64 {
	var s float64
	for _, x := range v {
		s += x * x
	}
	s = math.Sqrt(s)
	out := make([]float64, len(v))
	for i := range v {
		out[i] = v[i] / s
	}
	return out
}

// OneMatrix is the span of one Gaussian m×n matrix B. By Eckart–Young
// (Eckart & Young, Psychometrika 1, 1936), h* = σ₁²/‖B‖_F², so
// d* = √(1 − σ₁²/‖B‖_F²); σ₁ and ‖B‖_F come from gonum's SVD (reference
// library), d* is evaluated as √(Σ_{i≥2}σ_i²)/‖B‖_F to avoid cancellation.
func OneMatrix(m, n int, seed uint64) Instance {
	rng := newRand(seed, "one-matrix")
	d := gaussian(rng, m*n)
	var svd mat.SVD
	svd.Factorize(mat.NewDense(m, n, append([]float64(nil), d...)), mat.SVDThin)
	s := svd.Values(nil)
	var tail, all float64
	for i, v := range s {
		all += v * v
		if i > 0 {
			tail += v * v
		}
	}
	var u, v mat.Dense
	svd.UTo(&u)
	svd.VTo(&v)
	x0, y0 := make([]float64, m), make([]float64, n)
	for i := range x0 {
		x0[i] = u.At(i, 0)
	}
	for j := range y0 {
		y0[j] = v.At(j, 0)
	}
	return Instance{Family: "one-matrix", Name: fmt.Sprintf("one-matrix/%dx%d/s%d", m, n, seed),
		Basis: subspace.Basis{Count: 1, Rows: m, Cols: n, Data: d}, Optimum: math.Sqrt(tail / all), X0: x0, Y0: y0}
}

// Antisymmetric is the subspace of antisymmetric n×n matrices (n ≥ 2),
// spanned by E_ij − E_ji. Derived: P(xyᵀ) = (xyᵀ − yxᵀ)/2, so for unit x, y
// h = (1 − (x·y)²)/2 ≤ 1/2 with equality iff x ⊥ y; d* = √(1/2).
func Antisymmetric(n int) Instance {
	var d []float64
	r := 0
	for i := 0; i < n; i++ {
		for j := i + 1; j < n; j++ {
			b := make([]float64, n*n)
			b[i*n+j], b[j*n+i] = 1, -1
			d = append(d, b...)
			r++
		}
	}
	return Instance{Family: "antisymmetric", Name: fmt.Sprintf("antisymmetric/%d", n),
		Basis: subspace.Basis{Count: r, Rows: n, Cols: n, Data: d}, Optimum: math.Sqrt(0.5)}
}

// Symmetric is the subspace of symmetric n×n matrices, spanned by
// E_ij + E_ji (i ≤ j). Derived: x xᵀ ∈ W, so d* = 0.
func Symmetric(n int) Instance {
	var d []float64
	r := 0
	for i := 0; i < n; i++ {
		for j := i; j < n; j++ {
			b := make([]float64, n*n)
			b[i*n+j], b[j*n+i] = 1, 1
			d = append(d, b...)
			r++
		}
	}
	x0 := make([]float64, n)
	x0[0] = 1
	return Instance{Family: "symmetric", Name: fmt.Sprintf("symmetric/%d", n),
		Basis: subspace.Basis{Count: r, Rows: n, Cols: n, Data: d}, Optimum: 0, X0: x0, Y0: x0}
}

// Full is all of R^{m×n}, spanned by mn Gaussian matrices (generically a
// basis). Derived: every matrix is in W, d* = 0.
func Full(m, n int, seed uint64) Instance {
	rng := newRand(seed, "full")
	return Instance{Family: "full", Name: fmt.Sprintf("full/%dx%d/s%d", m, n, seed),
		Basis: subspace.Basis{Count: m * n, Rows: m, Cols: n, Data: gaussian(rng, m*m*n*n)}, Optimum: 0}
}

// Hyperplane is {A : ⟨C, A⟩ = 0} for a Gaussian C (mn ≥ 2), spanned by mn−1
// Gaussian matrices with their C-component removed. Derived: x yᵀ ∈ W iff
// xᵀCy = 0, which has unit solutions (take any x and y ⊥ Cᵀx when n ≥ 2,
// or x ⊥ Cy when m ≥ 2), so d* = 0.
func Hyperplane(m, n int, seed uint64) Instance {
	rng := newRand(seed, "hyperplane")
	L := m * n
	c := unit(gaussian(rng, L))
	var d []float64
	for t := 0; t < L-1; t++ {
		b := gaussian(rng, L)
		var p float64
		for l := range b {
			p += b[l] * c[l]
		}
		for l := range b {
			b[l] -= p * c[l]
		}
		d = append(d, b...)
	}
	return Instance{Family: "hyperplane", Name: fmt.Sprintf("hyperplane/%dx%d/s%d", m, n, seed),
		Basis: subspace.Basis{Count: L - 1, Rows: m, Cols: n, Data: d}, Optimum: 0}
}

// HurwitzRadonMatrices returns the orthogonal n×n matrices A_0 = I, A_1, …
// (n ∈ {2, 4}) of the complex numbers and the quaternions acting on
// themselves by left multiplication: A_sᵀA_t + A_tᵀA_s = 2δ_st·I and
// A_sA_tᵀ + A_tA_sᵀ = 2δ_st·I.
func HurwitzRadonMatrices(n int) [][]float64 {
	switch n {
	case 2:
		return [][]float64{{1, 0, 0, 1}, {0, -1, 1, 0}}
	case 4:
		return [][]float64{
			{1, 0, 0, 0, 0, 1, 0, 0, 0, 0, 1, 0, 0, 0, 0, 1},
			// i·(a+bi+cj+dk) = −b + ai − dj + ck
			{0, -1, 0, 0, 1, 0, 0, 0, 0, 0, 0, -1, 0, 0, 1, 0},
			// j·(a+bi+cj+dk) = −c + di + aj − bk
			{0, 0, -1, 0, 0, 0, 0, 1, 1, 0, 0, 0, 0, -1, 0, 0},
			// k·(a+bi+cj+dk) = −d − ci + bj + ak
			{0, 0, 0, -1, 0, 0, -1, 0, 0, 1, 0, 0, 1, 0, 0, 0},
		}
	}
	panic("suite: Hurwitz–Radon families are provided for n = 2 and 4")
}

// HurwitzRadon is the span of the first p matrices of HurwitzRadonMatrices(n).
// Derived: with Q_t = A_t/√n orthonormal, h = (1/n)Σ_{t<p}(yᵀA_tᵀx)²; the
// vectors A_tᵀx are orthonormal for unit x, so h ≤ ‖y‖²/n = 1/n, with
// equality for y = A_0ᵀx = x. Hence h* = 1/n and d* = √(1 − 1/n) for every
// p ≥ 1; when p = n, h ≡ 1/n is constant.
func HurwitzRadon(n, p int) Instance {
	a := HurwitzRadonMatrices(n)[:p]
	var d []float64
	for _, m := range a {
		d = append(d, m...)
	}
	x0 := make([]float64, n)
	x0[0] = 1
	return Instance{Family: "hurwitz-radon", Name: fmt.Sprintf("hurwitz-radon/%d/p%d", n, p),
		Basis: subspace.Basis{Count: p, Rows: n, Cols: n, Data: d}, Optimum: math.Sqrt(1 - 1/float64(n)), X0: x0, Y0: x0}
}

// Planted is the span of x₀y₀ᵀ and k−1 Gaussian m×n matrices, given through a
// scrambled basis: k Gaussian combinations of those generators. Derived:
// x₀y₀ᵀ ∈ W, so d* = 0 at (x₀, y₀).
func Planted(m, n, k int, seed uint64) Instance { return planted(m, n, k, 0, seed) }

// planted builds Planted, adding σE (E Gaussian, unit Frobenius norm, from
// its own stream) to the planted generator when σ > 0.
func planted(m, n, k int, sigma float64, seed uint64) Instance {
	rng := newRand(seed, "planted")
	L := m * n
	x0, y0 := unit(gaussian(rng, m)), unit(gaussian(rng, n))
	gen := make([]float64, k*L)
	for i := 0; i < m; i++ {
		for j := 0; j < n; j++ {
			gen[i*n+j] = x0[i] * y0[j]
		}
	}
	if sigma > 0 {
		e := unit(gaussian(newRand(seed, "planted-noise"), L))
		for l := range e {
			gen[l] += sigma * e[l]
		}
	}
	copy(gen[L:], gaussian(rng, (k-1)*L))
	d := make([]float64, k*L)
	for t := 0; t < k; t++ {
		mix := gaussian(rng, k)
		for s := 0; s < k; s++ {
			for l := 0; l < L; l++ {
				d[t*L+l] += mix[s] * gen[s*L+l]
			}
		}
	}
	return Instance{Family: "planted", Name: fmt.Sprintf("planted/%dx%d/k%d/s%d", m, n, k, seed),
		Basis: subspace.Basis{Count: k, Rows: m, Cols: n, Data: d}, Optimum: 0, X0: x0, Y0: y0}
}

// Random is the span of k Gaussian m×n matrices; nothing is known of d*.
func Random(m, n, k int, seed uint64) Instance {
	rng := newRand(seed, "random")
	return Instance{Family: "random", Name: fmt.Sprintf("random/%dx%d/k%d/s%d", m, n, k, seed),
		Basis: subspace.Basis{Count: k, Rows: m, Cols: n, Data: gaussian(rng, k*m*n)}, Optimum: math.NaN()}
}

// Haar returns an n×n orthogonal matrix drawn from the Haar measure (QR of a
// Gaussian matrix with the signs of R's diagonal fixed; Mezzadri, Notices AMS
// 54, 2007), row-major.
func Haar(rng *rand.Rand, n int) []float64 {
	g := mat.NewDense(n, n, gaussian(rng, n*n))
	var qr mat.QR
	qr.Factorize(g)
	var q, r mat.Dense
	qr.QTo(&q)
	qr.RTo(&r)
	out := make([]float64, n*n)
	for j := 0; j < n; j++ {
		s := 1.0
		if r.At(j, j) < 0 {
			s = -1
		}
		for i := 0; i < n; i++ {
			out[i*n+j] = s * q.At(i, j)
		}
	}
	return out
}

// Rotated returns the instance with every matrix B replaced by U·B·Vᵀ for
// Haar-random orthogonal U (m×m) and V (n×n). Derived: x yᵀ ↦ (Ux)(Vy)ᵀ is
// an isometry of R^{m×n} mapping rank-one matrices onto rank-one matrices
// and W onto the new span, so d* is unchanged and (Ux₀, Vy₀) is optimal.
func Rotated(in Instance, seed uint64) Instance {
	rng := newRand(seed, "rotate")
	b := in.Basis
	m, n := b.Rows, b.Cols
	u, v := Haar(rng, m), Haar(rng, n)
	um, vm := mat.NewDense(m, m, u), mat.NewDense(n, n, v)
	d := make([]float64, len(b.Data))
	L := m * n
	for t := 0; t < b.Count; t++ {
		bt := mat.NewDense(m, n, append([]float64(nil), b.Data[t*L:(t+1)*L]...))
		var tmp, out mat.Dense
		tmp.Mul(um, bt)
		out.Mul(&tmp, vm.T())
		copy(d[t*L:(t+1)*L], out.RawMatrix().Data)
	}
	out := in
	out.Name = in.Name + "/rot" + fmt.Sprint(seed)
	out.Basis = subspace.Basis{Count: b.Count, Rows: m, Cols: n, Data: d}
	if in.X0 != nil {
		x, y := mat.NewVecDense(m, nil), mat.NewVecDense(n, nil)
		x.MulVec(um, mat.NewVecDense(m, in.X0))
		y.MulVec(vm, mat.NewVecDense(n, in.Y0))
		out.X0, out.Y0 = x.RawVector().Data, y.RawVector().Data
	}
	return out
}

// ClosedForms returns the instances with closed-form optima: one matrix,
// antisymmetric, symmetric, full space, hyperplane, Hurwitz–Radon spans and
// planted points, square and rectangular. With short set it returns a
// smaller selection.
func ClosedForms(short bool) []Instance {
	out := []Instance{
		OneMatrix(3, 5, 1), OneMatrix(6, 4, 2),
		Antisymmetric(3), Antisymmetric(5),
		Symmetric(4),
		Full(2, 3, 1),
		Hyperplane(3, 4, 1),
		HurwitzRadon(2, 2), HurwitzRadon(4, 2), HurwitzRadon(4, 4),
		Planted(4, 6, 5, 1), Planted(7, 5, 6, 2),
	}
	if !short {
		out = append(out,
			OneMatrix(12, 9, 3), Antisymmetric(8), Symmetric(7), Hyperplane(5, 2, 2),
			HurwitzRadon(4, 3), Planted(16, 16, 16, 3), Planted(10, 20, 15, 4))
	}
	return out
}

// NormedAlgebraComplement is the orthogonal complement in R^{n×n} (n ∈ {2, 4})
// of the span of the Hurwitz–Radon matrices of HurwitzRadonMatrices(n) (the
// left multiplications of the complex numbers or the quaternions), spanned by
// n² − n Gaussian matrices with their components in that span removed.
// Derived: with Q_t = A_t/√n an orthonormal basis of the removed span and
// {A_tᵀx} orthonormal for unit x, Σ_t (xᵀQ_t y)² = ‖y‖²/n = 1/n, so
// h(x, y) = 1 − 1/n for all unit x, y: d* = 1/√n, and W contains no rank-one
// matrix although dim W = n² − n (for n = 4: h* = 3/4, d* = 1/2).
func NormedAlgebraComplement(n int, seed uint64) Instance {
	rng := newRand(seed, "normed-algebra-complement")
	hr := HurwitzRadonMatrices(n)
	L := n * n
	var d []float64
	for t := 0; t < L-n; t++ {
		b := gaussian(rng, L)
		for _, a := range hr {
			var p float64
			for l := range b {
				p += b[l] * a[l]
			}
			for l := range b {
				b[l] -= p * a[l] / float64(n)
			}
		}
		d = append(d, b...)
	}
	// h is constant, so every unit point is optimal; X0 = Y0 = e₁.
	e1 := make([]float64, n)
	e1[0] = 1
	return Instance{Family: "normed-algebra-complement", Name: fmt.Sprintf("normed-algebra-complement/%d/s%d", n, seed),
		Basis: subspace.Basis{Count: L - n, Rows: n, Cols: n, Data: d}, Optimum: 1 / math.Sqrt(float64(n)), X0: e1, Y0: append([]float64(nil), e1...)}
}

// PlantedNoisy is Planted with the planted matrix x₀y₀ᵀ replaced by
// x₀y₀ᵀ + σE (E Gaussian with unit Frobenius norm) before scrambling.
// Known (derived): d* ≤ dist(x₀y₀ᵀ, W) ≤ σ, since x₀y₀ᵀ + σE ∈ W; Bound
// holds σ and Optimum is NaN (unknown) for σ > 0.
func PlantedNoisy(m, n, k int, sigma float64, seed uint64) Instance {
	if sigma == 0 {
		return Planted(m, n, k, seed)
	}
	in := planted(m, n, k, sigma, seed)
	in.Family = "planted-noisy"
	in.Name = fmt.Sprintf("planted-noisy/%dx%d/k%d/σ%g/s%d", m, n, k, sigma, seed)
	in.Optimum = math.NaN()
	in.Bound = sigma
	return in
}

// RankOneSpan is the span of r generic rank-one matrices a_i b_iᵀ (Gaussian
// factors), scrambled. Known (derived): d* = 0 at each (a_i, b_i); for
// r ≤ min(m, n) these are all the rank-one points (Σc_i a_ib_iᵀ has rank
// #{c_i ≠ 0} when A, B have full column rank), so Points = r; beyond
// min(m, n) there may be more.
func RankOneSpan(m, n, r int, seed uint64) Instance {
	rng := newRand(seed, "rank-one-span")
	L := m * n
	gen := make([]float64, r*L)
	var x0, y0 []float64
	for s := 0; s < r; s++ {
		a, b := unit(gaussian(rng, m)), unit(gaussian(rng, n))
		if s == 0 {
			x0, y0 = a, b
		}
		for i := 0; i < m; i++ {
			for j := 0; j < n; j++ {
				gen[s*L+i*n+j] = a[i] * b[j]
			}
		}
	}
	d := make([]float64, r*L)
	for t := 0; t < r; t++ {
		mix := gaussian(rng, r)
		for s := 0; s < r; s++ {
			for l := 0; l < L; l++ {
				d[t*L+l] += mix[s] * gen[s*L+l]
			}
		}
	}
	pts := 0
	if r <= min(m, n) {
		pts = r
	}
	return Instance{Family: "rank-one-span", Name: fmt.Sprintf("rank-one-span/%dx%d/r%d/s%d", m, n, r, seed),
		Basis: subspace.Basis{Count: r, Rows: m, Cols: n, Data: d}, Optimum: 0, X0: x0, Y0: y0, Points: pts}
}

// Boundary is a Gaussian random subspace of the critical dimension
// (m−1)(n−1)+1: a generic complex subspace of that dimension meets the
// rank-one matrices in C(m+n−2, m−1) points (the degree of the Segre variety
// P^{m−1}×P^{n−1}; a projective dimension count). Complex points come in
// conjugate pairs, so when that degree is odd at least one point is real and
// d* = 0 (derived); otherwise Optimum is NaN. Degree holds the count.
func Boundary(m, n int, seed uint64) Instance {
	k := (m-1)*(n-1) + 1
	in := Random(m, n, k, seed)
	in.Family = "boundary"
	in.Name = fmt.Sprintf("boundary/%dx%d/k%d/s%d", m, n, k, seed)
	in.Degree = binomial(m+n-2, m-1)
	if in.Degree%2 == 1 {
		in.Optimum = 0
	}
	return in
}

func binomial(n, k int) int {
	c := 1
	for i := 0; i < k; i++ {
		c = c * (n - i) / (i + 1)
	}
	return c
}

// Sweep returns the default sweep over every family at small and medium
// sizes (deterministic): closed forms, planted points (also noisy), spans of
// rank-one matrices below and above min(m, n), Gaussian subspaces, the
// critical dimension, each also rotated. With short set it returns a
// quick subset.
func Sweep(short bool) []Instance {
	var out []Instance
	add := func(in Instance) { out = append(out, in, Rotated(in, 11)) }
	for _, in := range ClosedForms(true) {
		add(in)
	}
	add(NormedAlgebraComplement(4, 1))
	sizes := [][2]int{{4, 4}, {6, 8}, {12, 12}}
	if short {
		sizes = sizes[:1]
	}
	seeds := 3
	if short {
		seeds = 1
	}
	for _, sz := range sizes {
		m, n := sz[0], sz[1]
		for s := 0; s < seeds; s++ {
			seed := uint64(s + 1)
			add(Planted(m, n, (m*n)/4, seed))
			add(PlantedNoisy(m, n, (m*n)/4, 1e-3, seed))
			add(RankOneSpan(m, n, min(m, n), seed))
			add(RankOneSpan(m, n, min(m, n)+2, seed))
			add(Random(m, n, (m*n)/2, seed))
			add(Boundary(m, n, seed))
		}
	}
	return out
}

// MustNew builds the subspace of the instance with the default options,
// for tests: it stops the test (tb.Fatal) if that fails.
func MustNew(tb testing.TB, in Instance) *subspace.Subspace {
	tb.Helper()
	w, err := subspace.New(context.Background(), in.Basis, subspace.Options{})
	if err != nil {
		tb.Fatal(err)
	}
	return w
}
