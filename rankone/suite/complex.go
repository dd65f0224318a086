package suite

import (
	"context"
	"fmt"
	"math"
	"math/cmplx"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"

	"github.com/segre-lab/segre/subspace"
)

// ComplexInstance is a subspace of complex matrices with what is known of
// its optimum over C (unit x ∈ C^m, y ∈ C^n, x yᵀ without conjugation).
type ComplexInstance struct {
	Family string
	Name   string
	Basis  subspace.ComplexBasis
	// Optimum is the complex d* (NaN if unknown).
	Optimum float64
	// X0, Y0 are a known optimal point (unit), or nil.
	X0, Y0 []complex128
	// Degree is the number of rank-one points (projectively) of a generic
	// subspace of this dimension, when known (0 if not).
	Degree int
}

// Realified returns the real instance of W” (2m×2n real matrices, see
// subspace.NewComplex), whose optimum is d”* = √((1 + d*²)/2) (derived in
// package subspace: d² = 2d”² − 1). Real strategies and tests run on it.
func (in ComplexInstance) Realified() Instance {
	out := Instance{Family: "realified-" + in.Family, Name: in.Name + "/realified",
		Basis: subspace.RealMatrices(in.Basis), Optimum: math.NaN()}
	if !math.IsNaN(in.Optimum) {
		out.Optimum = math.Sqrt((1 + in.Optimum*in.Optimum) / 2)
	}
	return out
}

// MustNewComplex builds the complex subspace of the instance with the
// default options, for tests: it stops the test (tb.Fatal) if that fails.
func MustNewComplex(tb testing.TB, in ComplexInstance) *subspace.Subspace {
	tb.Helper()
	w, err := subspace.NewComplex(context.Background(), in.Basis, subspace.Options{})
	if err != nil {
		tb.Fatal(err)
	}
	return w
}

func complexGaussian(rng *rand.Rand, n int) []complex128 {
	v := make([]complex128, n)
	for i := range v {
		v[i] = complex(rng.NormFloat64(), rng.NormFloat64())
	}
	return v
}

func complexUnit(v []complex128) []complex128 {
	var s float64
	for _, z := range v {
		s += real(z)*real(z) + imag(z)*imag(z)
	}
	s = math.Sqrt(s)
	out := make([]complex128, len(v))
	for i := range v {
		out[i] = v[i] / complex(s, 0)
	}
	return out
}

// PencilIJ is span{I, J} in 2×2, J the rotation by 90°: over R it holds
// no rank-one matrix (d* = 1/√2), over C it contains (I − iJ)/2 =
// [[1, i], [−i, 1]]/2 = (1, −i)(1, i)ᵀ/2, so d* = 0 (derived here).
func PencilIJ() ComplexInstance {
	d := []complex128{1, 0, 0, 1, 0, -1, 1, 0}
	s := complex(1/math.Sqrt2, 0)
	return ComplexInstance{Family: "pencil-ij", Name: "pencil-ij/2x2",
		Basis: subspace.ComplexBasis{Count: 2, Rows: 2, Cols: 2, Data: d}, Optimum: 0,
		X0: []complex128{s, -1i * s}, Y0: []complex128{s, 1i * s}}
}

// ComplexAntisymmetric is the space of complex antisymmetric n×n
// matrices. The projection of x yᵀ onto it is its antisymmetric part
// (x yᵀ − y xᵀ)/2, and for unit x, y, ‖x yᵀ − y xᵀ‖² = 2 − 2|x̄ᵀy|²
// (expand tr(A*A); derived here), so h = (1 − |⟨x̄, y⟩|²)/2 ≤ 1/2 with
// equality for y ⊥ x̄: h* = 1/2 and d* = 1/√2.
func ComplexAntisymmetric(n int) ComplexInstance {
	var d []complex128
	for i := 0; i < n; i++ {
		for j := i + 1; j < n; j++ {
			a := make([]complex128, n*n)
			a[i*n+j], a[j*n+i] = 1, -1
			d = append(d, a...)
		}
	}
	return ComplexInstance{Family: "complex-antisymmetric", Name: fmt.Sprintf("complex-antisymmetric/%d", n),
		Basis: subspace.ComplexBasis{Count: n * (n - 1) / 2, Rows: n, Cols: n, Data: d}, Optimum: 1 / math.Sqrt2}
}

// ComplexOneMatrix is the span of one complex Gaussian m×n matrix A = B +
// iC. Eckart–Young over C gives h* = σ₁²/‖A‖² (Eckart & Young 1936, the
// same argument with the unitary SVD). The singular values come from
// gonum's real SVD of the real embedding [[B, −C], [C, B]], which has each
// singular value of A twice (common practice); d*² = Σ_{i≥2} σᵢ²/Σ σᵢ² is
// summed from the tail, without cancellation.
func ComplexOneMatrix(m, n int, seed uint64) ComplexInstance {
	rng := newRand(seed, "complex-one")
	a := complexGaussian(rng, m*n)
	emb := mat.NewDense(2*m, 2*n, nil)
	for i := 0; i < m; i++ {
		for j := 0; j < n; j++ {
			z := a[i*n+j]
			emb.Set(i, j, real(z))
			emb.Set(i, n+j, -imag(z))
			emb.Set(m+i, j, imag(z))
			emb.Set(m+i, n+j, real(z))
		}
	}
	var svd mat.SVD
	svd.Factorize(emb, mat.SVDNone)
	s := svd.Values(nil) // each σ of A twice, in decreasing order
	var tail, all float64
	for i := len(s) - 1; i >= 0; i-- {
		all += s[i] * s[i]
		if i >= 2 {
			tail += s[i] * s[i]
		}
	}
	return ComplexInstance{Family: "complex-one-matrix", Name: fmt.Sprintf("complex-one-matrix/%dx%d/s%d", m, n, seed),
		Basis: subspace.ComplexBasis{Count: 1, Rows: m, Cols: n, Data: a}, Optimum: math.Sqrt(tail / all)}
}

// ComplexPlanted is the span of a complex rank-one x₀y₀ᵀ (unit x₀, y₀)
// and k − 1 complex Gaussian matrices, mixed by a complex Gaussian k×k
// matrix: d* = 0 at (x₀, y₀) (derived: x₀y₀ᵀ ∈ W).
func ComplexPlanted(m, n, k int, seed uint64) ComplexInstance {
	rng := newRand(seed, "complex-planted")
	L := m * n
	x0, y0 := complexUnit(complexGaussian(rng, m)), complexUnit(complexGaussian(rng, n))
	gen := make([]complex128, k*L)
	for i := 0; i < m; i++ {
		for j := 0; j < n; j++ {
			gen[i*n+j] = x0[i] * y0[j]
		}
	}
	copy(gen[L:], complexGaussian(rng, (k-1)*L))
	d := make([]complex128, k*L)
	for t := 0; t < k; t++ {
		mix := complexGaussian(rng, k)
		for s := 0; s < k; s++ {
			for l := 0; l < L; l++ {
				d[t*L+l] += mix[s] * gen[s*L+l]
			}
		}
	}
	return ComplexInstance{Family: "complex-planted", Name: fmt.Sprintf("complex-planted/%dx%d/k%d/s%d", m, n, k, seed),
		Basis: subspace.ComplexBasis{Count: k, Rows: m, Cols: n, Data: d}, Optimum: 0, X0: x0, Y0: y0}
}

// CompletelyEntangled is the subspace of m×n matrices whose anti-diagonal
// sums Σ_{i+j=s} M_ij all vanish, of dimension (m−1)(n−1): it is the
// orthogonal complement of the span of u(λ)⊗v(λ), u(λ) = (1, λ, …,
// λ^{m−1}), v(λ) likewise, and it contains no product vector over C
// (K. R. Parthasarathy, "On the maximal dimension of a completely entangled
// subspace for finite level quantum systems", Proc. Indian Acad. Sci. 114,
// 2004; recalled from memory). So d* > 0; its value is known here only for
// 2×2, where W = span{[[0, 1], [−1, 0]]} and d* = 1/√2 (Eckart–Young:
// σ = (1, 1)).
func CompletelyEntangled(m, n int) ComplexInstance {
	var d []complex128
	count := 0
	for s := 0; s <= m+n-2; s++ {
		// Entries (i, s−i) of the anti-diagonal, i increasing.
		var cells [][2]int
		for i := 0; i < m; i++ {
			if j := s - i; j >= 0 && j < n {
				cells = append(cells, [2]int{i, j})
			}
		}
		for k := 0; k+1 < len(cells); k++ {
			a := make([]complex128, m*n)
			a[cells[k][0]*n+cells[k][1]] = 1
			a[cells[k+1][0]*n+cells[k+1][1]] = -1
			d = append(d, a...)
			count++
		}
	}
	opt := math.NaN()
	if m == 2 && n == 2 {
		opt = 1 / math.Sqrt2
	}
	return ComplexInstance{Family: "completely-entangled", Name: fmt.Sprintf("completely-entangled/%dx%d", m, n),
		Basis: subspace.ComplexBasis{Count: count, Rows: m, Cols: n, Data: d}, Optimum: opt}
}

// ComplexCritical is a complex Gaussian subspace of dimension
// (m−1)(n−1) + 1: it meets the Segre variety of rank-one matrices (of
// dimension m + n − 2 projectively, in P^{mn−1}) in finitely many points,
// as many as its degree C(m+n−2, m−1) (the degree of the Segre variety:
// J. Harris, Algebraic Geometry: A First Course, 1992; recalled from
// memory). So d* = 0.
func ComplexCritical(m, n int, seed uint64) ComplexInstance {
	rng := newRand(seed, "complex-critical")
	k := (m-1)*(n-1) + 1
	deg := 1
	for i := 1; i < m; i++ { // C(m+n−2, m−1)
		deg = deg * (n - 1 + i) / i
	}
	return ComplexInstance{Family: "complex-critical", Name: fmt.Sprintf("complex-critical/%dx%d/s%d", m, n, seed),
		Basis: subspace.ComplexBasis{Count: k, Rows: m, Cols: n, Data: complexGaussian(rng, k*m*n)}, Optimum: 0, Degree: deg}
}

// Unitary returns a random n×n unitary matrix (row-major): modified
// Gram–Schmidt, applied twice, on a complex Gaussian matrix.
func Unitary(rng *rand.Rand, n int) []complex128 {
	q := complexGaussian(rng, n*n)
	for j := 0; j < n; j++ { // column j
		for pass := 0; pass < 2; pass++ {
			for k := 0; k < j; k++ {
				var d complex128
				for i := 0; i < n; i++ {
					d += cmplx.Conj(q[i*n+k]) * q[i*n+j]
				}
				for i := 0; i < n; i++ {
					q[i*n+j] -= d * q[i*n+k]
				}
			}
		}
		var s float64
		for i := 0; i < n; i++ {
			s += real(q[i*n+j])*real(q[i*n+j]) + imag(q[i*n+j])*imag(q[i*n+j])
		}
		s = math.Sqrt(s)
		for i := 0; i < n; i++ {
			q[i*n+j] /= complex(s, 0)
		}
	}
	return q
}

// RotatedComplex returns the instance with every matrix B replaced by
// U·B·Vᵀ for random unitaries U, V: x yᵀ ↦ (Ux)(Vy)ᵀ maps the rank-one
// matrices onto themselves and preserves the Frobenius inner product, so d*
// is unchanged and a known optimal point maps to (U x₀, V y₀) (derived).
func RotatedComplex(in ComplexInstance, seed uint64) ComplexInstance {
	rng := newRand(seed, "rotate-complex")
	b := in.Basis
	m, n, L := b.Rows, b.Cols, b.Rows*b.Cols
	u, v := Unitary(rng, m), Unitary(rng, n)
	d := make([]complex128, len(b.Data))
	for t := 0; t < b.Count; t++ {
		src, dst := b.Data[t*L:(t+1)*L], d[t*L:(t+1)*L]
		for i := 0; i < m; i++ {
			for j := 0; j < n; j++ {
				var s complex128
				for a := 0; a < m; a++ {
					for c := 0; c < n; c++ {
						s += u[i*m+a] * src[a*n+c] * v[j*n+c]
					}
				}
				dst[i*n+j] = s
			}
		}
	}
	out := in
	out.Name = in.Name + "/rot" + fmt.Sprint(seed)
	out.Basis = subspace.ComplexBasis{Count: b.Count, Rows: m, Cols: n, Data: d}
	if in.X0 != nil {
		x, y := make([]complex128, m), make([]complex128, n)
		for i := 0; i < m; i++ {
			for a := 0; a < m; a++ {
				x[i] += u[i*m+a] * in.X0[a]
			}
		}
		for j := 0; j < n; j++ {
			for c := 0; c < n; c++ {
				y[j] += v[j*n+c] * in.Y0[c]
			}
		}
		out.X0, out.Y0 = x, y
	}
	return out
}

// ComplexClosedForms returns the complex instances with known optima (and
// the completely entangled subspaces, whose d* > 0 is known), each also
// rotated by random unitaries. With short set it returns a smaller set.
func ComplexClosedForms(short bool) []ComplexInstance {
	base := []ComplexInstance{
		PencilIJ(),
		ComplexAntisymmetric(3),
		ComplexOneMatrix(2, 3, 1),
		ComplexPlanted(3, 4, 4, 1),
		CompletelyEntangled(2, 2),
		CompletelyEntangled(2, 3),
		ComplexCritical(2, 2, 1),
		ComplexCritical(2, 3, 2),
	}
	if !short {
		base = append(base, ComplexAntisymmetric(4), ComplexOneMatrix(4, 3, 2), ComplexPlanted(5, 5, 6, 2),
			CompletelyEntangled(3, 3), ComplexCritical(3, 3, 3))
	}
	out := make([]ComplexInstance, 0, 2*len(base))
	for _, in := range base {
		out = append(out, in, RotatedComplex(in, 5))
	}
	return out
}
