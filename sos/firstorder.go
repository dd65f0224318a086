package sos

import (
	"context"
	"fmt"
	"math"
	"time"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
	"gonum.org/v1/gonum/mat"

	"github.com/segre-lab/segre/internal/eigen"
	"github.com/segre-lab/segre/rankone"
	"github.com/segre-lab/segre/subspace"
)

// FirstOrder is a Searcher for the level-one bound (see the package doc)
// by a first-order method, for sizes the interior-point method cannot
// hold: its memory is a few dense L×L matrices (L = m·n) instead of a Schur
// complement of order about L²/4.
//
// Method: the boundary point method of J. Povh, F. Rendl, A. Wiegele ("A
// boundary point method to solve semidefinite programs", Computing 78,
// 2006), i.e. the alternating direction method of multipliers on the dual
// (J. Malick, J. Povh, F. Rendl, A. Wiegele, "Regularization methods for
// semidefinite programming", SIAM J. Optim. 20, 2009). For the level one
// relaxation, with C = P̂ and 𝒦 the symmetric matrices with T(K) = −K,
//
//	primal  max ⟨C, ρ⟩  s.t.  tr ρ = 1, T(ρ) = ρ, ρ ⪰ 0,
//	dual    min t       s.t.  Z = tI + K − C ⪰ 0, K ∈ 𝒦.
//
// The augmented Lagrangian of the dual with multiplier ρ and penalty σ,
// t − ⟨ρ, tI + K − C − Z⟩ + (σ/2)‖tI + K − C − Z‖², is minimised in (t, K)
// for fixed Z in closed form: with R = Z + C + ρ/σ, K = Π_𝒦(R) =
// (R − T(R))/2 (T is an involutive isometry, so this is the orthogonal
// projection, and I ⊥ 𝒦 because T fixes the diagonal) and
// t = (tr R − 1/σ)/L. Then, with V = tI + K − C − ρ/σ, minimising in Z ⪰ 0
// and updating the multiplier give Z = V₊ and ρ = σ(−V)₊ (Moreau's
// decomposition V = V₊ − V₋, one eigendecomposition per iteration). σ is
// adapted to balance the primal and dual residuals (a common practice of
// these methods).
//
// Any K ∈ 𝒦 proves h* ≤ λmax(C − K) + δ (the package doc's argument with
// the certificate −K), so the result does not depend on convergence: every
// so often the current K's estimate λmax(C − K) is computed, the best K is
// kept, and at the end the certificate −K is checked by Verify, exactly as
// the interior-point route's. The primal iterate ρ is rounded to a witness
// as Bound does.
type FirstOrder struct {
	// MaxIter bounds the iterations; zero means 3000.
	MaxIter int
	// Tol is the relative gap between the bound λmax(C − K) and the primal
	// value ⟨C, ρ⟩ (with ρ feasible to Tol) at which the method stops, and
	// the relative gain of the bound over 100 iterations below which it
	// stops as stagnated; zero means 1e-7.
	Tol float64
	// Progress, if set, is called at most every 200 ms with the iteration
	// and the current estimate of the bound on h* (not certified).
	Progress func(rankone.Progress)
	// Keep, if non-nil, receives the verified certificate.
	Keep *Certificate
}

var _ rankone.Searcher = (*FirstOrder)(nil)

// maxFirstOrderSize is the largest m·n FirstOrder accepts: a dense
// eigendecomposition of order m·n per iteration.
const maxFirstOrderSize = 1024

// Name returns "sos level 1 (first-order)".
func (f *FirstOrder) Name() string { return "sos level 1 (first-order)" }

// Search implements rankone.Searcher.
func (f *FirstOrder) Search(ctx context.Context, w *subspace.Subspace) (rankone.Result, error) {
	if err := rankone.CheckSettings("FirstOrder", rankone.Setting{Name: "MaxIter", Value: float64(f.MaxIter)},
		rankone.Setting{Name: "Tol", Value: f.Tol}); err != nil {
		return rankone.TrivialResult(w, f.Name()), err
	}
	begin := time.Now()
	res := startResult(w, f.Name())
	if w.Field() == subspace.Complex {
		return res, fmt.Errorf("%w: the first-order level one is real only (complex subspaces: Bound)", ErrTooLarge)
	}
	m, n := w.Rows(), w.Cols()
	L := m * n
	if L > maxFirstOrderSize {
		return res, fmt.Errorf("%w: m·n = %d (the first-order level one handles m·n ≤ %d)", ErrTooLarge, L, maxFirstOrderSize)
	}
	maxIter, tol := f.MaxIter, f.Tol
	if maxIter == 0 {
		maxIter = 3000
	}
	if tol == 0 {
		tol = 1e-7
	}
	p, _ := ProjectorBound(w)
	run := newBPM(p, n)
	var gate *rankone.Throttle
	if f.Progress != nil {
		gate = rankone.NewThrottle(f.Progress)
	}
	best, bestK := math.Inf(1), []float64(nil)
	var hist []float64 // best at each check
	var histIt []int   // and its iteration
	it := 0
	var stepTime time.Duration // the last iteration's duration
	for ; it < maxIter && ctx.Err() == nil; it++ {
		// An iteration cannot be interrupted (a dense eigendecomposition):
		// do not start one that would end after the deadline.
		if dl, ok := ctx.Deadline(); ok && time.Until(dl) < stepTime {
			break
		}
		t0 := time.Now()
		if !run.step() {
			break
		}
		stepTime = time.Since(t0)
		if it%10 == 9 {
			run.adapt()
		}
		// Checks (one eigenvalue computation each, and one for the
		// primal value) every 5 iterations for the first 50, then every 25.
		if ((it < 50 && it%5 == 4) || it%25 == 24 || it == maxIter-1) && ctx.Err() == nil {
			est := run.estimate()
			if est < best {
				best, bestK = est, append(bestK[:0], run.k...)
			}
			if gate != nil {
				gate.Report(rankone.Progress{Searcher: f.Name(), Iteration: it + 1, Estimate: best, Upper: res.Upper})
			}
			if best-run.primal() <= tol*math.Max(1, math.Abs(best)) {
				it++
				break
			}
			// Stagnation: the bound gained less than tol (relative) in
			// the last 100 iterations or more.
			hist, histIt = append(hist, best), append(histIt, it)
			j := len(hist) - 1
			for j > 0 && it-histIt[j] < 100 {
				j--
			}
			if it-histIt[j] >= 100 && hist[j]-best <= tol*math.Max(1, math.Abs(best)) {
				it++
				break
			}
		}
	}
	res.Iterations = it
	if bestK == nil {
		bestK = run.k
	}
	cert := Certificate{M: m, N: n, K: make([]float64, L*L)}
	for i, v := range bestK {
		cert.K[i] = -v
	}
	if hb, err := Verify(w, cert); err == nil {
		if lo := rankone.DistanceLower(hb); lo > 0 {
			res.Lower, res.LowerBy = lo, f.Name()
			if f.Keep != nil {
				*f.Keep = cert
			}
		}
	}
	// Rounding costs a full decomposition of order m·n, about one
	// iteration: skipped when the budget would not cover it (the witness
	// then stays the trivial one; Certify's local searches give theirs).
	if dl, ok := ctx.Deadline(); ctx.Err() == nil && (!ok || time.Until(dl) >= stepTime) {
		if x, y, ok := round(mat.NewSymDense(L, run.rho), m, n); ok {
			keepBetter(ctx, w, &res, x, y)
		}
	}
	if it >= maxIter {
		res.Status, res.Limit = rankone.LimitReached, rankone.IterationLimit
	}
	if res.LowerBy != "" && closed(res) {
		res.LowerBy = exactLabel
	}
	return finishResult(ctx, res, begin, ctx.Err())
}

// bpm is the state of the boundary point method: dense L×L row-major
// matrices C, ρ, Z, K, the partial-transpose index map and σ.
type bpm struct {
	L                int
	c, rho, z, k, v  []float64
	tp               []int // tp[a·L+b] = linear index of T(a, b)
	t, sigma         float64
	lastRp, lastRd   float64
	primalNorm, cfro float64
}

func newBPM(p *mat.SymDense, n int) *bpm {
	L := p.SymmetricDim()
	s := &bpm{L: L, c: make([]float64, L*L), rho: make([]float64, L*L), z: make([]float64, L*L),
		k: make([]float64, L*L), v: make([]float64, L*L), tp: make([]int, L*L), sigma: 1}
	for a := 0; a < L; a++ {
		for b := 0; b < L; b++ {
			s.c[a*L+b] = p.At(a, b)
			pa, pb := partner(a, b, n)
			s.tp[a*L+b] = pa*L + pb
		}
		s.rho[a*L+a] = 1 / float64(L)
	}
	for _, x := range s.c {
		s.cfro += x * x
	}
	s.cfro = math.Sqrt(s.cfro)
	return s
}

// step is one iteration (see FirstOrder); false when the
// eigendecomposition fails.
func (s *bpm) step() bool {
	L, sg := s.L, s.sigma
	r := s.v // R = Z + C + ρ/σ, then V in place
	var tr float64
	for i := range r {
		r[i] = s.z[i] + s.c[i] + s.rho[i]/sg
	}
	for a := 0; a < L; a++ {
		tr += r[a*L+a]
	}
	for i := range r {
		s.k[i] = (r[i] - r[s.tp[i]]) / 2
	}
	s.t = (tr - 1/sg) / float64(L)
	for i := range r {
		r[i] = s.k[i] - s.c[i] - s.rho[i]/sg
	}
	for a := 0; a < L; a++ {
		r[a*L+a] += s.t
	}
	vals, vecs, ok := eigen.Sym(mat.NewSymDense(L, append([]float64(nil), r...)), true)
	if !ok {
		return false
	}
	// Z = V₊, ρ_new = σ(−V)₊; the dual residual ‖tI + K − C − Z‖ equals
	// ‖ρ_old − ρ_new‖/σ.
	old := append([]float64(nil), s.rho...)
	s.z = posPart(s.z, vals, vecs, 1)
	s.rho = posPart(s.rho, vals, vecs, -sg)
	var rd float64
	for i := range old {
		d := old[i] - s.rho[i]
		rd += d * d
	}
	s.lastRd = math.Sqrt(rd) / sg
	s.lastRp = s.primalInfeas()
	return true
}

// posPart writes Σ_{sign·λ_i > 0} |scale|·(sign·λ_i) v_i v_iᵀ into dst,
// with sign the sign of scale: V₊ for scale 1, σ(−V)₊ for scale −σ.
func posPart(dst []float64, vals []float64, vecs *mat.Dense, scale float64) []float64 {
	L := len(vals)
	raw := vecs.RawMatrix()
	var cols []int
	for i, l := range vals {
		if scale*l > 0 {
			cols = append(cols, i)
		}
	}
	clear(dst)
	if len(cols) == 0 {
		return dst
	}
	// B = V_sel·diag(√(scale·λ)), dst = BBᵀ.
	b := make([]float64, L*len(cols))
	for j, c := range cols {
		f := math.Sqrt(scale * vals[c])
		for i := 0; i < L; i++ {
			b[i*len(cols)+j] = raw.Data[i*raw.Stride+c] * f
		}
	}
	out := blas64.Symmetric{N: L, Stride: L, Data: dst, Uplo: blas.Upper}
	blas64.Syrk(blas.NoTrans, 1, blas64.General{Rows: L, Cols: len(cols), Stride: len(cols), Data: b}, 0, out)
	for i := 0; i < L; i++ {
		for j := 0; j < i; j++ {
			dst[i*L+j] = dst[j*L+i]
		}
	}
	return dst
}

// primalInfeas returns ‖Π_𝒦(ρ)‖_F + |tr ρ − 1| (the violation of
// T(ρ) = ρ and tr ρ = 1).
//
// Not inlined, so that its fusable estimates stay out of Search (see
// .ci/fusion-allowed).
//
//go:noinline
func (s *bpm) primalInfeas() float64 {
	var a, tr float64
	for i, x := range s.rho {
		d := (x - s.rho[s.tp[i]]) / 2
		a += d * d
	}
	for i := 0; i < s.L; i++ {
		tr += s.rho[i*s.L+i]
	}
	return math.Sqrt(a) + math.Abs(tr-1)
}

// primal returns the value ⟨C, ρ'⟩ of a feasible point made from the
// iterate (derived here): ρ_s = (ρ + T(ρ))/2 is T-symmetric; with μ =
// max(0, −λmin(ρ_s)), ρ' = (ρ_s + μI)/(tr ρ_s + Lμ) is PSD, T-symmetric (T
// fixes I) and of trace one, so in exact arithmetic its value is at most
// the relaxation's optimum, which is at most any bound λmax(C − K): their
// difference bounds how far the bound is from optimal (a floating-point
// estimate, for the stop test only).
func (s *bpm) primal() float64 {
	L := s.L
	sym := make([]float64, L*L)
	var v, tr, ctr float64
	for i, x := range s.rho {
		sym[i] = (x + s.rho[s.tp[i]]) / 2
		v += s.c[i] * sym[i]
	}
	for i := 0; i < L; i++ {
		tr += sym[i*L+i]
		ctr += s.c[i*L+i]
	}
	vals, _, ok := eigen.Sym(mat.NewSymDense(L, sym), false)
	if !ok {
		return math.Inf(-1)
	}
	mu := math.Max(0, -vals[0])
	den := tr + float64(L)*mu
	if !(den > 0) {
		return math.Inf(-1)
	}
	return (v + mu*ctr) / den
}

// estimate returns λmax(C − K) for the current K (a floating-point
// estimate of the bound it proves; Verify proves the final one).
func (s *bpm) estimate() float64 {
	a := make([]float64, len(s.c))
	for i := range a {
		a[i] = s.c[i] - s.k[i]
	}
	vals, _, ok := eigen.Sym(mat.NewSymDense(s.L, a), false)
	if !ok {
		return math.Inf(1)
	}
	return vals[len(vals)-1]
}

// adapt rebalances σ: the primal residual falls as σ grows and the dual
// one as it shrinks (Malick et al. 2009, section 5: a common practice).
func (s *bpm) adapt() {
	rp, rd := s.lastRp, s.lastRd/math.Max(1, s.cfro)
	switch {
	case rp > 5*rd:
		s.sigma *= 1.6
	case rd > 5*rp:
		s.sigma /= 1.6
	}
}
