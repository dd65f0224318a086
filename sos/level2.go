package sos

import (
	"context"
	"fmt"
	"math"
	"sort"
	"time"

	"gonum.org/v1/gonum/mat"

	"github.com/segre-lab/segre/internal/accurate"
	"github.com/segre-lab/segre/internal/eigen"
	"github.com/segre-lab/segre/internal/sdp"
	"github.com/segre-lab/segre/internal/verified"
	"github.com/segre-lab/segre/rankone"
	"github.com/segre-lab/segre/subspace"
)

// Level two: a symmetric extension of the y side (the DPS hierarchy of
// Doherty, Parrilo, Spedalieri 2004, in its real moment form; Ling, Nie,
// Qi, Ye 2009).
//
// Coordinates. Index Sym²(R^n) by pairs p ≤ q with the exact 0/1 basis
// b_pq = e_p⊗e_q + e_q⊗e_p (p < q), b_pp = e_p⊗e_p, so y⊗y = Σ c_pq b_pq with
// c_pq = y_p y_q. For v = x⊗y⊗y the coordinates are c_(i,pq) = x_i y_p y_q,
// and with B the (exact) basis matrix, D = BᵀB is diagonal with entries 2
// (p < q) or 1, cᵀDc = ‖v‖² = 1 and h(x, y) = vᵀ(P⊗I)v = cᵀ(Bᵀ(P⊗I)B)c
// (since ‖y‖ = 1). Let Ĉ = Bᵀ(P̂⊗I)B; P ⪯ P̂ + δI gives h ≤ cᵀĈc + δ.
//
// Moments. The entry ((i,pq),(k,rs)) of ccᵀ is the monomial x_i x_k
// y_p y_q y_r y_s: entries in the same orbit (same {i, k} and same multiset
// {p, q, r, s}) are equal. The relaxation: maximise ⟨Ĉ, ρ⟩ over ρ ⪰ 0 with
// ⟨D, ρ⟩ = 1 and equal entries on each orbit. It contains level one and the
// PPT conditions of the real case (all index permutations of the moments).
//
// Certificate. For a symmetric K whose entries sum to zero over every orbit,
// cᵀKc = Σ_orbits (orbit sum)·monomial vanishes identically. In floats the
// orbit sums s_o are bounded rigorously (compensated sums), and since every
// monomial of unit vectors is at most 1 in magnitude, |cᵀKc| ≤ Σ_o |s_o|.
// Then for any t: if tD − Ĉ − K ⪰ μI (μ from the verified Cholesky test on
// the float matrix, rounding of forming it included), and ‖c‖² ≤ cᵀDc = 1,
// h ≤ t − min(μ, 0) + Σ_o|s_o| + δ + ‖Ĉ − Ĉ_exact‖.
//
// Solving. LevelTwo solves the relaxation in its moment form (the orbit
// values as the variables, level2sdp.go), block diagonal under the sign
// symmetries of P̂ (symmetry.go); LevelTwoFirstOrder solves the same form
// by the boundary point method (level2first.go). Where block structure
// comes from, and where it does not: a symmetry reduction (K. Gatermann,
// P. A. Parrilo, J. Pure Appl. Algebra 192, 2004) needs a group acting on
// the relaxation that fixes its data. The orthogonal changes of
// coordinates x ↦ Ux, y ↦ Vy act on the moments and preserve D and the
// orbit equalities, but fix Ĉ only when (U⊗V)W = W, which for a generic W
// leaves U = ±I, V = ±I, acting trivially on ρ (every row has the same
// sign). The symmetric-extension structure of DPS 2004 (the y⊗y factor
// restricted to Sym²(R^n)) is already in the coordinates, and in the real
// case the partial transposes of ρ are equal to ρ (the orbit equalities)
// rather than further PSD blocks. So a generic 6×6 instance keeps one
// block of order 126, and its gain is the moment form (2645 variables
// against the 5355 equalities of the entry form; the interior-point
// method's cost is their cube); instances with coordinate structure
// (embedded, sparse, antisymmetric) also split into blocks.

// extension holds the level-two structure of an m×n subspace.
type extension struct {
	m, n, s int       // s = n(n+1)/2
	pq      [][2]int  // pair of each Sym² index
	dim     int       // m·s
	chat    []float64 // Ĉ, dim×dim row-major
	cerr    float64   // bound on ‖Ĉ − Bᵀ(P̂⊗I)B‖ (rounding)
	delta   float64   // P ⪯ P̂ + δI
	orbit   []int     // orbit id of each upper-triangle entry (a ≤ b), index a·dim+b
	norbits int
	ph      *mat.SymDense // P̂ (for the sign symmetries of the solver)
}

func newExtension(w *subspace.Subspace, limit int) (*extension, error) {
	m, n := w.Rows(), w.Cols()
	s := n * (n + 1) / 2
	dim := m * s
	if dim > limit {
		return nil, fmt.Errorf("%w: the extension of %d×%d has order %d (limit %d)", ErrTooLarge, m, n, dim, limit)
	}
	e := &extension{m: m, n: n, s: s, dim: dim}
	for p := 0; p < n; p++ {
		for q := p; q < n; q++ {
			e.pq = append(e.pq, [2]int{p, q})
		}
	}
	ph, delta := ProjectorBound(w)
	e.delta, e.ph = delta, ph
	// terms(pq) lists the (a, b) with b_pq = Σ e_a⊗e_b.
	terms := func(t [2]int) [][2]int {
		if t[0] == t[1] {
			return [][2]int{{t[0], t[0]}}
		}
		return [][2]int{{t[0], t[1]}, {t[1], t[0]}}
	}
	e.chat = make([]float64, dim*dim)
	var errF float64
	for i := 0; i < m; i++ {
		for u, tu := range e.pq {
			for k := 0; k < m; k++ {
				for v, tv := range e.pq {
					var sum, abs float64
					cnt := 0
					for _, ab := range terms(tu) {
						for _, cd := range terms(tv) {
							if ab[1] != cd[1] {
								continue
							}
							x := ph.At(i*n+ab[0], k*n+cd[0])
							sum += x
							abs += math.Abs(x)
							cnt++
						}
					}
					e.chat[(i*s+u)*dim+k*s+v] = sum
					if cnt > 1 {
						b := accurate.MulUp(accurate.Gamma(cnt), abs)
						errF += float64(b * b)
					}
				}
			}
		}
	}
	e.cerr = accurate.SqrtUp(accurate.UpperRel(errF, dim*dim+1))
	// Orbits of the upper-triangle entries.
	type key struct {
		i, k int
		ys   [4]int
	}
	ids := map[key]int{}
	e.orbit = make([]int, dim*dim)
	for a := 0; a < dim; a++ {
		for b := a; b < dim; b++ {
			i, u := a/s, a%s
			k, v := b/s, b%s
			ys := [4]int{e.pq[u][0], e.pq[u][1], e.pq[v][0], e.pq[v][1]}
			sort.Ints(ys[:])
			kk := key{min(i, k), max(i, k), ys}
			id, ok := ids[kk]
			if !ok {
				id = len(ids)
				ids[kk] = id
			}
			e.orbit[a*dim+b] = id
		}
	}
	e.norbits = len(ids)
	return e, nil
}

func (e *extension) dval(a int) float64 {
	t := e.pq[a%e.s]
	if t[0] == t[1] {
		return 1
	}
	return 2
}

// bound proves an upper bound on h* from t and a symmetric K (dim×dim,
// row-major), as derived above.
//
// A non-nil stop can cut the verified test short (the bound stays valid,
// only looser).
func (e *extension) bound(t float64, k []float64, stop func() bool) float64 {
	dim := e.dim
	// Orbit sums of K over the full matrix (both triangles).
	accs := make([]accurate.Acc, e.norbits)
	for a := 0; a < dim; a++ {
		for b := 0; b < dim; b++ {
			lo, hi := min(a, b), max(a, b)
			accs[e.orbit[lo*dim+hi]].Add(k[a*dim+b])
		}
	}
	var resid float64
	for i := range accs {
		r, bd := accs[i].Result()
		resid = accurate.AddUp(resid, accurate.AddUp(math.Abs(r), bd))
	}
	a := mat.NewSymDense(dim, nil)
	var fro float64
	for i := 0; i < dim; i++ {
		for j := i; j < dim; j++ {
			c, kk := e.chat[i*dim+j], k[i*dim+j]
			v := -c - kk
			mag := math.Abs(c) + math.Abs(kk)
			if i == j {
				td := float64(t * e.dval(i))
				v += td
				mag += math.Abs(td)
			}
			a.SetSym(i, j, v)
			fro += float64(2 * mag * mag)
		}
	}
	// Each entry is formed with at most three roundings (the product t·d and
	// two additions), so it errs by at most γ₃ times the sum of the
	// magnitudes of its terms (not of the result: the terms may cancel).
	round := accurate.MulUp(accurate.Gamma(3), accurate.SqrtUp(accurate.UpperRel(fro, dim*dim+1)))
	mu := verified.MinEigLowerStop(a, 0, stop)
	mu = accurate.Down(mu - round)
	ub := t
	if mu < 0 {
		ub = accurate.AddUp(ub, -mu)
	}
	ub = accurate.AddUp(ub, resid)
	ub = accurate.AddUp(ub, e.delta)
	ub = accurate.AddUp(ub, e.cerr)
	return ub
}

// LevelTwo is a Searcher for the level-two relaxation (see the comment at
// the top of level2.go) by the interior-point method on its moment form,
// block diagonal under the sign symmetries of P̂ (level2sdp.go):
// certified bound from the solver's primal (the sum-of-squares side),
// witness rounded from its dual (the moment matrix) and polished. It
// handles m·n(n+1)/2 ≤ 400 with at most maxLevelTwoVars moment variables
// after the reduction (6×6 has 2645 without symmetry, 7×7 5879; 8×8 with
// 11879 is refused: LevelTwoFirstOrder serves it).
//
// The zero value is ready to use.
type LevelTwo struct {
	// MaxIter bounds the interior-point iterations; zero means 100.
	MaxIter int
	// Keep, if non-nil, receives the certificate whose verification gave
	// Lower (left unchanged when none was), for proof files.
	Keep *LevelTwoCertificate
}

// LevelTwoCertificate is the certificate of the level-two bound (see the
// comment at the top of level2.go): the number t and the symmetric matrix
// K of order m·n(n+1)/2 (row-major), indexed (i, pq) ↦ i·n(n+1)/2 + r with
// r the rank of the pair p ≤ q in the order (0,0), (0,1), …, (0,n−1),
// (1,1), … .
type LevelTwoCertificate struct {
	M, N int
	T    float64
	K    []float64
}

// maxLevelTwoVars bounds the moment variables of LevelTwo's SDP: its
// Schur complement and factor take 16 bytes times their square (576 MB
// at the bound) and a factorisation a third of their cube in flops.
const maxLevelTwoVars = 6000

// maxVerifyOrder bounds the order m·n(n+1)/2 of the level-two certificates
// VerifyLevelTwo accepts (the matrices it forms take 8·order² bytes each).
const maxVerifyOrder = 4000

// VerifyLevelTwo returns a certified upper bound on h* for the stored
// subspace from a level-two certificate, or an error if the certificate is
// malformed, not finite or not exactly symmetric (the derivation at the top
// of level2.go needs K symmetric: the orbit sums are over the whole
// matrix, the Cholesky test over its upper triangle).
func VerifyLevelTwo(w *subspace.Subspace, c LevelTwoCertificate) (float64, error) {
	m, n := w.Rows(), w.Cols()
	dim := m * n * (n + 1) / 2
	if c.M != m || c.N != n || len(c.K) != dim*dim || dim > maxVerifyOrder {
		return 1, fmt.Errorf("%w: level-two certificate of %d×%d with %d entries for %d×%d", ErrCertificate, c.M, c.N, len(c.K), m, n)
	}
	if math.IsNaN(c.T) || math.IsInf(c.T, 0) {
		return 1, fmt.Errorf("%w: t = %v", ErrCertificate, c.T)
	}
	for a := 0; a < dim; a++ {
		for b := a; b < dim; b++ {
			v := c.K[a*dim+b]
			if math.IsNaN(v) || math.IsInf(v, 0) || v != c.K[b*dim+a] {
				return 1, fmt.Errorf("%w: entry (%d, %d) not finite or not symmetric", ErrCertificate, a, b)
			}
		}
	}
	e, err := newExtension(w, maxVerifyOrder)
	if err != nil {
		return 1, err
	}
	// A bound that is not a number (an orbit sum of K overflowing) proves
	// nothing: the trivial bound 1, as Verify and VerifyComplex give.
	if hb := e.bound(c.T, c.K, nil); hb < 1 {
		return hb, nil
	}
	return 1, nil
}

var _ rankone.Searcher = (*LevelTwo)(nil)

// Name returns "sos level 2".
func (l *LevelTwo) Name() string { return "sos level 2" }

// Search implements rankone.Searcher.
func (l *LevelTwo) Search(ctx context.Context, w *subspace.Subspace) (rankone.Result, error) {
	if err := rankone.CheckSettings("LevelTwo", rankone.Setting{Name: "MaxIter", Value: float64(l.MaxIter)}); err != nil {
		return rankone.TrivialResult(w, l.Name()), err
	}
	begin := time.Now()
	m, n := w.Rows(), w.Cols()
	res := startResult(w, l.Name())
	e, err := newExtension(w, 400)
	if err != nil {
		return res, err
	}
	f := newMomentForm(e, signGroup(e.ph, m, n))
	if v := len(f.kept) - 1; v > maxLevelTwoVars {
		return res, fmt.Errorf("%w: the level-two SDP of %d×%d has %d moment variables (the interior-point method handles %d; see LevelTwoFirstOrder)",
			ErrTooLarge, m, n, v, maxLevelTwoVars)
	}
	sol, err := sdp.Solve(ctx, f.problem(), sdp.Settings{MaxIter: l.MaxIter})
	if sol == nil {
		return res, err
	}
	res.Iterations = sol.Iterations
	if sol.Status != sdp.Optimal {
		res.Status, res.Limit = rankone.LimitReached, rankone.IterationLimit
	}
	// The certificate is checked without the deadline's stop: a run cut
	// by its deadline returns its last iterate, whose certificate may
	// well prove a bound, and the check (a verified Cholesky test of order
	// at most a few hundred here) takes milliseconds; cut by the same
	// deadline it would fall back to the trivial bound.
	t, k := f.certificate(sol.X)
	hb := e.bound(t, k, nil)
	if lo := rankone.DistanceLower(hb); lo > 0 {
		res.Lower, res.LowerBy = lo, "sos level 2"
		if l.Keep != nil {
			*l.Keep = LevelTwoCertificate{M: m, N: n, T: t, K: k}
		}
	}
	if ctx.Err() == nil {
		roundLevelTwo(ctx, w, e, f.full(sol.Z), &res)
	}
	return finishResult(ctx, res, begin, err)
}

// roundLevelTwo rounds the level-two moment matrix rho (dim×dim,
// row-major) to a witness and keeps it if better. The top eigenvector c
// of ρ (Lanczos) is about x⊗(y_p y_q); its m×s reshaping has top left
// singular vector ≈ x and right vector ≈ (y_p y_q), whose symmetric n×n
// form has top eigenvector ≈ ±y. Then polish.
func roundLevelTwo(ctx context.Context, w *subspace.Subspace, e *extension, rho []float64, res *rankone.Result) {
	m, n := e.m, e.n
	top := make([]float64, e.dim)
	if _, calls := eigen.Top(eigen.SymApply(mat.NewSymDense(e.dim, rho)), top, 0, 0, 1e-10); calls == 0 {
		return
	}
	var svd mat.SVD
	if !svd.Factorize(mat.NewDense(m, e.s, top), mat.SVDThin) {
		return
	}
	var u, v mat.Dense
	svd.UTo(&u)
	svd.VTo(&v)
	x := mat.Col(nil, 0, &u)
	r := mat.NewSymDense(n, nil)
	for k, t := range e.pq {
		r.SetSym(t[0], t[1], v.At(k, 0))
	}
	y := make([]float64, n)
	tmp := mat.NewVecDense(n, nil)
	rankone.TopEigen(func(dst, src []float64) { // R² ⪰ 0: the sign of R does not matter
		tmp.MulVec(r, mat.NewVecDense(n, src))
		mat.NewVecDense(n, dst).MulVec(r, tmp)
	}, y, 0, 0, 1e-12)
	keepBetter(ctx, w, res, x, y)
}

// The largest orders of EigenBound's two forms: the k·n Gram form
// (subspace.ExtensionBound) and the dense matrix of order m·n(n+1)/2.
const (
	maxGramForm  = 4096
	maxDenseForm = 2500
)

// EigenBoundOrder returns the order of the matrix EigenBound works on for
// w: k·n (k stored vectors) when W is stored, k·n ≤ 4096 and that form
// fits in w's memory limit, else m·n(n+1)/2; ok is false when that exceeds
// 2500 (EigenBound then fails). It lets a caller predict the bound's cost.
func EigenBoundOrder(w *subspace.Subspace) (order int, ok bool) {
	st := w.Stored()
	m, n := w.Rows(), w.Cols()
	if kn := st.Count() * n; !st.Complement() && st.Count() > 0 && kn <= maxGramForm && rankone.TraceFits(w, kn) {
		return kn, true
	}
	order = m * n * (n + 1) / 2
	return order, order <= maxDenseForm
}

// EigenBound is the eigenvalue-only bound of the symmetric extension (no
// SDP): with K = 0 in the level-two argument, h* ≤ min{t : tD − Ĉ ⪰ 0} + δ
// + rounding, i.e. the largest generalised eigenvalue of (Ĉ, D), proven by
// the verified Cholesky test. It returns the certified upper bound on h*.
// It uses the k·n Gram form of subspace.ExtensionBound when W is stored
// and k·n ≤ 4096 (same value, smaller matrix), else a dense matrix of order
// m·n(n+1)/2 ≤ 2500. If ctx is done first it returns 1 (the trivial bound)
// and ctx.Err().
func EigenBound(ctx context.Context, w *subspace.Subspace) (float64, error) {
	// The two forms and their limits are EigenBoundOrder's.
	if ub, ok := ExtensionBound(ctx, w, maxGramForm); ok {
		return math.Min(ub, 1), nil
	}
	if err := ctx.Err(); err != nil {
		return 1, err
	}
	return eigenBoundDense(ctx, w)
}

// eigenBoundDense is EigenBound through the dense order-m·n(n+1)/2 matrix.
func eigenBoundDense(ctx context.Context, w *subspace.Subspace) (float64, error) {
	e, err := newExtension(w, maxDenseForm)
	if err != nil {
		return 1, err
	}
	dim := e.dim
	// Estimate the top generalised eigenvalue through D^{-1/2}ĈD^{-1/2}.
	sc := mat.NewSymDense(dim, nil)
	for i := 0; i < dim; i++ {
		for j := i; j < dim; j++ {
			sc.SetSym(i, j, e.chat[i*dim+j]/math.Sqrt(e.dval(i)*e.dval(j)))
		}
	}
	if err := ctx.Err(); err != nil {
		return 1, err
	}
	x := make([]float64, dim)
	top, _ := eigen.Top(eigen.SymApply(sc), x, 0, 0, 1e-13)
	if math.IsNaN(top) || math.IsInf(top, 0) {
		return 1, fmt.Errorf("sos: eigenvalue estimate failed")
	}
	t := top * (1 + 1e-12)
	hb := e.bound(t, make([]float64, dim*dim), func() bool { return ctx.Err() != nil })
	if err := ctx.Err(); err != nil {
		return 1, err
	}
	return math.Min(1, hb), nil
}
