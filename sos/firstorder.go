package sos

import (
	"context"
	"fmt"
	"math"
	"runtime"
	"sync"
	"time"

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
// semidefinite programming", SIAM J. Optim. 20, 2009), in the general form
// of bpm below with D = I and 𝓜 the T-symmetric matrices (ρ_ab = ρ_T(ab)):
//
//	primal  max ⟨C, ρ⟩  s.t.  tr ρ = 1, T(ρ) = ρ, ρ ⪰ 0,
//	dual    min t       s.t.  Z = tI + K − C ⪰ 0, K ∈ 𝒦,
//
// with C = P̂ and 𝒦 = 𝓜^⊥ the symmetric matrices with T(K) = −K, block
// diagonal under the sign symmetries of P̂ (levelOneConic). Each iteration
// is one split of a symmetric matrix into its positive and negative parts,
// computed from the eigenpairs of one sign (splitter: a tridiagonal
// reduction, inverse iteration, about 2.8(mn)³ flops instead of a full
// decomposition's 9(mn)³), and the iterations are accelerated by
// Anderson's method (anderson). The penalty σ follows the rule of bpm.
// (Before issue 14 the rule was inverted, σ grew without bound, and the
// method stalled far from the relaxation's value: at 16×16 it returned
// h ≤ 0.9686 where the relaxation's value is 0.8952.)
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
	// Tol is the relative gap between the bound λmax(C − K) and the
	// estimate of the relaxation's value from the primal iterate (see
	// bpm.primal) at which the method stops, and the relative gain of the
	// bound over 100 iterations below which it stops as stagnated; zero
	// means 1e-7.
	Tol float64
	// Progress, if set, is called at most every 200 ms with the iteration
	// and the current estimate of the bound on h* (not certified).
	Progress func(rankone.Progress)
	// Keep, if non-nil, receives the verified certificate.
	Keep *Certificate
}

var _ rankone.Searcher = (*FirstOrder)(nil)

// MaxFirstOrderSize is the largest m·n FirstOrder accepts: a
// tridiagonal reduction of order m·n per iteration (a third of a second at
// 1024 on the project's machine), memory about 30 matrices of that order
// (Anderson's history included; 600 MB at 1024).
const MaxFirstOrderSize = 1024

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
	if L > MaxFirstOrderSize {
		return res, fmt.Errorf("%w: m·n = %d (the first-order level one handles m·n ≤ %d)", ErrTooLarge, L, MaxFirstOrderSize)
	}
	p, _ := ProjectorBound(w)
	cn, rows := levelOneConic(p, m, n)
	run := newBPM(cn)
	run.aa = newAnderson(andersonMemory, cn.blocks)
	it, limit := run.run(ctx, firstOrderSettings{maxIter: f.MaxIter, tol: f.Tol, name: f.Name(), progress: f.Progress, upper: res.Upper})
	res.Iterations = it
	// The certificate is −K, made exactly T-antisymmetric (Verify checks
	// it bit for bit) as (T(K) − K)/2, which is −K in exact arithmetic for
	// K ∈ 𝒦 and exactly antisymmetric in floats ((a − b)/2 = −((b − a)/2));
	// K is exactly symmetric, and so is the result.
	kf := unflatten(run.bestK, rows, L)
	cert := Certificate{M: m, N: n, K: make([]float64, L*L)}
	for a := 0; a < L; a++ {
		for b := 0; b < L; b++ {
			pa, pb := partner(a, b, n)
			cert.K[a*L+b] = (kf[pa*L+pb] - kf[a*L+b]) / 2
		}
	}
	if hb, err := Verify(w, cert); err == nil {
		if lo := rankone.DistanceLower(hb); lo > 0 {
			res.Lower, res.LowerBy = lo, f.Name()
			if f.Keep != nil {
				*f.Keep = cert
			}
		}
	}
	if ctx.Err() == nil {
		if x, y, ok := roundTop(unflatten(run.rho, rows, L), m, n); ok {
			keepBetter(ctx, w, &res, x, y)
		}
	}
	if limit {
		res.Status, res.Limit = rankone.LimitReached, rankone.IterationLimit
	}
	if res.LowerBy != "" && closed(res) {
		res.LowerBy = exactLabel
	}
	return finishResult(ctx, res, begin, ctx.Err())
}

// roundTop is round with the top eigenvector of the L×L moment matrix rho
// (row-major) from Lanczos instead of a full decomposition.
func roundTop(rho []float64, m, n int) ([]float64, []float64, bool) {
	L := m * n
	top := make([]float64, L)
	if _, calls := eigen.Top(eigen.SymApply(mat.NewSymDense(L, rho)), top, 0, 0, 1e-10); calls == 0 {
		return nil, nil, false
	}
	return topSingularPair(top, m, n)
}

// conic is a relaxation in the form the boundary point method solves:
//
//	primal  max ⟨C, ρ⟩  s.t.  ⟨D, ρ⟩ = 1, ρ ∈ 𝓜, ρ ⪰ 0,
//	dual    min t       s.t.  Z = tD + K − C ⪰ 0, K ∈ 𝒦 = 𝓜^⊥,
//
// over block-diagonal symmetric matrices stored flat (each block in full,
// row-major, one after the other), D diagonal and positive, and 𝓜 the
// matrices constant on every class of a partition of the stored entries
// (each class closed under transposition), so that Π_𝓜 replaces every
// entry by the mean of its class and Π_𝒦 = I − Π_𝓜. (Weak duality: for
// feasible ρ and (t, K), t − ⟨C, ρ⟩ = ⟨Z, ρ⟩ ≥ 0, as ⟨K, ρ⟩ = 0 and
// ⟨D, ρ⟩ = 1.) Level one: one block of order m·n, D = I, classes the
// entries exchanged by transposition and the partial transpose. Level two:
// the blocks of momentForm, D of extension, classes the orbits.
type conic struct {
	blocks []int
	off    []int     // flat offset of each block, and the total at the end
	c      []float64 // C (flat)
	drow   []float64 // D's diagonal, by row over all blocks
	class  []int32   // class of each flat entry
	inv    []float64 // 1/(size of the class), per class
	dm     []float64 // Π_𝓜 D (flat)
	dmn2   float64   // ‖Π_𝓜 D‖²
	rho0   []float64 // the start: a feasible ρ⁰ (ρ⁰ ∈ 𝓜, ⟨D, ρ⁰⟩ = 1, ρ⁰ ⪰ 0)
}

// means sets out[k] to the mean of x over class k.
func (c *conic) means(x, out []float64) {
	clear(out)
	for i, v := range x {
		out[c.class[i]] += v
	}
	for k := range out {
		out[k] *= c.inv[k]
	}
}

// finish sets dm and dmn2 from the rest.
func (c *conic) finish() {
	nc := len(c.inv)
	sums := make([]float64, nc)
	d := make([]float64, len(c.c))
	r := 0
	for b, n := range c.blocks {
		for i := 0; i < n; i++ {
			d[c.off[b]+i*n+i] = c.drow[r]
			r++
		}
	}
	c.means(d, sums)
	c.dm = make([]float64, len(c.c))
	c.dmn2 = 0
	for i := range c.dm {
		c.dm[i] = sums[c.class[i]]
		c.dmn2 += c.dm[i] * c.dm[i]
	}
}

// levelOneConic is the level-one relaxation of P̂ (order L = m·n) as a
// conic, block diagonal under the sign symmetries of P̂ (signGroup: the
// row (i, j) has the character of x_i y_j, and an invariant ρ is zero
// between rows of different characters): D = I, classes the entries
// {(a,b), (b,a), T(a,b), T(b,a)} (an entry and its partial transpose lie
// in the same block, as both have the character of x_i x_k y_j y_l),
// ρ⁰ = I/L (the moments of the uniform measure on the product of the
// spheres). It returns the conic and the rows of each block.
func levelOneConic(p *mat.SymDense, m, n int) (*conic, [][]int) {
	L := m * n
	_, rows := characterBlocks(signGroup(p, m, n), L, func(r int, dst []int) []int {
		return append(dst, r/n, m+r%n)
	})
	c := &conic{}
	blk, pos := make([]int, L), make([]int, L)
	total := 0
	for b, rs := range rows {
		c.blocks = append(c.blocks, len(rs))
		c.off = append(c.off, total)
		total += len(rs) * len(rs)
		for q, a := range rs {
			blk[a], pos[a] = b, q
		}
	}
	c.off = append(c.off, total)
	c.c, c.class, c.rho0 = make([]float64, total), make([]int32, total), make([]float64, total)
	c.drow = make([]float64, L)
	for i := range c.class {
		c.class[i] = -1
	}
	flat := func(a, b int) int { // a and b in the same block
		nb := c.blocks[blk[a]]
		return c.off[blk[a]] + pos[a]*nb + pos[b]
	}
	raw := p.RawSymmetric()
	var sizes []float64
	row := 0
	for _, rs := range rows {
		for _, a := range rs {
			c.drow[row] = 1
			row++
			c.rho0[flat(a, a)] = 1 / float64(L)
			for _, b := range rs {
				i := flat(a, b)
				c.c[i] = raw.Data[min(a, b)*raw.Stride+max(a, b)]
				if c.class[i] >= 0 {
					continue
				}
				id := int32(len(sizes))
				pa, pb := partner(a, b, n)
				cnt := 0.0
				for _, q := range [][2]int{{a, b}, {b, a}, {pa, pb}, {pb, pa}} {
					if j := flat(q[0], q[1]); c.class[j] < 0 {
						c.class[j] = id
						cnt++
					}
				}
				sizes = append(sizes, cnt)
			}
		}
	}
	c.inv = make([]float64, len(sizes))
	for k, s := range sizes {
		c.inv[k] = 1 / s
	}
	c.finish()
	return c, rows
}

// unflatten returns the dim×dim row-major matrix of the flat block
// storage x whose blocks have the rows rows (zero between blocks).
func unflatten(x []float64, rows [][]int, dim int) []float64 {
	out := make([]float64, dim*dim)
	off := 0
	for _, rs := range rows {
		nb := len(rs)
		for p, a := range rs {
			for q, b := range rs {
				out[a*dim+b] = x[off+p*nb+q]
			}
		}
		off += nb * nb
	}
	return out
}

// bpm is the boundary point method on a conic (see FirstOrder):
// the augmented Lagrangian of the dual with multiplier ρ and penalty σ,
//
//	t − ⟨ρ, tD + K − C − Z⟩ + (σ/2)‖tD + K − C − Z‖²,
//
// is minimised in (t, K) for fixed Z in closed form: with R = Z + C + ρ/σ,
// K = Π_𝒦(R − tD) and t minimises t + (σ/2)‖Π_𝓜(tD − R)‖², i.e.
// t = (⟨Π_𝓜D, R⟩ − 1/σ)/‖Π_𝓜D‖² (for level one, D = I ∈ 𝓜 and this is
// (tr R − 1/σ)/L). Then V = tD + K − C − ρ/σ = Z − Π_𝓜R + tΠ_𝓜D, and
// minimising in Z ⪰ 0 and updating the multiplier give Z = V₊ and
// ρ = σV₋ (Moreau's decomposition V = V₊ − V₋, one split per block).
//
// σ balances the two residuals (J. Malick et al. 2009, section 5; S. Boyd
// et al., "Distributed optimization and statistical learning via the
// alternating direction method of multipliers", 2011, §3.4.1, a common
// practice): the penalised constraint is the dual one, whose residual
// r_d = ‖tD + K − C − Z‖ = ‖ρ_old − ρ_new‖/σ falls as σ grows, while the
// primal residual r_p (of ⟨D, ρ⟩ = 1 and ρ ∈ 𝓜) is a multiple of σ times
// the change of Z; so σ grows when r_d dominates and shrinks when r_p
// does.
type bpm struct {
	cn             *conic
	z, rho, k, v   []float64
	old            []float64
	sums           []float64 // per class
	t, sigma       float64
	lastRp, lastRd float64
	cfro           float64
	split          []*splitter // one per block
	bestK          []float64
	best           float64
	aa             *anderson
}

// andersonMemory is the number of differences Anderson acceleration keeps.
const andersonMemory = 20

// anderson is type-II Anderson acceleration (D. G. Anderson, "Iterative
// procedures for nonlinear integral equations", J. ACM 12, 1965; H. F.
// Walker, P. Ni, "Anderson acceleration for fixed-point iterations", SIAM
// J. Numer. Anal. 49, 2011) of the method's fixed-point map. The boundary
// point method is the map Y ↦ F(Y) = V on Y = Z − ρ/σ: the split of Y gives
// back Z = Y₊ and ρ/σ = Y₋ (Moreau), and the step computes V from them.
// With the residuals g_j = F(Y_j) − Y_j of the last iterates and the
// differences ΔG, ΔF of the g_j and F(Y_j), the next point is
// F(Y_k) − ΔFγ for the γ minimising ‖g_k − ΔGγ‖ (normal equations of at
// most andersonMemory unknowns, regularised by 10⁻¹⁰ of their trace).
// The iterates are symmetric: only the upper triangles of the blocks are
// kept (the least-squares problem is then posed in a weighted norm, which
// changes the method's γ but not its nature). The map depends on σ, so
// the history is cleared whenever σ changes. Safeguard (after the idea of
// J. Zhang, B. O'Donoghue, S. Boyd, "Globally convergent type-I Anderson
// acceleration for nonsmooth fixed-point iterations", SIAM J. Optim. 30,
// 2020): the plain map is firmly nonexpansive (the method is the
// Douglas–Rachford iteration), so its residual never grows; when the
// residual at an accelerated point exceeds twice the smallest one seen
// since the last reset, the point is rejected: the iteration resumes from
// the plain step F(Y) of the previous point (kept in fp) and the history
// is cleared. Nothing here needs to converge for the bounds to hold: every
// K the method produces is verified.
type anderson struct {
	m       int
	blocks  []int
	dg, df  [][]float64 // ring of differences (packed upper triangles)
	gram    []float64   // m×m Gram matrix of the dg
	g, f    []float64   // current residual and F, packed
	gp, fp  []float64   // the previous ones
	n, next int         // differences stored, slot of the next
	started bool
	gBest   float64 // the smallest residual norm since the last reset
	mixed   bool    // the current point is an accelerated one
	gam     []float64
}

func newAnderson(m int, blocks []int) *anderson {
	N := 0
	for _, n := range blocks {
		N += n * (n + 1) / 2
	}
	a := &anderson{m: m, blocks: blocks, gram: make([]float64, m*m), g: make([]float64, N), f: make([]float64, N),
		gp: make([]float64, N), fp: make([]float64, N), gam: make([]float64, m)}
	for i := 0; i < m; i++ {
		a.dg = append(a.dg, make([]float64, N))
		a.df = append(a.df, make([]float64, N))
	}
	return a
}

// reset clears the history.
func (a *anderson) reset() { a.n, a.next, a.started, a.mixed = 0, 0, false, false }

// halves runs fn on the two halves of [0, N) (concurrently when N is
// large); the split does not depend on GOMAXPROCS, so neither do the
// results of sums formed half by half.
func halves(N int, fn func(lo, hi, part int)) {
	mid := N / 2
	if N >= 1<<16 && runtime.GOMAXPROCS(0) >= 2 {
		var wg sync.WaitGroup
		wg.Add(1)
		go func() { defer wg.Done(); fn(0, mid, 0) }()
		fn(mid, N, 1)
		wg.Wait()
		return
	}
	fn(0, mid, 0)
	fn(mid, N, 1)
}

// mix replaces the flat f = F(Y), Y = z − ρ/σ, by the accelerated point.
func (a *anderson) mix(z, rho []float64, sg float64, f []float64) {
	// Pack the upper triangles of F and of the residual.
	q, off := 0, 0
	for _, n := range a.blocks {
		for i := 0; i < n; i++ {
			for j := i; j < n; j++ {
				x := off + i*n + j
				a.f[q] = f[x]
				a.g[q] = f[x] - (z[x] - rho[x]/sg)
				q++
			}
		}
		off += n * n
	}
	var gn float64
	for _, x := range a.g {
		gn += x * x
	}
	gn = math.Sqrt(gn)
	if a.started && a.mixed && !(gn <= 2*a.gBest) {
		// Reject the accelerated point: continue from F of the previous
		// one, with a fresh history.
		a.unpack(a.fp, f)
		a.reset()
		return
	}
	a.mixed = false
	if !a.started || gn < a.gBest {
		a.gBest = gn
	}
	if !a.started {
		a.started = true
		copy(a.gp, a.g)
		copy(a.fp, a.f)
		return
	}
	j := a.next
	k := min(a.n+1, a.m)
	var part [2][]float64
	part[0], part[1] = make([]float64, 2*k), make([]float64, 2*k)
	// The new differences, then in one pass over each stored difference
	// its products with the new one (the Gram row) and with g.
	halves(len(a.g), func(lo, hi, h int) {
		dg, df := a.dg[j][lo:hi], a.df[j][lo:hi]
		g, f, gp, fp := a.g[lo:hi], a.f[lo:hi], a.gp[lo:hi], a.fp[lo:hi]
		for i := range g {
			dg[i] = g[i] - gp[i]
			df[i] = f[i] - fp[i]
			gp[i], fp[i] = g[i], f[i]
		}
		acc := part[h]
		for p := 0; p < k; p++ {
			var s1, s2 float64
			for i, x := range a.dg[p][lo:hi] {
				s1 += x * dg[i]
				s2 += x * g[i]
			}
			acc[2*p], acc[2*p+1] = s1, s2
		}
	})
	a.next = (j + 1) % a.m
	a.n = k
	h := mat.NewSymDense(k, nil)
	rhs := mat.NewVecDense(k, nil)
	for p := 0; p < k; p++ {
		d := part[0][2*p] + part[1][2*p]
		a.gram[p*a.m+j], a.gram[j*a.m+p] = d, d
		rhs.SetVec(p, part[0][2*p+1]+part[1][2*p+1])
	}
	var tr float64
	for p := 0; p < k; p++ {
		for r := p; r < k; r++ {
			h.SetSym(p, r, a.gram[p*a.m+r])
		}
		tr += a.gram[p*a.m+p]
	}
	if !(tr > 0) {
		return
	}
	for p := 0; p < k; p++ {
		h.SetSym(p, p, h.At(p, p)+1e-10*tr/float64(k))
	}
	var ch mat.Cholesky
	var gam mat.VecDense
	if !ch.Factorize(h) || ch.SolveVecTo(&gam, rhs) != nil {
		return
	}
	for p := 0; p < k; p++ {
		c := gam.AtVec(p)
		if math.IsNaN(c) || math.IsInf(c, 0) {
			return
		}
		a.gam[p] = c
	}
	// f = F − ΔFγ, unpacked into both triangles.
	halves(len(a.f), func(lo, hi, _ int) {
		out := a.g[lo:hi] // free now: the accelerated point, packed
		copy(out, a.f[lo:hi])
		for p := 0; p < k; p++ {
			c := a.gam[p]
			for i, x := range a.df[p][lo:hi] {
				out[i] -= c * x
			}
		}
	})
	a.unpack(a.g, f)
	a.mixed = true
}

// unpack writes the packed upper triangles src into both triangles of the
// flat blocks dst.
func (a *anderson) unpack(src, dst []float64) {
	q, off := 0, 0
	for _, n := range a.blocks {
		for i := 0; i < n; i++ {
			for j := i; j < n; j++ {
				dst[off+i*n+j], dst[off+j*n+i] = src[q], src[q]
				q++
			}
		}
		off += n * n
	}
}

func newBPM(cn *conic) *bpm {
	N := len(cn.c)
	s := &bpm{cn: cn, z: make([]float64, N), rho: append([]float64(nil), cn.rho0...), k: make([]float64, N),
		v: make([]float64, N), old: make([]float64, N), sums: make([]float64, len(cn.inv)), sigma: 1,
		best: math.Inf(1)}
	for _, x := range cn.c {
		s.cfro += x * x
	}
	s.cfro = math.Sqrt(s.cfro)
	for _, n := range cn.blocks {
		s.split = append(s.split, newSplitter(n))
	}
	return s
}

// firstOrderSettings are the run's settings (zero values: defaults).
type firstOrderSettings struct {
	maxIter  int
	tol      float64
	name     string
	progress func(rankone.Progress)
	upper    float64 // the Result's Upper, for progress reports
}

// run iterates until the gap or stagnation test is met, maxIter is
// reached, ctx is done, or an iteration would end after ctx's deadline (an
// iteration cannot be interrupted). It keeps the K with the best estimated
// bound in bestK and returns the iterations and whether it stopped at
// maxIter.
func (s *bpm) run(ctx context.Context, set firstOrderSettings) (int, bool) {
	maxIter, tol := set.maxIter, set.tol
	if maxIter == 0 {
		maxIter = 3000
	}
	if tol == 0 {
		tol = 1e-7
	}
	var gate *rankone.Throttle
	if set.progress != nil {
		gate = rankone.NewThrottle(set.progress)
	}
	var hist []float64 // best at each check
	var histIt []int   // and its iteration
	it := 0
	var stepTime time.Duration
	for ; it < maxIter && ctx.Err() == nil; it++ {
		if dl, ok := ctx.Deadline(); ok && time.Until(dl) < stepTime {
			break
		}
		t0 := time.Now()
		if !s.step() {
			break
		}
		stepTime = time.Since(t0)
		// σ is rebalanced every 10 iterations for the first 200, then
		// every 100: each change clears Anderson's history, which needs
		// a steady map to pay off.
		if (it < 200 && it%10 == 9) || it%100 == 99 {
			prev := s.sigma
			s.adapt()
			if s.aa != nil && s.sigma != prev {
				s.aa.reset()
			}
		}
		// Checks (an eigenvalue computation and a split each) every 5
		// iterations for the first 50, then every 25.
		if ((it < 50 && it%5 == 4) || it%25 == 24 || it == maxIter-1) && ctx.Err() == nil {
			if est := s.estimate(); est < s.best {
				s.best, s.bestK = est, append(s.bestK[:0], s.k...)
			}
			if gate != nil {
				gate.Report(rankone.Progress{Searcher: set.name, Iteration: it + 1, Estimate: s.best, Upper: set.upper})
			}
			if s.best-s.primal() <= tol*math.Max(1, math.Abs(s.best)) {
				it++
				break
			}
			// Stagnation: the bound gained less than tol (relative) in
			// the last 100 iterations or more.
			hist, histIt = append(hist, s.best), append(histIt, it)
			j := len(hist) - 1
			for j > 0 && it-histIt[j] < 100 {
				j--
			}
			if it-histIt[j] >= 100 && hist[j]-s.best <= tol*math.Max(1, math.Abs(s.best)) {
				it++
				break
			}
		}
	}
	if s.bestK == nil {
		s.bestK = append([]float64(nil), s.k...)
	}
	return it, it >= maxIter
}

// step is one iteration (see bpm); false when a split fails even through
// the full decomposition.
func (s *bpm) step() bool {
	cn, sg := s.cn, s.sigma
	r := s.v // R = Z + C + ρ/σ
	for i := range r {
		r[i] = s.z[i] + cn.c[i] + s.rho[i]/sg
	}
	cn.means(r, s.sums)
	var dr float64
	for i, x := range cn.dm {
		dr += x * r[i]
	}
	s.t = (dr - 1/sg) / cn.dmn2
	// K = R − Π_𝓜R − t(D − Π_𝓜D); V = Z − Π_𝓜R + tΠ_𝓜D (into r).
	for i := range r {
		rm := s.sums[cn.class[i]]
		s.k[i] = r[i] - rm + s.t*cn.dm[i]
		r[i] = s.z[i] - rm + s.t*cn.dm[i]
	}
	row := 0
	for b, n := range cn.blocks {
		for i := 0; i < n; i++ {
			s.k[cn.off[b]+i*n+i] -= s.t * cn.drow[row]
			row++
		}
	}
	copy(s.old, s.rho)
	if s.aa != nil {
		s.aa.mix(s.z, s.rho, sg, r)
	}
	// ρ = σV₋, Z = V + V₋, block by block.
	for b, n := range cn.blocks {
		lo, hi := cn.off[b], cn.off[b]+n*n
		vb, neg := r[lo:hi], s.rho[lo:hi]
		if _, ok := s.split[b].negPart(vb, neg); !ok && !fullNegPart(vb, neg, n) {
			return false
		}
		for i := range neg {
			s.z[lo+i] = vb[i] + neg[i]
			neg[i] *= sg
		}
	}
	var rd float64
	for i, x := range s.old {
		d := x - s.rho[i]
		rd += d * d
	}
	s.lastRd = math.Sqrt(rd) / sg
	s.lastRp = s.primalInfeas()
	return true
}

// fullNegPart sets dst = (−V)₊ from internal/eigen's full decomposition
// (the fallback of the splitter).
func fullNegPart(v, dst []float64, n int) bool {
	vals, vecs, ok := eigen.Sym(mat.NewSymDense(n, append([]float64(nil), v...)), true)
	if !ok {
		return false
	}
	clear(dst)
	for c, l := range vals {
		if l >= 0 {
			continue
		}
		for i := 0; i < n; i++ {
			f := -l * vecs.At(i, c)
			for j := 0; j < n; j++ {
				dst[i*n+j] += f * vecs.At(j, c)
			}
		}
	}
	return true
}

// primalInfeas returns ‖Π_𝒦ρ‖_F + |⟨D, ρ⟩ − 1| (the violation of ρ ∈ 𝓜
// and ⟨D, ρ⟩ = 1).
func (s *bpm) primalInfeas() float64 {
	cn := s.cn
	cn.means(s.rho, s.sums)
	var a float64
	for i, x := range s.rho {
		d := x - s.sums[cn.class[i]]
		a += d * d
	}
	return math.Sqrt(a) + math.Abs(s.dotD(s.rho)-1)
}

// dotD returns ⟨D, x⟩ for flat x.
func (s *bpm) dotD(x []float64) float64 {
	cn := s.cn
	var t float64
	row := 0
	for b, n := range cn.blocks {
		for i := 0; i < n; i++ {
			t += cn.drow[row] * x[cn.off[b]+i*n+i]
			row++
		}
	}
	return t
}

// primal returns an estimate from below of the relaxation's value h₁ from
// the primal iterate (derived here). Let ρ̂ = ρ_M/⟨D, ρ_M⟩ with ρ_M = Π_𝓜ρ,
// a point of the affine set {ρ ∈ 𝓜, ⟨D, ρ⟩ = 1} (not necessarily PSD),
// and (t*, K*, Z*) a dual optimum. On that set t* − ⟨C, ρ̂⟩ =
// ⟨t*D + K* − C, ρ̂⟩ = ⟨Z*, ρ̂⟩ (as ⟨K*, ρ̂⟩ = 0), and with ρ̂ = P − N (P, N
// ⪰ 0, the positive and negative parts), ⟨Z*, ρ̂⟩ ≥ −⟨Z*, N⟩, so
//
//	h₁ = t* ≥ ⟨C, ρ̂⟩ − ⟨Z*, N⟩.
//
// The estimate puts the current Z for Z*, an error ⟨Z − Z*, N⟩ of second
// order (both factors vanish at convergence). It is much closer to h₁
// than the value of a feasible point made by shifting ρ_M by a multiple
// of ρ⁰ (which pays the negative part on all the L dimensions), and is
// used for the stop test only: the bound returned is proven by the
// verifiers, whatever the test decided.
func (s *bpm) primal() float64 {
	cn := s.cn
	cn.means(s.rho, s.sums)
	pm := s.v
	for i := range pm {
		pm[i] = s.sums[cn.class[i]]
	}
	nn := s.old
	for b, n := range cn.blocks {
		lo, hi := cn.off[b], cn.off[b]+n*n
		if _, ok := s.split[b].negPart(pm[lo:hi], nn[lo:hi]); !ok {
			return math.Inf(-1)
		}
	}
	var val, zn float64
	for i, x := range pm {
		val += cn.c[i] * x
		zn += s.z[i] * nn[i]
	}
	den := s.dotD(pm)
	if !(den > 0) {
		return math.Inf(-1)
	}
	return (val - zn) / den
}

// estimate returns the smallest t with tD + K − C ⪰ 0 for the current K,
// the largest over the blocks of λmax(D^{-1/2}(C − K)D^{-1/2}) (a
// floating-point estimate of the bound K proves; the verifiers prove the
// final one).
func (s *bpm) estimate() float64 {
	cn := s.cn
	a := s.v
	top := math.Inf(-1)
	row := 0
	for b, n := range cn.blocks {
		lo := cn.off[b]
		for i := 0; i < n; i++ {
			di := cn.drow[row+i]
			for j := 0; j < n; j++ {
				a[lo+i*n+j] = (cn.c[lo+i*n+j] - s.k[lo+i*n+j]) / math.Sqrt(di*cn.drow[row+j])
			}
		}
		row += n
		vals, ok := s.split[b].values(a[lo : lo+n*n])
		if !ok {
			return math.Inf(1)
		}
		top = math.Max(top, vals[n-1])
	}
	return top
}

// adapt rebalances σ (see bpm): up when the dual residual dominates, down
// when the primal one does.
func (s *bpm) adapt() {
	rp, rd := s.lastRp, s.lastRd/math.Max(1, s.cfro)
	switch {
	case rd > 5*rp:
		s.sigma *= 1.6
	case rp > 5*rd:
		s.sigma /= 1.6
	}
}
