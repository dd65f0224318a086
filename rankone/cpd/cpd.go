// Package cpd decomposes three-way arrays T = Σ_i a_i⊗b_i⊗c_i (canonical
// polyadic decomposition) through the rank-one points of the span of T's
// frontal slices, then refines by alternating least squares on the whole
// array when the data are noisy.
//
// Layout: an m×n×p array is stored as Data[(i·n + j)·p + k] = T[i][j][k];
// slice k is the m×n matrix T[·][·][k]. If T = Σ_{i≤r} a_i⊗b_i⊗c_i then slice
// k is Σ_i c_ik a_i b_iᵀ, so the slices span W ⊆ span{a_i b_iᵀ}, with equality
// when C has full column rank; the a_i b_iᵀ are then the rank-one points of
// W (rankone.AllPoints), and C follows by linear least squares.
//
// Complex arrays (ComplexTensor, DecomposeComplex) are decomposed the same
// way over C, through the complex rank-one points of the complex slice span
// (rankone.AllPoints.ComplexPoints); see the notes in complex.go.
package cpd

import (
	"context"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
	"gonum.org/v1/gonum/mat"

	"github.com/segre-lab/segre/rankone"
	"github.com/segre-lab/segre/subspace"
)

// ErrShape reports a malformed tensor or an invalid rank.
var ErrShape = errors.New("cpd: bad tensor shape or rank")

// Tensor is an m×n×p array, Data[(i·N + j)·P + k] = T[i][j][k].
type Tensor struct {
	M, N, P int
	Data    []float64
}

func (t Tensor) check() error {
	if t.M <= 0 || t.N <= 0 || t.P <= 0 || t.M > math.MaxInt32 || t.N > math.MaxInt32 || t.P > math.MaxInt32 ||
		float64(t.M)*float64(t.N)*float64(t.P) != float64(len(t.Data)) || len(t.Data) != t.M*t.N*t.P {
		return fmt.Errorf("%w: %d×%d×%d with %d entries", ErrShape, t.M, t.N, t.P, len(t.Data))
	}
	for i, v := range t.Data {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return fmt.Errorf("%w: entry %d is %v", ErrShape, i, v)
		}
	}
	return nil
}

// Compose returns Σ_i a_i⊗b_i⊗c_i for the columns of A (m×r), B (n×r), C (p×r).
func Compose(a, b, c *mat.Dense) Tensor {
	m, r := a.Dims()
	n, _ := b.Dims()
	p, _ := c.Dims()
	t := Tensor{M: m, N: n, P: p, Data: make([]float64, m*n*p)}
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

// Options configures Decompose. The zero value gives the defaults.
type Options struct {
	// Rank is r; zero means the numerical dimension of the slice span, for
	// exact data (points must then lie in the span to 1e-8). A given rank
	// marks the data as possibly noisy: the principal rank-r slice span is
	// used and approximate points are accepted and refined.
	Rank int
	// Seed seeds the random elements used by the simultaneous
	// diagonalisation.
	Seed uint64
	// MaxIter bounds the alternating-least-squares refinement; zero means
	// 500. It runs only when the relative error after the algebraic step
	// exceeds 1e-12.
	MaxIter int
}

// Decomposition is the result of Decompose.
type Decomposition struct {
	// A (m×r) and B (n×r) have unit columns; C (p×r) carries the scales.
	A, B, C *mat.Dense
	// RelError is ‖T − Σ a_i⊗b_i⊗c_i‖_F / ‖T‖_F.
	RelError float64
	// Distances[i] is the certified distance (rankone.Verify) from a_i b_iᵀ
	// to the slice span used (the principal rank-r span for noisy data).
	Distances []float64
	// Iterations of the alternating-least-squares refinement.
	Iterations int
	// Unique reports Kruskal's sufficient condition (see KruskalUnique).
	Unique bool
}

// Decompose computes a rank-r decomposition of t through the rank-one points
// of its slice span (rankone.AllPoints, in noisy mode when the span is
// truncated to rank r), recovers C by least squares, and refines with
// alternating least squares when the fit is not exact. r ≤ min(m, n) is
// required (the hypothesis of simultaneous diagonalisation).
func Decompose(ctx context.Context, t Tensor, opt Options) (*Decomposition, error) {
	if err := t.check(); err != nil {
		return nil, err
	}
	m, n, p := t.M, t.N, t.P
	L := m * n
	// Slices as a basis (slice k = column k of the mn×p unfolding).
	slices := make([]float64, p*L)
	for l := 0; l < L; l++ {
		for k := 0; k < p; k++ {
			slices[k*L+l] = t.Data[l*p+k]
		}
	}
	w, err := subspace.New(context.Background(), subspace.Basis{Count: p, Rows: m, Cols: n, Data: slices}, subspace.Options{})
	if err != nil {
		return nil, err
	}
	r := opt.Rank
	if r < 0 || r > min(m, n) || r > p {
		return nil, fmt.Errorf("%w: rank %d, need 1 ≤ r ≤ min(m, n, p) = %d", ErrShape, r, min(m, n, p))
	}
	// A rank given by the caller means the data may be noisy: points farther
	// than the tolerance from the slice span are then accepted as
	// approximations (and refined by ALS) instead of refused.
	noisy := r > 0
	if r == 0 {
		r = w.Dim()
	} else if r < w.Dim() {
		// The principal rank-r slice span (noisy data): leading left singular
		// vectors of the mn×p unfolding, from gonum's SVD.
		w, err = principalSpan(slices, L, p, m, n, r)
		if err != nil {
			return nil, err
		}
	}
	if r > min(m, n) {
		return nil, fmt.Errorf("%w (slice span of dimension %d in %d×%d)", rankone.ErrTooManyTerms, r, m, n)
	}
	pts, err := (&rankone.AllPoints{Seed: opt.Seed, Noisy: noisy}).Points(ctx, w)
	if err != nil && !(noisy && errors.Is(err, rankone.ErrNotRankOne)) {
		return nil, err
	}
	if len(pts) != r {
		return nil, fmt.Errorf("%w: %d rank-one points for rank %d", rankone.ErrDegenerate, len(pts), r)
	}
	a, b := mat.NewDense(m, r, nil), mat.NewDense(n, r, nil)
	for s, pt := range pts {
		a.SetCol(s, pt.X)
		b.SetCol(s, pt.Y)
	}
	c, err := leastSquaresC(t, a, b)
	if err != nil {
		return nil, err
	}
	d := &Decomposition{A: a, B: b, C: c}
	d.RelError = relError(t, a, b, c)
	if d.RelError > 1e-12 {
		maxIter := opt.MaxIter
		if maxIter <= 0 {
			maxIter = 500
		}
		d.Iterations, d.RelError = als(ctx, t, a, b, c, maxIter)
	}
	for s := 0; s < r; s++ {
		u, _ := rankone.Verify(w, mat.Col(nil, s, a), mat.Col(nil, s, b))
		d.Distances = append(d.Distances, u)
	}
	d.Unique = KruskalUnique(a, b, c)
	return d, ctx.Err()
}

func principalSpan(slices []float64, L, p, m, n, r int) (*subspace.Subspace, error) {
	u := mat.NewDense(L, p, nil)
	for k := 0; k < p; k++ {
		for l := 0; l < L; l++ {
			u.Set(l, k, slices[k*L+l])
		}
	}
	var svd mat.SVD
	if !svd.Factorize(u, mat.SVDThin) {
		return nil, fmt.Errorf("%w: SVD of the unfolding failed", rankone.ErrDegenerate)
	}
	var q mat.Dense
	svd.UTo(&q)
	data := make([]float64, r*L)
	for s := 0; s < r; s++ {
		for l := 0; l < L; l++ {
			data[s*L+l] = q.At(l, s)
		}
	}
	return subspace.New(context.Background(), subspace.Basis{Count: r, Rows: m, Cols: n, Data: data}, subspace.Options{})
}

// leastSquaresC solves min ‖T_(3)ᵀ − (A⊙B)Cᵀ‖ for C, with gonum's QR.
func leastSquaresC(t Tensor, a, b *mat.Dense) (*mat.Dense, error) {
	m, n, p := t.M, t.N, t.P
	_, r := a.Dims()
	x := khatriRao(a, b) // (m·n)×r, row i·n+j
	rhs := mat.NewDense(m*n, p, t.Data)
	var ct mat.Dense
	if err := ct.Solve(x, rhs); err != nil {
		return nil, fmt.Errorf("%w: components not independent: %v", rankone.ErrDegenerate, err)
	}
	c := mat.NewDense(p, r, nil)
	c.Copy(ct.T())
	return c, nil
}

// khatriRao returns the column-wise Kronecker product: row i·n + j of
// column s is a[i][s]·b[j][s].
func khatriRao(a, b *mat.Dense) *mat.Dense {
	m, r := a.Dims()
	n, _ := b.Dims()
	x := mat.NewDense(m*n, r, nil)
	for i := 0; i < m; i++ {
		for j := 0; j < n; j++ {
			for s := 0; s < r; s++ {
				x.Set(i*n+j, s, a.At(i, s)*b.At(j, s))
			}
		}
	}
	return x
}

func relError(t Tensor, a, b, c *mat.Dense) float64 {
	rec := Compose(a, b, c)
	var num, den float64
	for i, v := range t.Data {
		d := v - rec.Data[i]
		num += d * d
		den += v * v
	}
	if den == 0 {
		return 0
	}
	return math.Sqrt(num / den)
}

// unfoldings returns T_(1) (m×np, column j·p+k), T_(2) (n×mp, column
// i·p+k) and T_(3) (p×mn, column i·n+j) as row-major slices.
func unfoldings(t Tensor) (t1, t2, t3 []float64) {
	m, n, p := t.M, t.N, t.P
	t1 = t.Data
	t2 = make([]float64, len(t.Data))
	t3 = make([]float64, len(t.Data))
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

// als runs alternating least squares on the whole array (Carroll & Chang,
// Psychometrika 35, 1970; Harshman 1970): A ← T_(1)(B⊙C)(BᵀB∗CᵀC)⁻¹ and
// likewise for B and C, columns of A and B renormalised with the scale moved
// into C. It stops when the relative error changes by less than 1e-12 or on
// ctx. It returns the iterations and the final relative error.
func als(ctx context.Context, t Tensor, a, b, c *mat.Dense, maxIter int) (int, float64) {
	t1, t2, t3 := unfoldings(t)
	m, n, p := t.M, t.N, t.P
	prev := math.Inf(1)
	var e float64
	it := 0
	for ; it < maxIter && ctx.Err() == nil; it++ {
		alsStep(t1, m, b, c, a)
		alsStep(t2, n, a, c, b)
		normalise(a, b, c)
		alsStep(t3, p, a, b, c)
		e = relError(t, a, b, c)
		if math.Abs(prev-e) <= 1e-12*math.Max(e, 1e-300) || e <= 1e-15 {
			it++
			break
		}
		prev = e
	}
	return it, relError(t, a, b, c)
}

// alsStep sets out = unf·(f⊙g)·(fᵀf ∗ gᵀg)⁻¹ for the unfolding unf (rows × q·s).
func alsStep(unf []float64, rows int, f, g, out *mat.Dense) {
	q, r := f.Dims()
	s, _ := g.Dims()
	kr := khatriRao(f, g) // (q·s)×r
	mt := make([]float64, rows*r)
	blas64.Gemm(blas.NoTrans, blas.NoTrans, 1,
		blas64.General{Rows: rows, Cols: q * s, Stride: q * s, Data: unf},
		kr.RawMatrix(), 0, blas64.General{Rows: rows, Cols: r, Stride: r, Data: mt})
	var ff, gg mat.Dense
	ff.Mul(f.T(), f)
	gg.Mul(g.T(), g)
	ff.MulElem(&ff, &gg)
	var sol mat.Dense
	// out = mt · V⁻¹ with V symmetric: solve V outᵀ = mtᵀ.
	if err := sol.Solve(&ff, mat.NewDense(rows, r, mt).T()); err != nil {
		return // singular normal equations: keep the current factor
	}
	out.Copy(sol.T())
}

// normalise scales the columns of a and b to unit norm, moving the scale into c.
func normalise(a, b, c *mat.Dense) {
	_, r := a.Dims()
	for s := 0; s < r; s++ {
		na := mat.Norm(a.ColView(s), 2)
		nb := mat.Norm(b.ColView(s), 2)
		if na == 0 || nb == 0 {
			continue
		}
		for i := 0; i < a.RawMatrix().Rows; i++ {
			a.Set(i, s, a.At(i, s)/na)
		}
		for j := 0; j < b.RawMatrix().Rows; j++ {
			b.Set(j, s, b.At(j, s)/nb)
		}
		for k := 0; k < c.RawMatrix().Rows; k++ {
			c.Set(k, s, c.At(k, s)*na*nb)
		}
	}
}

// KruskalUnique reports a sufficient condition for the decomposition to be
// essentially unique (up to permutation and scaling): Kruskal's condition
// k_A + k_B + k_C ≥ 2r + 2 (Kruskal, Linear Algebra Appl. 18, 1977), where k
// is the Kruskal rank. Here it is checked in the form used by the algebraic
// method: A and B of full column rank r (k_A = k_B = r, numerically: σ_r >
// 1e-10·σ₁) and C without zero or parallel columns (k_C ≥ 2). Failing it
// does not prove non-uniqueness.
func KruskalUnique(a, b, c *mat.Dense) bool {
	_, r := a.Dims()
	full := func(x *mat.Dense) bool {
		rows, _ := x.Dims()
		if rows < r {
			return false
		}
		var svd mat.SVD
		if !svd.Factorize(x, mat.SVDNone) {
			return false
		}
		s := svd.Values(nil)
		return s[r-1] > 1e-10*s[0]
	}
	if !full(a) || !full(b) {
		return false
	}
	if r == 1 {
		return mat.Norm(c, 2) > 0
	}
	for s := 0; s < r; s++ {
		cs := c.ColView(s)
		ns := mat.Norm(cs, 2)
		if ns == 0 {
			return false
		}
		for u := s + 1; u < r; u++ {
			cu := c.ColView(u)
			if math.Abs(mat.Dot(cs, cu)) >= (1-1e-10)*ns*mat.Norm(cu, 2) {
				return false
			}
		}
	}
	return true
}

// FitALS is the baseline: alternating least squares from Starts random
// starts (Gaussian factors from a generator seeded by (Seed, start)), keeping
// the best fit. It returns the best decomposition (Distances empty).
func FitALS(ctx context.Context, t Tensor, rank, starts int, seed uint64, maxIter int) (*Decomposition, error) {
	if err := t.check(); err != nil {
		return nil, err
	}
	// The rank of an m×n×p tensor is at most min(mn, np, mp) (common
	// practice: each slice family spans at most that many rank-one terms).
	if maxRank := min(t.M*t.N, t.N*t.P, t.M*t.P); rank <= 0 || rank > maxRank {
		return nil, fmt.Errorf("%w: rank %d, need 1 ≤ rank ≤ min(mn, np, mp) = %d", ErrShape, rank, maxRank)
	}
	var best *Decomposition
	for st := 0; st < max(starts, 1); st++ {
		rng := rand.New(rand.NewPCG(seed, uint64(st)))
		a, b, c := mat.NewDense(t.M, rank, nil), mat.NewDense(t.N, rank, nil), mat.NewDense(t.P, rank, nil)
		for _, x := range []*mat.Dense{a, b, c} {
			raw := x.RawMatrix().Data
			for i := range raw {
				raw[i] = rng.NormFloat64()
			}
		}
		it, e := als(ctx, t, a, b, c, maxIter)
		if best == nil || e < best.RelError {
			best = &Decomposition{A: a, B: b, C: c, RelError: e, Iterations: it}
		}
		if ctx.Err() != nil {
			break
		}
	}
	best.Unique = KruskalUnique(best.A, best.B, best.C)
	return best, ctx.Err()
}
