// Package reference holds the test references shared by the packages'
// tests: random data and the projector of a span computed by gonum (a
// general-purpose reference library), independently of package subspace.
package reference

import (
	"math"
	"math/rand/v2"

	"gonum.org/v1/gonum/mat"
)

// RandMatrices returns r Gaussian m×n matrices, row-major one after another.
func RandMatrices(rng *rand.Rand, r, m, n int) []float64 {
	d := make([]float64, r*m*n)
	for i := range d {
		d[i] = rng.NormFloat64()
	}
	return d
}

// Projector returns P_W (mn×mn) for W the span of the r matrices in data,
// by gonum's SVD of the mn×r matrix [vec B_t], keeping singular values
// above 1e-10·σ₁, and the rank kept. ok is false if the SVD failed.
func Projector(data []float64, r, m, n int) (p *mat.Dense, k int, ok bool) {
	L := m * n
	a := mat.NewDense(L, r, nil)
	for c := 0; c < r; c++ {
		for l := 0; l < L; l++ {
			a.Set(l, c, data[c*L+l])
		}
	}
	var svd mat.SVD
	if !svd.Factorize(a, mat.SVDThin) {
		return nil, 0, false
	}
	s := svd.Values(nil)
	var u mat.Dense
	svd.UTo(&u)
	for _, v := range s {
		if v > 1e-10*s[0] {
			k++
		}
	}
	uk := u.Slice(0, L, 0, k)
	var out mat.Dense
	out.Mul(uk, uk.T())
	return &out, k, true
}

// PartialTraces returns Tr₂(P) (m×m) and Tr₁(P) (n×n) of an mn×mn matrix P
// in the row-major Kronecker order: Tr₂(P)_ab = Σ_j P[(a,j),(b,j)],
// Tr₁(P)_cd = Σ_i P[(i,c),(i,d)].
func PartialTraces(p mat.Matrix, m, n int) (t1, t2 *mat.SymDense) {
	t1, t2 = mat.NewSymDense(m, nil), mat.NewSymDense(n, nil)
	for a := 0; a < m; a++ {
		for b := a; b < m; b++ {
			var s float64
			for j := 0; j < n; j++ {
				s += p.At(a*n+j, b*n+j)
			}
			t1.SetSym(a, b, s)
		}
	}
	for c := 0; c < n; c++ {
		for d := c; d < n; d++ {
			var s float64
			for i := 0; i < m; i++ {
				s += p.At(i*n+c, i*n+d)
			}
			t2.SetSym(c, d, s)
		}
	}
	return t1, t2
}

// TopEigen returns the largest eigenvalue of a by gonum's EigenSym.
func TopEigen(a mat.Symmetric) float64 {
	var es mat.EigenSym
	es.Factorize(a, false)
	v := es.Values(nil)
	return v[len(v)-1]
}

// RandUnit returns a random unit vector of length n.
func RandUnit(rng *rand.Rand, n int) []float64 {
	v := make([]float64, n)
	var s float64
	for i := range v {
		v[i] = rng.NormFloat64()
		s += v[i] * v[i]
	}
	s = math.Sqrt(s)
	for i := range v {
		v[i] /= s
	}
	return v
}

// RandOrthogonal returns a random n×n orthogonal matrix: the Q factor of
// gonum's QR of a Gaussian matrix.
func RandOrthogonal(rng *rand.Rand, n int) *mat.Dense {
	g := mat.NewDense(n, n, nil)
	for i := 0; i < n; i++ {
		for j := 0; j < n; j++ {
			g.Set(i, j, rng.NormFloat64())
		}
	}
	var qr mat.QR
	qr.Factorize(g)
	var q mat.Dense
	qr.QTo(&q)
	return &q
}
