package rankone

import (
	"context"
	"errors"
	"fmt"
	"math"
	"math/cmplx"
	"math/rand/v2"
	"sort"

	"gonum.org/v1/gonum/blas/blas64"
	"gonum.org/v1/gonum/blas/cblas128"
	"gonum.org/v1/gonum/mat"

	"github.com/segre-lab/segre/subspace"
)

// All rank-one points of a complex subspace.
//
// A complex subspace W (subspace.NewComplex) is stored as the real subspace
// W'' of 2m×2n matrices with h = 2h'' (see package subspace), and W'' holds
// no real rank-one matrix (h'' ≤ 1/2): the points of W are complex, x yᵀ
// ∈ W with x ∈ C^m, y ∈ C^n, determined up to a complex scalar (the phase
// e^{iθ} on unit vectors). ComplexPoints finds them with the two methods of
// AllPoints carried over to C. gonum has no complex eigen- or singular
// value solver; both are reached through the realification, derived here.
//
// Realification. A complex p×q matrix M = A + iB acts on (Re v, Im v) as
// the real 2p×2q matrix R(M) = [[A, −B], [B, A]]; R(MN) = R(M)R(N) and
// R(M*) = R(M)ᵀ. Let J = R(iI) = [[0, −I], [I, 0]] (multiplication by i);
// a real map F commutes with J exactly when it is R of a complex map. On
// C^{2p} = E₊ ⊕ E₋ with E₊ = {(v, −iv)} and E₋ = {(u, iu)}, J is +i on E₊
// and −i on E₋; R(M)(v, −iv) = (Mv, −iMv) and R(M)(u, iu) = (M̄u, iM̄u).
// So R(M) ≅ M ⊕ M̄: its spectrum is that of M and its conjugate, and an
// eigenvector z = (z₁, z₂) of R(M) for a simple eigenvalue lies in E₊ or in
// E₋. The map z ↦ z₁ + iz₂ sends (v, −iv) to 2v and kills E₋, so
// ρ(z) = ‖z₁ + iz₂‖/(√2‖z‖) is 1 on E₊ and 0 on E₋: the eigenvectors with
// ρ = 1 are those of M, recovered as v = z₁ + iz₂. The same holds for the
// restriction of a J-commuting F to a J-invariant subspace E in any real
// orthonormal basis Q of E, after lifting z to Qz. Random complex mixing
// makes every eigenvalue of M non-real and λ_i ≠ λ̄_j generically, so all
// 2p eigenvalues of R(M) are simple; separation is checked.
//
// Singular spaces. For a complex matrix X the singular values of R(X) are
// those of X, each twice, and the span of the top 2r left singular vectors
// of R(X) is the realification of the span of the top r of X (the singular
// subspaces of R(X) are J-invariant since R(X)J = JR(X)). No complex basis
// is needed for Jennrich: the realified one serves as Q above.

// ComplexPoint is a rank-one point x yᵀ of a complex subspace W, in the
// real coordinates of every complex Result: x = X[:m] + i X[m:] and
// y = Y[:n] + i Y[n:] (see Vectors), unit.
type ComplexPoint struct {
	X, Y []float64
	// Upper is certified: the complex distance d(x, y) = dist_F(x yᵀ, W) ≤
	// Upper (VerifyComplex).
	Upper float64
	// Value is the complex h(x, y) = 2h''(X, Y), not certified.
	Value float64
}

// Vectors returns x and y as complex vectors (subspace.ComplexWitness).
func (p ComplexPoint) Vectors() (x, y []complex128) { return subspace.ComplexWitness(p.X, p.Y) }

// ComplexPoints returns every rank-one point of a complex subspace W (up
// to a complex scalar), best certified complex distance first, under the
// hypotheses of AllPoints carried over to C, with k = w.ComplexDim():
//
//   - k ≤ min(m, n) and W = span{a_i b_iᵀ} with A ∈ C^{m×k}, B ∈ C^{n×k}
//     of full column rank: Jennrich's simultaneous diagonalisation
//     (Harshman 1970; Leurgans, Ross, Abel, SIAM J. Matrix Anal. Appl. 14,
//     1993), whose algebra holds over any field. For random elements
//     M_j = A D_j Bᵀ (complex Gaussian combinations of subspace.ComplexSpan,
//     D_j diagonal), with E_U the realified column space (top 2k left
//     singular vectors Q_U of [R(M₁) R(M₂)]) and E_V the realified row
//     space (top 2k right singular vectors Q_V of [R(M₁); R(M₂)], the
//     orthogonal complement of the common real kernel), T_j = Q_UᵀR(M_j)Q_V
//     is the matrix of R(M_j): E_V → E_U, invertible, and N = T₁T₂⁻¹ that
//     of the J-commuting map R(A D₁D₂⁻¹A⁺) on E_U. Its eigenvectors with
//     ρ = 1, lifted by Q_U, give the a_i (see the realification above).
//   - m = 2 and k = n (or n = 2 and k = m): the pencil. With N_1..N_n an
//     orthonormal basis of W⊥ in C^{2n} (Hermitian complement),
//     x yᵀ ∈ W iff ⟨N_j, x yᵀ⟩ = xᵀN̄_j y = 0 for all j, i.e. K(x)y = 0 with
//     row j of K(x) equal to xᵀN̄_j, linear in x (not conjugate-linear). In
//     the coordinates x = u₁ + t u₂ of a random unitary (u₁, u₂),
//     K(x) = P + tQ, and the points are the roots of det(P + tQ) = 0, the
//     eigenvalues of −Q⁻¹P: over C all n of them (the degree of the Segre
//     variety P¹×P^{n−1} is n), found from R(−Q⁻¹P) as above.
//
// Each direction is completed on the other side by the top eigenvector of
// H”(X) (or G”(Y)) on W”: for fixed x, h”(X, Y) = h(x, y)/2 and
// Y ↔ y = Y[:n] + iY[n:] is a bijection, so it maximises h(x, ·). It is
// then polished by alternating maximisation on W” and certified by
// VerifyComplex; Upper ≤ AcceptTol is required. The list is complete when
// the hypotheses hold, which is checked numerically as over R (the rank of
// the column and row spaces, separated eigenvalues, exactly k eigenvectors
// of the complex map, distinct points); when they fail an error says
// which, and any points returned still carry valid certified distances.
// Noisy is honoured as in Points: the leading spaces are used, the k
// eigenvectors nearest to the complex map are kept, coinciding points are
// kept, points are not polished.
//
// For a real subspace ComplexPoints returns an error wrapping ErrLength:
// treat real data over C with subspace.NewComplex(ctx,
// subspace.ComplexFromReal(b), opt).
func (a *AllPoints) ComplexPoints(ctx context.Context, w *subspace.Subspace) ([]ComplexPoint, error) {
	if err := a.check(); err != nil {
		return nil, err
	}
	if w.Field() != subspace.Complex {
		return nil, fmt.Errorf("%w: ComplexPoints of a real subspace", ErrLength)
	}
	m, n := w.ComplexShape()
	r := w.ComplexDim()
	tol := orDefaultF(a.AcceptTol, 1e-8)
	tries := orDefault(a.Tries, 3)
	span := w.ComplexSpan()
	if span.Count != r {
		return nil, fmt.Errorf("%w: %d complex matrices span W of complex dimension %d", ErrNotSpanned, span.Count, r)
	}
	var lastErr error
	for try := 0; try < tries; try++ {
		if err := ctx.Err(); err != nil {
			return nil, err
		}
		rng := rand.New(rand.NewPCG(a.Seed, uint64(try)))
		var dirs [][]complex128
		var err error
		ySide := false
		switch {
		case m == 2 && r == n && n >= 2:
			dirs, err = complexPencil(span, rng, false)
		case n == 2 && r == m && m >= 2:
			dirs, err = complexPencil(span, rng, true)
			ySide = true
		case r > min(m, n):
			return nil, fmt.Errorf("%w (complex dim %d, %d×%d)", ErrTooManyTerms, r, m, n)
		default:
			dirs, err = complexJennrich(span, rng, a.Noisy)
		}
		if err != nil {
			lastErr = err
			if errors.Is(err, ErrDegenerate) {
				continue
			}
			return nil, err
		}
		pts, err := certifyComplexPoints(ctx, w, dirs, ySide, tol, a.Noisy)
		if err == nil || !errors.Is(err, ErrDegenerate) {
			return pts, err
		}
		lastErr = err
	}
	return nil, lastErr
}

// complexPoints returns the complex points of w as Points in the real
// coordinates, in ComplexPoints' order, Upper from Verify (the realified
// distance, as in every complex Result) and Value h”.
func (a *AllPoints) complexPoints(ctx context.Context, w *subspace.Subspace) ([]Point, error) {
	cpts, err := a.ComplexPoints(ctx, w)
	if cpts == nil {
		return nil, err
	}
	out := make([]Point, len(cpts))
	for i, p := range cpts {
		u, verr := Verify(w, p.X, p.Y)
		if verr != nil {
			u = 1
		}
		out[i] = Point{X: p.X, Y: p.Y, Upper: u, Value: p.Value / 2, Start: i, Hits: 1}
	}
	return out, err
}

func cvec(v []complex128) cblas128.Vector { return cblas128.Vector{N: len(v), Data: v, Inc: 1} }

// randomComplexElement returns Σ_t g_t B_t for the matrices B_t of span and
// complex Gaussian g_t (a random element of W, row-major m×n).
func randomComplexElement(span subspace.ComplexBasis, rng *rand.Rand) []complex128 {
	L := span.Rows * span.Cols
	out := make([]complex128, L)
	for t := 0; t < span.Count; t++ {
		g := complex(rng.NormFloat64(), rng.NormFloat64())
		cblas128.Axpy(g, cvec(span.Data[t*L:(t+1)*L]), cvec(out))
	}
	return out
}

// realified returns R(M) = [[Re M, −Im M], [Im M, Re M]] of a row-major
// complex p×q matrix.
func realified(z []complex128, p, q int) *mat.Dense {
	out := mat.NewDense(2*p, 2*q, nil)
	for i := 0; i < p; i++ {
		for j := 0; j < q; j++ {
			v := z[i*q+j]
			out.Set(i, j, real(v))
			out.Set(i, q+j, -imag(v))
			out.Set(p+i, j, imag(v))
			out.Set(p+i, q+j, real(v))
		}
	}
	return out
}

// complexJennrich returns the x-directions a_i of W = span (see
// ComplexPoints).
func complexJennrich(span subspace.ComplexBasis, rng *rand.Rand, noisy bool) ([][]complex128, error) {
	m, n, r := span.Rows, span.Cols, span.Count
	r1 := realified(randomComplexElement(span, rng), m, n)
	r2 := realified(randomComplexElement(span, rng), m, n)
	var cat, stack mat.Dense
	cat.Augment(r1, r2)
	stack.Stack(r1, r2)
	qu, err := topSingular(&cat, 2*r, true, noisy, r)
	if err != nil {
		return nil, err
	}
	qv, err := topSingular(&stack, 2*r, false, noisy, r)
	if err != nil {
		return nil, err
	}
	var t1, t2, tmp mat.Dense
	tmp.Mul(r1, qv)
	t1.Mul(qu.T(), &tmp)
	tmp.Reset()
	tmp.Mul(r2, qv)
	t2.Mul(qu.T(), &tmp)
	// N = T1·T2⁻¹ via Nᵀ = T2⁻ᵀ T1ᵀ.
	var nt mat.Dense
	if err := nt.Solve(t2.T(), t1.T()); err != nil {
		return nil, fmt.Errorf("%w: random element singular on the column space", ErrDegenerate)
	}
	vecs, _, err := complexEigen(nt.T(), qu, r, noisy)
	return vecs, err
}

// complexEigen splits the eigenvectors of the real 2p×2p matrix a, the
// realification of a complex map in the orthonormal basis lift (2q×2p;
// nil for the identity, q = p), into those of the map and of its
// conjugate by ρ (see the notes above) and returns the want eigenvectors
// of the map, lifted to C^q as z₁ + iz₂, with their eigenvalues. Unless
// noisy, all 2p eigenvalues must be separated and exactly want of the
// eigenvectors must have ρ > 1/2.
func complexEigen(a mat.Matrix, lift *mat.Dense, want int, noisy bool) ([][]complex128, []complex128, error) {
	var eg mat.Eigen
	if !eg.Factorize(a, mat.EigenRight) {
		return nil, nil, fmt.Errorf("%w: eigen-decomposition failed", ErrDegenerate)
	}
	vals := eg.Values(nil)
	var scale float64
	for _, v := range vals {
		scale = math.Max(scale, cmplx.Abs(v))
	}
	if !(scale > 0) || math.IsInf(scale, 0) {
		return nil, nil, fmt.Errorf("%w: eigenvalues %v", ErrDegenerate, vals)
	}
	if !noisy {
		for i := range vals {
			for j := i + 1; j < len(vals); j++ {
				if cmplx.Abs(vals[i]-vals[j]) <= 1e-9*scale {
					return nil, nil, fmt.Errorf("%w (eigenvalues %v and %v)", ErrDegenerate, vals[i], vals[j])
				}
			}
		}
	}
	var cv mat.CDense
	eg.VectorsTo(&cv)
	rows, cols := cv.Dims()
	q := rows / 2
	if lift != nil {
		lr, _ := lift.Dims()
		q = lr / 2
	}
	type cand struct {
		v   []complex128
		rho float64
		val complex128
	}
	cands := make([]cand, cols)
	zr, zi := make([]float64, rows), make([]float64, rows)
	for j := 0; j < cols; j++ {
		for i := 0; i < rows; i++ {
			z := cv.At(i, j)
			zr[i], zi[i] = real(z), imag(z)
		}
		hr, hi := zr, zi
		if lift != nil {
			hr, hi = make([]float64, 2*q), make([]float64, 2*q)
			mat.NewVecDense(2*q, hr).MulVec(lift, mat.NewVecDense(rows, zr))
			mat.NewVecDense(2*q, hi).MulVec(lift, mat.NewVecDense(rows, zi))
		}
		v := make([]complex128, q)
		vr, vi := make([]float64, q), make([]float64, q)
		for i := 0; i < q; i++ {
			// z₁ + iz₂ with z₁ = hr[:q] + i·hi[:q], z₂ = hr[q:] + i·hi[q:].
			vr[i], vi[i] = hr[i]-hi[q+i], hi[i]+hr[q+i]
			v[i] = complex(vr[i], vi[i])
		}
		nz := math.Hypot(nrm2(hr), nrm2(hi))
		rho := math.Hypot(nrm2(vr), nrm2(vi)) / (math.Sqrt2 * nz)
		if !(nz > 0) {
			rho = 0
		}
		cands[j] = cand{v, rho, vals[j]}
	}
	sort.SliceStable(cands, func(i, j int) bool { return cands[i].rho > cands[j].rho })
	if !noisy {
		above := 0
		for _, c := range cands {
			if c.rho > 0.5 {
				above++
			}
		}
		if above != want {
			return nil, nil, fmt.Errorf("%w: %d of %d eigenvectors belong to the complex map, want %d", ErrDegenerate, above, cols, want)
		}
	}
	if want > len(cands) {
		return nil, nil, fmt.Errorf("%w: %d eigenvectors, want %d", ErrDegenerate, len(cands), want)
	}
	vecs, ev := make([][]complex128, want), make([]complex128, want)
	for i := 0; i < want; i++ {
		vecs[i], ev[i] = cands[i].v, cands[i].val
	}
	return vecs, ev, nil
}

func nrm2(v []float64) float64 { return blas64.Nrm2(blas64.Vector{N: len(v), Data: v, Inc: 1}) }

// complexPencil returns the points of a 2×n complex subspace of dimension
// n (swap: m×2 of dimension m) as directions on the two-dimensional side;
// see ComplexPoints.
func complexPencil(span subspace.ComplexBasis, rng *rand.Rand, swap bool) ([][]complex128, error) {
	m, n := span.Rows, span.Cols
	L := m * n
	comp := complexComplement(span)
	p := n
	if swap {
		p = m
	}
	if len(comp) != p {
		return nil, fmt.Errorf("%w: W⊥ of dimension %d, want %d", ErrNotSpanned, len(comp), p)
	}
	// A random unitary (u₁, u₂) = ((α, β), (−β̄, ᾱ)) makes Q invertible
	// generically.
	al, be := complex(rng.NormFloat64(), rng.NormFloat64()), complex(rng.NormFloat64(), rng.NormFloat64())
	s := math.Hypot(cmplx.Abs(al), cmplx.Abs(be))
	al, be = complex(real(al)/s, imag(al)/s), complex(real(be)/s, imag(be)/s)
	u1 := []complex128{al, be}
	u2 := []complex128{-cmplx.Conj(be), cmplx.Conj(al)}
	// K(u)[j, ·] = Σ_a u_a N̄_j[a, ·] (swap: N̄_j[·, a]).
	kOf := func(u []complex128) []complex128 {
		k := make([]complex128, p*p)
		for j, nj := range comp {
			conj := make([]complex128, L)
			for l, z := range nj {
				conj[l] = cmplx.Conj(z)
			}
			row := cvec(k[j*p : (j+1)*p])
			for a := 0; a < 2; a++ {
				side := cblas128.Vector{N: p, Data: conj[a*n:], Inc: 1}
				if swap {
					side = cblas128.Vector{N: p, Data: conj[a:], Inc: 2}
				}
				cblas128.Axpy(u[a], side, row)
			}
		}
		return k
	}
	rp, rq := realified(kOf(u1), p, p), realified(kOf(u2), p, p)
	// det(P + tQ) = 0  ⇔  t an eigenvalue of −Q⁻¹P; R(−Q⁻¹P) = −R(Q)⁻¹R(P).
	var am mat.Dense
	if err := am.Solve(rq, rp); err != nil {
		return nil, fmt.Errorf("%w: singular pencil", ErrDegenerate)
	}
	am.Scale(-1, &am)
	_, ts, err := complexEigen(&am, nil, p, false)
	if err != nil {
		return nil, err
	}
	dirs := make([][]complex128, len(ts))
	for i, t := range ts {
		x := append([]complex128(nil), u1...)
		cblas128.Axpy(t, cvec(u2), cvec(x))
		dirs[i] = x
	}
	return dirs, nil
}

// complexComplement returns an orthonormal basis of the Hermitian
// orthogonal complement of the (orthonormal) matrices of span in C^{mn}:
// the unit vectors e_l, orthogonalised against span twice, then picked by
// modified Gram–Schmidt with column pivoting (mn − k of them).
func complexComplement(span subspace.ComplexBasis) [][]complex128 {
	L := span.Rows * span.Cols
	prior := make([][]complex128, span.Count)
	for t := range prior {
		prior[t] = span.Data[t*L : (t+1)*L]
	}
	cand := make([][]complex128, L)
	for l := range cand {
		e := make([]complex128, L)
		e[l] = 1
		for pass := 0; pass < 2; pass++ {
			for _, u := range prior {
				cblas128.Axpy(-cblas128.Dotc(cvec(u), cvec(e)), cvec(u), cvec(e))
			}
		}
		cand[l] = e
	}
	want := L - span.Count
	used := make([]bool, L)
	var q [][]complex128
	for len(q) < want {
		best, bestNorm := -1, 0.0
		for t, v := range cand {
			if !used[t] {
				if nv := cblas128.Nrm2(cvec(v)); nv > bestNorm {
					best, bestNorm = t, nv
				}
			}
		}
		if best < 0 {
			break
		}
		used[best] = true
		v := cand[best]
		for _, u := range append(prior[:len(prior):len(prior)], q...) {
			cblas128.Axpy(-cblas128.Dotc(cvec(u), cvec(v)), cvec(u), cvec(v))
		}
		nv := cblas128.Nrm2(cvec(v))
		if nv == 0 {
			continue
		}
		for l, z := range v {
			v[l] = complex(real(z)/nv, imag(z)/nv)
		}
		q = append(q, v)
		for t, c := range cand {
			if !used[t] {
				cblas128.Axpy(-cblas128.Dotc(cvec(v), cvec(c)), cvec(v), cvec(c))
			}
		}
	}
	return q
}

// cinner returns the Hermitian inner product Σ conj(a_i) b_i of two
// complex vectors given in real coordinates (re, im).
func cinner(a, b []float64) complex128 {
	h := len(a) / 2
	ar, ai, br, bi := a[:h], a[h:], b[:h], b[h:]
	return complex(dotv(ar, br)+dotv(ai, bi), dotv(ar, bi)-dotv(ai, br))
}

// certifyComplexPoints completes each direction (on the y side when
// ySide) with the best vector on the other side, polishes, certifies by
// VerifyComplex and checks distinctness (see ComplexPoints).
func certifyComplexPoints(ctx context.Context, w *subspace.Subspace, dirs [][]complex128, ySide bool, tol float64, noisy bool) ([]ComplexPoint, error) {
	var pts []ComplexPoint
	var bad error
	for i, d := range dirs {
		if err := ctx.Err(); err != nil {
			sortComplexPoints(pts)
			return pts, err // the points so far, each with a valid Upper
		}
		x, y := make([]float64, w.Rows()), make([]float64, w.Cols())
		side, other := x, y
		if ySide {
			side, other = y, x
		}
		h := len(d)
		for l, z := range d {
			side[l], side[h+l] = real(z), imag(z)
		}
		nd := norm(side)
		if !(nd > 0) || math.IsInf(nd, 0) {
			return pts, fmt.Errorf("%w: direction %d is zero or not finite", ErrDegenerate, i)
		}
		scale(side, 1/nd)
		if ySide {
			TopEigen(w.GOperator(side).Apply, other, 0, 0, 1e-13)
		} else {
			TopEigen(w.HOperator(side).Apply, other, 0, 0, 1e-13)
		}
		if !noisy {
			(&ALS{}).Refine(ctx, w, x, y)
		}
		u, err := VerifyComplex(w, x, y)
		if err != nil {
			u = 1
		}
		if !noisy {
			for _, p := range pts {
				if cmplx.Abs(cinner(p.X, x))*cmplx.Abs(cinner(p.Y, y)) >= 1-1e-9 {
					return pts, fmt.Errorf("%w: two eigenvectors gave the same point", ErrDegenerate)
				}
			}
		}
		if u > tol && bad == nil {
			bad = fmt.Errorf("%w: point %d has certified complex distance %.3g > %.3g", ErrNotRankOne, i, u, tol)
		}
		pts = append(pts, ComplexPoint{X: x, Y: y, Upper: u, Value: 2 * w.Value(x, y)})
	}
	sortComplexPoints(pts)
	return pts, bad
}

func sortComplexPoints(p []ComplexPoint) {
	sort.SliceStable(p, func(i, j int) bool { return p[i].Upper < p[j].Upper })
}
