package cpd

import (
	"context"
	"errors"
	"fmt"
	"math"
	"math/cmplx"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/cblas128"
	"gonum.org/v1/gonum/mat"

	"github.com/segre-lab/segre/rankone"
	"github.com/segre-lab/segre/subspace"
)

// Complex arrays.
//
// A complex array T = Σ_i a_i⊗b_i⊗c_i (a_i ∈ C^m, b_i ∈ C^n, c_i ∈ C^p)
// is decomposed exactly as a real one: slice k is Σ_i c_ik a_i b_iᵀ (no
// conjugation), so the slices span, over C, W ⊆ span{a_i b_iᵀ} with
// equality when C has full column rank, and the a_i b_iᵀ are then the
// complex rank-one points of W (rankone.AllPoints.ComplexPoints, Jennrich's
// algorithm over C). The complex types are separate from the real ones, as
// gonum keeps Dense and CDense apart: a real user never meets complex
// numbers, and which field an array has is a question of its type, not of
// which field of a struct is set. Options is shared.

// ComplexTensor is an m×n×p complex array laid out as Tensor:
// Data[(i·N + j)·P + k] = T[i][j][k].
type ComplexTensor struct {
	M, N, P int
	Data    []complex128
}

func (t ComplexTensor) check() error {
	if t.M <= 0 || t.N <= 0 || t.P <= 0 || t.M > math.MaxInt32 || t.N > math.MaxInt32 || t.P > math.MaxInt32 ||
		float64(t.M)*float64(t.N)*float64(t.P) != float64(len(t.Data)) || len(t.Data) != t.M*t.N*t.P {
		return fmt.Errorf("%w: %d×%d×%d with %d entries", ErrShape, t.M, t.N, t.P, len(t.Data))
	}
	for i, v := range t.Data {
		if cmplx.IsNaN(v) || cmplx.IsInf(v) {
			return fmt.Errorf("%w: entry %d is %v", ErrShape, i, v)
		}
	}
	return nil
}

// ComposeComplex returns Σ_i a_i⊗b_i⊗c_i for the columns of the complex
// A (m×r), B (n×r), C (p×r).
func ComposeComplex(a, b, c *mat.CDense) ComplexTensor {
	m, r := a.Dims()
	n, _ := b.Dims()
	p, _ := c.Dims()
	t := ComplexTensor{M: m, N: n, P: p, Data: make([]complex128, m*n*p)}
	for s := 0; s < r; s++ {
		for i := 0; i < m; i++ {
			ai := a.At(i, s)
			for j := 0; j < n; j++ {
				aij := ai * b.At(j, s)
				row := t.Data[(i*n+j)*p : (i*n+j+1)*p]
				for k := range row {
					row[k] += aij * c.At(k, s)
				}
			}
		}
	}
	return t
}

// ComplexDecomposition is the result of DecomposeComplex.
type ComplexDecomposition struct {
	// A (m×r) and B (n×r) have unit columns; C (p×r) carries the scales.
	// Each column is determined up to a complex scalar (moved into C).
	A, B, C *mat.CDense
	// RelError is ‖T − Σ a_i⊗b_i⊗c_i‖_F / ‖T‖_F.
	RelError float64
	// Distances[i] is the certified complex distance
	// (rankone.VerifyComplex) from a_i b_iᵀ to the slice span used (the
	// principal rank-r span for noisy data).
	Distances []float64
	// Iterations of the alternating-least-squares refinement.
	Iterations int
	// Unique reports Kruskal's sufficient condition in the form of
	// KruskalUnique, over C (Kruskal's argument uses only linear algebra
	// over a field; N. D. Sidiropoulos and R. Bro, J. Chemometrics 14, 2000,
	// state it for complex arrays; recalled from memory).
	Unique bool
}

// DecomposeComplex is Decompose for a complex array: the rank-one points
// of the complex slice span (rankone.AllPoints.ComplexPoints; in noisy
// mode the principal rank-r span), C by complex least squares, and complex
// alternating least squares when the fit is not exact. r ≤ min(m, n) is
// required. Errors are those of Decompose.
func DecomposeComplex(ctx context.Context, t ComplexTensor, opt Options) (*ComplexDecomposition, error) {
	if err := t.check(); err != nil {
		return nil, err
	}
	m, n, p := t.M, t.N, t.P
	L := m * n
	slices := make([]complex128, p*L)
	for l := 0; l < L; l++ {
		for k := 0; k < p; k++ {
			slices[k*L+l] = t.Data[l*p+k]
		}
	}
	w, err := subspace.NewComplex(ctx, subspace.ComplexBasis{Count: p, Rows: m, Cols: n, Data: slices}, subspace.Options{})
	if err != nil {
		return nil, err
	}
	r := opt.Rank
	if r < 0 || r > min(m, n) || r > p {
		return nil, fmt.Errorf("%w: rank %d, need 1 ≤ r ≤ min(m, n, p) = %d", ErrShape, r, min(m, n, p))
	}
	noisy := r > 0
	if r == 0 {
		r = w.ComplexDim()
	} else if r < w.ComplexDim() {
		w, err = principalComplexSpan(ctx, slices, L, p, m, n, r)
		if err != nil {
			return nil, err
		}
	}
	if r > min(m, n) {
		return nil, fmt.Errorf("%w (slice span of complex dimension %d in %d×%d)", rankone.ErrTooManyTerms, r, m, n)
	}
	pts, err := (&rankone.AllPoints{Seed: opt.Seed, Noisy: noisy}).ComplexPoints(ctx, w)
	if err != nil && !(noisy && errors.Is(err, rankone.ErrNotRankOne)) {
		return nil, err
	}
	if len(pts) != r {
		return nil, fmt.Errorf("%w: %d rank-one points for rank %d", rankone.ErrDegenerate, len(pts), r)
	}
	a, b := mat.NewCDense(m, r, nil), mat.NewCDense(n, r, nil)
	for s, pt := range pts {
		x, y := pt.Vectors()
		for i, v := range x {
			a.Set(i, s, v)
		}
		for j, v := range y {
			b.Set(j, s, v)
		}
	}
	c, err := leastSquaresComplexC(t, a, b)
	if err != nil {
		return nil, err
	}
	d := &ComplexDecomposition{A: a, B: b, C: c}
	d.RelError = relErrorComplex(t, a, b, c)
	if d.RelError > 1e-12 {
		maxIter := opt.MaxIter
		if maxIter <= 0 {
			maxIter = 500
		}
		d.Iterations, d.RelError = alsComplex(ctx, t, a, b, c, maxIter)
	}
	for s := 0; s < r; s++ {
		u := pts[s].Upper // the columns are the points' own coordinates unless refined
		if d.Iterations > 0 {
			u, _ = rankone.VerifyComplex(w, realCoords(a, s), realCoords(b, s))
		}
		d.Distances = append(d.Distances, u)
	}
	d.Unique = kruskalUniqueComplex(a, b, c)
	return d, ctx.Err()
}

// realCoords returns column s of x as (Re, Im), the real coordinates of a
// complex subspace's witness.
func realCoords(x *mat.CDense, s int) []float64 {
	rows, _ := x.Dims()
	out := make([]float64, 2*rows)
	for i := 0; i < rows; i++ {
		v := x.At(i, s)
		out[i], out[rows+i] = real(v), imag(v)
	}
	return out
}

// realifiedMat returns R(Z) = [[Re Z, −Im Z], [Im Z, Re Z]] of a row-major
// complex rows×cols matrix: R(Z)(Re x; Im x) = (Re Zx; Im Zx), so a
// complex linear system or least-squares problem in x is the real one in
// (Re x; Im x), with ‖R(Z)(Re x; Im x) − (Re y; Im y)‖ = ‖Zx − y‖.
func realifiedMat(z []complex128, rows, cols int) *mat.Dense {
	out := mat.NewDense(2*rows, 2*cols, nil)
	for i := 0; i < rows; i++ {
		for j := 0; j < cols; j++ {
			v := z[i*cols+j]
			out.Set(i, j, real(v))
			out.Set(i, cols+j, -imag(v))
			out.Set(rows+i, j, imag(v))
			out.Set(rows+i, cols+j, real(v))
		}
	}
	return out
}

// solveComplex returns the least-squares (or, square, the exact) solution
// X (cols×q, row-major) of Z X = Y for Z rows×cols and Y rows×q, through
// the realification and gonum's Solve (QR for tall matrices).
func solveComplex(z []complex128, rows, cols int, y []complex128, q int) ([]complex128, error) {
	rhs := mat.NewDense(2*rows, q, nil)
	for i := 0; i < rows; i++ {
		for k := 0; k < q; k++ {
			v := y[i*q+k]
			rhs.Set(i, k, real(v))
			rhs.Set(rows+i, k, imag(v))
		}
	}
	var sol mat.Dense
	if err := sol.Solve(realifiedMat(z, rows, cols), rhs); err != nil {
		return nil, err
	}
	x := make([]complex128, cols*q)
	for i := 0; i < cols; i++ {
		for k := 0; k < q; k++ {
			x[i*q+k] = complex(sol.At(i, k), sol.At(cols+i, k))
		}
	}
	return x, nil
}

// principalComplexSpan returns the complex subspace spanned by the r
// leading left singular vectors of the complex mn×p unfolding: the top 2r
// left singular vectors (p, q) of its realification span the realification
// of that space (see package rankone's notes on complex points), so the
// complex vectors p + iq span it; r of them are chosen complex-orthonormal
// by pivoted Gram–Schmidt.
func principalComplexSpan(ctx context.Context, slices []complex128, L, p, m, n, r int) (*subspace.Subspace, error) {
	u := make([]complex128, L*p)
	for k := 0; k < p; k++ {
		for l := 0; l < L; l++ {
			u[l*p+k] = slices[k*L+l]
		}
	}
	var svd mat.SVD
	if !svd.Factorize(realifiedMat(u, L, p), mat.SVDThin) {
		return nil, fmt.Errorf("%w: SVD of the unfolding failed", rankone.ErrDegenerate)
	}
	var q mat.Dense
	svd.UTo(&q)
	cand := make([][]complex128, 2*r)
	for s := range cand {
		v := make([]complex128, L)
		for l := 0; l < L; l++ {
			v[l] = complex(q.At(l, s), q.At(L+l, s))
		}
		cand[s] = v
	}
	basis := pivotedOrthonormal(cand, r)
	if len(basis) != r {
		return nil, fmt.Errorf("%w: principal span of complex dimension %d < %d", rankone.ErrDegenerate, len(basis), r)
	}
	data := make([]complex128, 0, r*L)
	for _, v := range basis {
		data = append(data, v...)
	}
	return subspace.NewComplex(ctx, subspace.ComplexBasis{Count: r, Rows: m, Cols: n, Data: data}, subspace.Options{})
}

// pivotedOrthonormal returns up to k orthonormal vectors (Hermitian
// product) from the candidates by modified Gram–Schmidt with column
// pivoting and one reorthogonalisation; cand is overwritten.
func pivotedOrthonormal(cand [][]complex128, k int) [][]complex128 {
	vec := func(v []complex128) cblas128.Vector { return cblas128.Vector{N: len(v), Data: v, Inc: 1} }
	used := make([]bool, len(cand))
	var out [][]complex128
	for len(out) < k {
		best, bestNorm := -1, 0.0
		for t, v := range cand {
			if nv := cblas128.Nrm2(vec(v)); !used[t] && nv > bestNorm {
				best, bestNorm = t, nv
			}
		}
		if best < 0 {
			break
		}
		used[best] = true
		v := cand[best]
		for _, u := range out {
			cblas128.Axpy(-cblas128.Dotc(vec(u), vec(v)), vec(u), vec(v))
		}
		nv := cblas128.Nrm2(vec(v))
		if nv == 0 {
			continue
		}
		for l, z := range v {
			v[l] = complex(real(z)/nv, imag(z)/nv)
		}
		out = append(out, v)
		for t, c := range cand {
			if !used[t] {
				cblas128.Axpy(-cblas128.Dotc(vec(v), vec(c)), vec(v), vec(c))
			}
		}
	}
	return out
}

// khatriRaoComplex returns the column-wise Kronecker product of f (q×r)
// and g (s×r), row-major (q·s)×r: row i·s + j of column t is f_it·g_jt.
func khatriRaoComplex(f, g *mat.CDense) []complex128 {
	q, r := f.Dims()
	s, _ := g.Dims()
	x := make([]complex128, q*s*r)
	for i := 0; i < q; i++ {
		for j := 0; j < s; j++ {
			for t := 0; t < r; t++ {
				x[(i*s+j)*r+t] = f.At(i, t) * g.At(j, t)
			}
		}
	}
	return x
}

// leastSquaresComplexC solves min ‖(A⊙B)Cᵀ − T_(3)ᵀ‖ for C (T_(3)ᵀ is the
// mn×p matrix of t.Data).
func leastSquaresComplexC(t ComplexTensor, a, b *mat.CDense) (*mat.CDense, error) {
	_, r := a.Dims()
	ct, err := solveComplex(khatriRaoComplex(a, b), t.M*t.N, r, t.Data, t.P)
	if err != nil {
		return nil, fmt.Errorf("%w: components not independent: %v", rankone.ErrDegenerate, err)
	}
	c := mat.NewCDense(t.P, r, nil)
	for s := 0; s < r; s++ {
		for k := 0; k < t.P; k++ {
			c.Set(k, s, ct[s*t.P+k])
		}
	}
	return c, nil
}

func relErrorComplex(t ComplexTensor, a, b, c *mat.CDense) float64 {
	rec := ComposeComplex(a, b, c)
	var num, den float64
	for i, v := range t.Data {
		d := v - rec.Data[i]
		num += real(d)*real(d) + imag(d)*imag(d)
		den += real(v)*real(v) + imag(v)*imag(v)
	}
	if den == 0 {
		return 0
	}
	return math.Sqrt(num / den)
}

// unfoldingsComplex returns T_(1) (m×np), T_(2) (n×mp) and T_(3) (p×mn)
// laid out as unfoldings does for real arrays.
func unfoldingsComplex(t ComplexTensor) (t1, t2, t3 []complex128) {
	m, n, p := t.M, t.N, t.P
	t1 = t.Data
	t2 = make([]complex128, len(t.Data))
	t3 = make([]complex128, len(t.Data))
	for i := 0; i < m; i++ {
		for j := 0; j < n; j++ {
			for k := 0; k < p; k++ {
				v := t.Data[(i*n+j)*p+k]
				t2[j*m*p+i*p+k] = v
				t3[k*m*n+i*n+j] = v
			}
		}
	}
	return
}

// alsComplex is als over C: for the mode-1 unfolding T_(1) ≈ A Zᵀ with
// Z = B⊙C, the least-squares A solves the normal equations
// (Z*Z) Aᵀ = Z* T_(1)ᵀ, i.e. A = T_(1) Z̄ G⁻ᵀ with G = Z*Z = (B*B) ∗ (C*C)
// (Hadamard product; entry (s, u) of Z*Z is Σ_{j,k} conj(b_js c_ks) b_ju
// c_ku; derived here as over R, with conjugates), and likewise for B and
// C. Columns of A and B are renormalised with the scale moved into C. It
// stops as als does and returns the iterations and the final relative
// error.
func alsComplex(ctx context.Context, t ComplexTensor, a, b, c *mat.CDense, maxIter int) (int, float64) {
	t1, t2, t3 := unfoldingsComplex(t)
	m, n, p := t.M, t.N, t.P
	prev := math.Inf(1)
	var e float64
	it := 0
	for ; it < maxIter && ctx.Err() == nil; it++ {
		alsStepComplex(t1, m, b, c, a)
		alsStepComplex(t2, n, a, c, b)
		normaliseComplex(a, b, c)
		alsStepComplex(t3, p, a, b, c)
		e = relErrorComplex(t, a, b, c)
		if math.Abs(prev-e) <= 1e-12*math.Max(e, 1e-300) || e <= 1e-15 {
			it++
			break
		}
		prev = e
	}
	return it, relErrorComplex(t, a, b, c)
}

// alsStepComplex sets out = unf·conj(f⊙g)·G⁻ᵀ, G = (f*f) ∗ (g*g), for the
// unfolding unf (rows × q·s): the solution of G outᵀ = (unf·conj(f⊙g))ᵀ.
func alsStepComplex(unf []complex128, rows int, f, g, out *mat.CDense) {
	q, r := f.Dims()
	s, _ := g.Dims()
	kr := khatriRaoComplex(f, g) // (q·s)×r
	for i := range kr {
		kr[i] = cmplx.Conj(kr[i])
	}
	mt := make([]complex128, rows*r)
	cblas128.Gemm(blas.NoTrans, blas.NoTrans, 1,
		cblas128.General{Rows: rows, Cols: q * s, Stride: q * s, Data: unf},
		cblas128.General{Rows: q * s, Cols: r, Stride: r, Data: kr}, 0,
		cblas128.General{Rows: rows, Cols: r, Stride: r, Data: mt})
	gram := func(x *mat.CDense) []complex128 { // x*x
		_, k := x.Dims()
		raw := x.RawCMatrix()
		out := make([]complex128, k*k)
		cblas128.Gemm(blas.ConjTrans, blas.NoTrans, 1, raw, raw, 0, cblas128.General{Rows: k, Cols: k, Stride: k, Data: out})
		return out
	}
	gf, gg := gram(f), gram(g)
	for i := range gf {
		gf[i] *= gg[i]
	}
	// G outᵀ = mtᵀ.
	mtT := make([]complex128, r*rows)
	for i := 0; i < rows; i++ {
		for t := 0; t < r; t++ {
			mtT[t*rows+i] = mt[i*r+t]
		}
	}
	sol, err := solveComplex(gf, r, r, mtT, rows)
	if err != nil {
		return // singular normal equations: keep the current factor
	}
	for i := 0; i < rows; i++ {
		for t := 0; t < r; t++ {
			out.Set(i, t, sol[t*rows+i])
		}
	}
}

func colNorm(x *mat.CDense, s int) float64 {
	rows, _ := x.Dims()
	var ss float64
	for i := 0; i < rows; i++ {
		v := x.At(i, s)
		ss += real(v)*real(v) + imag(v)*imag(v)
	}
	return math.Sqrt(ss)
}

// normaliseComplex scales the columns of a and b to unit norm, moving the
// scale into c.
func normaliseComplex(a, b, c *mat.CDense) {
	_, r := a.Dims()
	m, _ := a.Dims()
	n, _ := b.Dims()
	p, _ := c.Dims()
	for s := 0; s < r; s++ {
		na, nb := colNorm(a, s), colNorm(b, s)
		if na == 0 || nb == 0 {
			continue
		}
		for i := 0; i < m; i++ {
			a.Set(i, s, a.At(i, s)/complex(na, 0))
		}
		for j := 0; j < n; j++ {
			b.Set(j, s, b.At(j, s)/complex(nb, 0))
		}
		for k := 0; k < p; k++ {
			c.Set(k, s, c.At(k, s)*complex(na*nb, 0))
		}
	}
}

// kruskalUniqueComplex is KruskalUnique over C: A and B of full column
// rank (the singular values of R(A) are those of A, each twice, so σ_r(A)
// is the 2r-th of R(A)) and C without zero or parallel columns
// (|c_s*c_u| < ‖c_s‖‖c_u‖ by Cauchy–Schwarz, equality iff parallel).
func kruskalUniqueComplex(a, b, c *mat.CDense) bool {
	_, r := a.Dims()
	full := func(x *mat.CDense) bool {
		rows, _ := x.Dims()
		if rows < r {
			return false
		}
		raw := x.RawCMatrix()
		z := make([]complex128, rows*r)
		for i := 0; i < rows; i++ {
			copy(z[i*r:(i+1)*r], raw.Data[i*raw.Stride:i*raw.Stride+r])
		}
		var svd mat.SVD
		if !svd.Factorize(realifiedMat(z, rows, r), mat.SVDNone) {
			return false
		}
		s := svd.Values(nil)
		return s[2*r-1] > 1e-10*s[0]
	}
	if !full(a) || !full(b) {
		return false
	}
	if r == 1 {
		return colNorm(c, 0) > 0
	}
	p, _ := c.Dims()
	for s := 0; s < r; s++ {
		ns := colNorm(c, s)
		if ns == 0 {
			return false
		}
		for u := s + 1; u < r; u++ {
			var d complex128
			for k := 0; k < p; k++ {
				d += cmplx.Conj(c.At(k, s)) * c.At(k, u)
			}
			if cmplx.Abs(d) >= (1-1e-10)*ns*colNorm(c, u) {
				return false
			}
		}
	}
	return true
}
