package rankone

import (
	"context"
	"errors"
	"fmt"
	"math"
	"math/cmplx"
	"math/rand/v2"
	"time"

	"gonum.org/v1/gonum/mat"

	"github.com/segre-lab/segre/subspace"
)

// Errors of Points: the hypotheses under which all rank-one points can be
// computed failed, and no list is claimed to be complete.
var (
	ErrTooManyTerms = errors.New("rankone: dimension exceeds min(m, n): the rank-one points are not isolated or not computable by simultaneous diagonalisation")
	ErrDegenerate   = errors.New("rankone: repeated or ill-separated eigenvalues: points not determined")
	ErrComplex      = errors.New("rankone: complex eigenvalues: W is not spanned by real rank-one matrices")
	ErrNotRankOne   = errors.New("rankone: a computed point is not in W to the tolerance: W is not spanned by rank-one matrices")
	ErrNotSpanned   = errors.New("rankone: the hypotheses of the method do not hold")
)

// AllPoints finds every rank-one matrix x yᵀ in W (up to sign and scale)
// when they are finitely many and computable. For a complex subspace
// (subspace.NewComplex) it finds the complex points by the same two methods
// carried over to C (see ComplexPoints); over R:
//
//   - dim W = r ≤ min(m, n) and W = span{a_i b_iᵀ} with A, B of full column
//     rank: simultaneous diagonalisation (Harshman 1970; Leurgans, Ross,
//     Abel, SIAM J. Matrix Anal. Appl. 14, 1993, "Jennrich's algorithm").
//     For random elements M_k = A D_k Bᵀ of W (k = 1, 2; D_k diagonal), with
//     U and V orthonormal bases of the column and row spaces of W,
//     M̃_k = UᵀM_kV = Ã D_k B̃ᵀ with Ã = UᵀA and B̃ = VᵀB invertible r×r, so
//     M̃₁M̃₂⁻¹ = Ã (D₁D₂⁻¹) Ã⁻¹: its eigenvectors are the columns of Ã, and
//     a_i = U·(eigenvector i). Working in U and V keeps the eigenproblem of
//     order r and well scaled.
//   - m = 2 (or n = 2) and dim W = n (or m): the exact pencil method. With
//     N_1..N_n an orthonormal basis of W⊥ (computed from W's projector),
//     x yᵀ ∈ W iff K(x)y = 0 where row j of K(x) is xᵀN_j; K(x) is linear in x,
//     K(x) = x₁K₁ + x₂K₂, so the rank-one points are the real roots t of
//     det(K₁ + tK₂) = 0 (in rotated coordinates where K₂ is invertible),
//     the eigenvalues of −K₂⁻¹K₁: at most n of them (the degree of the Segre
//     variety P¹×P^{n−1} is n).
//
// Every point is then polished by alternating maximisation and certified by
// Verify; Upper ≤ AcceptTol is required. The list is complete when the hypotheses
// hold (which is checked numerically: rank of the column and row spaces,
// real and separated eigenvalues, distinct points); when they fail, an
// error says which, and any points returned still carry valid Upper bounds.
//
// The zero value is ready to use.
type AllPoints struct {
	// Seed seeds the random elements of W.
	Seed uint64
	// AcceptTol is the largest certified distance accepted for a point; zero
	// means 1e-8.
	AcceptTol float64
	// Tries is the number of random draws before giving up on degenerate
	// eigenvalues; zero means 3.
	Tries int
	// Noisy accepts column and row spaces of numerical dimension above
	// dim W (data perturbed by noise): the leading ones are used, complex
	// eigenvalue pairs contribute the real and imaginary parts of their
	// eigenvector, coinciding points are kept, the points are approximations,
	// and those farther than AcceptTol from W are reported with ErrNotRankOne.
	// False (the default) refuses all of these.
	Noisy bool
}

var _ Searcher = (*AllPoints)(nil)

// Name returns "all-points".
func (a *AllPoints) Name() string { return "all-points" }

// Search returns the best of the points as a Result (d* = 0 in exact
// arithmetic when points exist). For a complex subspace the best is by
// certified complex distance (ComplexPoints), and the Result is in the
// real coordinates, as every complex Result.
func (a *AllPoints) Search(ctx context.Context, w *subspace.Subspace) (Result, error) {
	if err := a.check(); err != nil {
		return TrivialResult(w, a.Name()), err
	}
	begin := time.Now()
	pts, err := a.Points(ctx, w)
	res := Result{FoundBy: a.Name(), Status: Converged, Starts: len(pts)}
	if len(pts) > 0 {
		res.X, res.Y, res.Upper, res.Value = pts[0].X, pts[0].Y, pts[0].Upper, pts[0].Value
	} else {
		res.X, res.Y, res.Upper = TrivialWitness(w)
	}
	if err != nil {
		res.Status = LimitReached
	}
	res.Elapsed = time.Since(begin)
	if cerr := ctx.Err(); cerr != nil {
		res.Status = Cancelled
		return res, cerr
	}
	return res, nil // a failure of the hypotheses shows in the status; the bounds are valid
}

// Points returns all rank-one points of W, best first (see AllPoints).
// For a complex subspace they are the points of ComplexPoints, in its
// order (best complex distance first), as Points in the real coordinates
// of every complex Result: Upper from Verify (the realified distance
// √((1 + d²)/2) ≥ 1/√2, see package subspace) and Value h”; the
// certified complex distances are those of ComplexPoints.
func (a *AllPoints) Points(ctx context.Context, w *subspace.Subspace) ([]Point, error) {
	if err := a.check(); err != nil {
		return nil, err
	}
	if w.Field() == subspace.Complex {
		return a.complexPoints(ctx, w)
	}
	m, n, r := w.Rows(), w.Cols(), w.Dim()
	tol := orDefaultF(a.AcceptTol, 1e-8)
	tries := orDefault(a.Tries, 3)
	var lastErr error
	for try := 0; try < tries; try++ {
		if err := ctx.Err(); err != nil {
			return nil, err
		}
		rng := rand.New(rand.NewPCG(a.Seed, uint64(try)))
		var xs [][]float64
		var err error
		switch {
		case m == 2 && r == n && n >= 2:
			xs, err = pencilPoints(w, rng, false)
		case n == 2 && r == m && m >= 2:
			xs, err = pencilPoints(w, rng, true)
		case r > min(m, n):
			return nil, fmt.Errorf("%w (dim %d, %d×%d)", ErrTooManyTerms, r, m, n)
		default:
			xs, err = jennrich(w, rng, a.Noisy)
		}
		if err != nil {
			lastErr = err
			if errors.Is(err, ErrDegenerate) || errors.Is(err, ErrComplex) && try+1 < tries {
				continue
			}
			return nil, err
		}
		pts, err := certifyPoints(ctx, w, xs, tol, a.Noisy)
		if err == nil || !errors.Is(err, ErrDegenerate) {
			return pts, err
		}
		lastErr = err
	}
	return nil, lastErr
}

// randomElement returns P_W(G) for a Gaussian m×n G, as a row-major slice.
func randomElement(w *subspace.Subspace, rng *rand.Rand) []float64 {
	g := make([]float64, w.Rows()*w.Cols())
	for i := range g {
		g[i] = rng.NormFloat64()
	}
	w.Project(g, g)
	return g
}

// jennrich returns the x-directions a_i by simultaneous diagonalisation.
func jennrich(w *subspace.Subspace, rng *rand.Rand, noisy bool) ([][]float64, error) {
	m, n, r := w.Rows(), w.Cols(), w.Dim()
	m1 := mat.NewDense(m, n, randomElement(w, rng))
	m2 := mat.NewDense(m, n, randomElement(w, rng))
	// Column space from [M1 M2], row space from [M1; M2].
	var cat, stack mat.Dense
	cat.Augment(m1, m2)
	stack.Stack(m1, m2)
	u, err := topSingular(&cat, r, true, noisy, r)
	if err != nil {
		return nil, err
	}
	v, err := topSingular(&stack, r, false, noisy, r)
	if err != nil {
		return nil, err
	}
	var t1, t2, tmp mat.Dense
	tmp.Mul(m1, v)
	t1.Mul(u.T(), &tmp)
	tmp.Reset()
	tmp.Mul(m2, v)
	t2.Mul(u.T(), &tmp)
	// N = T1·T2⁻¹ via Nᵀ = T2⁻ᵀ T1ᵀ.
	var nt mat.Dense
	if err := nt.Solve(t2.T(), t1.T()); err != nil {
		return nil, fmt.Errorf("%w: random element singular on the column space", ErrDegenerate)
	}
	vecs, err := realEigenvectors(nt.T(), noisy)
	if err != nil {
		return nil, err
	}
	xs := make([][]float64, len(vecs))
	for i, e := range vecs {
		x := make([]float64, m)
		mat.NewVecDense(m, x).MulVec(u, mat.NewVecDense(r, e))
		xs[i] = x
	}
	return xs, nil
}

// topSingular returns the r leading left (left = true) or right singular
// vectors of a, failing if σ_r is not clearly nonzero (and, unless noisy,
// if σ_{r+1} is not clearly zero). dimW is the dimension quoted in the
// errors (r over R; r/2 for a realified complex matrix, whose singular
// values come in pairs).
func topSingular(a *mat.Dense, r int, left, noisy bool, dimW int) (*mat.Dense, error) {
	var svd mat.SVD
	if !svd.Factorize(a, mat.SVDThin) {
		return nil, fmt.Errorf("%w: SVD failed", ErrNotSpanned)
	}
	s := svd.Values(nil)
	if r > len(s) || s[r-1] <= 1e-10*s[0] {
		return nil, fmt.Errorf("%w: the column or row space of W has dimension below dim W = %d", ErrNotSpanned, dimW)
	}
	if !noisy && r < len(s) && s[r] > 1e-8*s[0] {
		return nil, fmt.Errorf("%w: the column or row space of W has dimension above dim W = %d, so W is not spanned by %d rank-one matrices", ErrNotSpanned, dimW, dimW)
	}
	var q mat.Dense
	if left {
		svd.UTo(&q)
	} else {
		svd.VTo(&q)
	}
	rows, _ := q.Dims()
	return mat.DenseCopyOf(q.Slice(0, rows, 0, r)), nil
}

// realEigenvectors returns the eigenvectors of a, which must have real,
// well-separated eigenvalues. In noisy mode a complex pair (two close
// eigenvalues pushed off the real line by noise) contributes the real and
// imaginary parts of its eigenvector, which span approximately the same
// plane as the two real eigenvectors; the refinement that follows sorts
// them out.
func realEigenvectors(a mat.Matrix, noisy bool) ([][]float64, error) {
	var eg mat.Eigen
	if !eg.Factorize(a, mat.EigenRight) {
		return nil, fmt.Errorf("%w: eigen-decomposition failed", ErrDegenerate)
	}
	vals := eg.Values(nil)
	var scale float64
	for _, v := range vals {
		scale = math.Max(scale, cmplx.Abs(v))
	}
	if noisy {
		var cv mat.CDense
		eg.VectorsTo(&cv)
		r, c := cv.Dims()
		var out [][]float64
		for j := 0; j < c; j++ {
			if imag(vals[j]) < -1e-8*scale {
				continue // the conjugate of a pair already taken
			}
			re := make([]float64, r)
			im := make([]float64, r)
			for i := 0; i < r; i++ {
				re[i], im[i] = real(cv.At(i, j)), imag(cv.At(i, j))
			}
			out = append(out, re)
			if imag(vals[j]) > 1e-8*scale {
				out = append(out, im)
			}
		}
		return out, nil
	}
	for _, v := range vals {
		if math.Abs(imag(v)) > 1e-8*scale {
			return nil, fmt.Errorf("%w (eigenvalue %v)", ErrComplex, v)
		}
	}
	for i := range vals {
		for j := i + 1; j < len(vals); j++ {
			if cmplx.Abs(vals[i]-vals[j]) <= 1e-9*scale {
				return nil, fmt.Errorf("%w (eigenvalues %v and %v)", ErrDegenerate, vals[i], vals[j])
			}
		}
	}
	var cv mat.CDense
	eg.VectorsTo(&cv)
	r, c := cv.Dims()
	out := make([][]float64, c)
	for j := 0; j < c; j++ {
		e := make([]float64, r)
		for i := 0; i < r; i++ {
			e[i] = real(cv.At(i, j))
		}
		out[j] = e
	}
	return out, nil
}

// pencilPoints returns the rank-one points of a 2×n subspace of dimension n
// (swap: n×2 of dimension m, handled on the transposed side) as net-side
// directions; see AllPoints.
func pencilPoints(w *subspace.Subspace, rng *rand.Rand, swap bool) ([][]float64, error) {
	m, n := w.Rows(), w.Cols()
	L := m * n
	// An orthonormal basis of W⊥ from the complement projector applied to
	// the unit matrices: columns of I − P_W, orthonormalised by gonum's SVD.
	comp := mat.NewDense(L, L, nil)
	e := make([]float64, L)
	for l := 0; l < L; l++ {
		clear(e)
		e[l] = 1
		p := make([]float64, L)
		w.Project(p, e)
		for i := 0; i < L; i++ {
			comp.Set(i, l, e[i]-p[i])
		}
	}
	k := L - w.Dim()
	nb, err := topSingular(comp, k, true, true, k) // L×k; I − P_W has rank k exactly
	if err != nil {
		return nil, err
	}
	// K(x) rows j: xᵀN_j (N_j as a 2×p matrix on the two-dimensional side).
	p := n
	if swap {
		p = m
	}
	// A random rotation of the two coordinates makes K₂ invertible generically.
	th := 2 * math.Pi * rng.Float64()
	c, s := math.Cos(th), math.Sin(th)
	k1, k2 := mat.NewDense(k, p, nil), mat.NewDense(k, p, nil)
	for j := 0; j < k; j++ {
		for q := 0; q < p; q++ {
			var v0, v1 float64 // N_j[0,q], N_j[1,q] on the two-dimensional side
			if swap {
				v0, v1 = nb.At(q*n+0, j), nb.At(q*n+1, j)
			} else {
				v0, v1 = nb.At(0*n+q, j), nb.At(1*n+q, j)
			}
			// x = c·(cos, sin) + t·(−sin, cos) in rotated coordinates (1, t).
			k1.Set(j, q, c*v0+s*v1)
			k2.Set(j, q, -s*v0+c*v1)
		}
	}
	// det(K₁ + tK₂) = 0  ⇔  t an eigenvalue of −K₂⁻¹K₁.
	var a mat.Dense
	if err := a.Solve(k2, k1); err != nil {
		return nil, fmt.Errorf("%w: singular pencil", ErrDegenerate)
	}
	a.Scale(-1, &a)
	var eg mat.Eigen
	if !eg.Factorize(&a, mat.EigenNone) {
		return nil, fmt.Errorf("%w: eigen-decomposition failed", ErrDegenerate)
	}
	var xs [][]float64
	for _, t := range eg.Values(nil) {
		if math.Abs(imag(t)) > 1e-8*(1+cmplx.Abs(t)) {
			continue // a complex root: no real rank-one point
		}
		tr := real(t)
		xs = append(xs, []float64{c - tr*s, s + tr*c})
	}
	return xs, nil
}

// certifyPoints completes each net-side direction with the best vector on
// the other side, polishes, certifies, and checks distinctness.
func certifyPoints(ctx context.Context, w *subspace.Subspace, dirs [][]float64, tol float64, noisy bool) ([]Point, error) {
	m, n := w.Rows(), w.Cols()
	var pts []Point
	var bad error
	for i, d := range dirs {
		if err := ctx.Err(); err != nil {
			sortPoints(pts)
			return pts, err // the points so far, each with a valid Upper
		}
		x, y := make([]float64, m), make([]float64, n)
		if len(d) == m {
			copy(x, d)
			scale(x, 1/norm(x))
			TopEigen(w.HOperator(x).Apply, y, 0, 0, 1e-13)
		} else {
			copy(y, d)
			scale(y, 1/norm(y))
			TopEigen(w.GOperator(y).Apply, x, 0, 0, 1e-13)
		}
		// Polish exact points; in noisy mode keep the algebraic directions
		// (polishing could pull several of them to the same local maximum of
		// h; the caller refines the whole decomposition instead).
		var st Stats
		if !noisy {
			st, _ = (&ALS{}).Refine(ctx, w, x, y)
		} else {
			st.Value = w.Value(x, y)
		}
		u, err := Verify(w, x, y)
		if err != nil {
			u = 1
		}
		for _, p := range pts {
			if !noisy && math.Abs(dotv(p.X, x))*math.Abs(dotv(p.Y, y)) >= 1-1e-9 {
				return pts, fmt.Errorf("%w: two eigenvectors gave the same point", ErrDegenerate)
			}
		}
		if u > tol && bad == nil {
			bad = fmt.Errorf("%w: point %d has certified distance %.3g > %.3g", ErrNotRankOne, i, u, tol)
		}
		pts = append(pts, Point{X: x, Y: y, Upper: u, Value: st.Value, Start: i, Hits: 1})
	}
	sortPoints(pts)
	return pts, bad
}

func (a *AllPoints) check() error {
	return CheckSettings("AllPoints", []Setting{{"AcceptTol", float64(a.AcceptTol)}, {"Tries", float64(a.Tries)}}...)
}
