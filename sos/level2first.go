package sos

import (
	"context"
	"fmt"
	"math"
	"time"

	"github.com/segre-lab/segre/rankone"
	"github.com/segre-lab/segre/subspace"
)

// LevelTwoFirstOrder is a Searcher for the level-two bound (the comment at
// the top of level2.go) by the boundary point method of FirstOrder, for
// sizes where LevelTwo's interior-point method does not fit: its memory
// is a few vectors of the size of the moment matrix's blocks, where the
// interior-point method needs a Schur complement whose order is the
// number of orbits (about m²n⁴/48).
//
// The relaxation is momentForm's, block diagonal under the sign
// symmetries, as a conic (see bpm): C = Ĉ and D on the blocks, the classes
// are the orbits (𝓜 the orbit-constant matrices, 𝒦 those whose orbit sums
// vanish), and the start ρ⁰ is the moment matrix of the uniform measure
// on the product of the spheres, ρ⁰[(i,pq),(k,rs)] = (δ_ik/m)·(δ_pqδ_rs +
// δ_prδ_qs + δ_psδ_qr)/(n(n+2)) (the moments ∫x_ix_k = δ_ik/m and
// ∫y_py_qy_ry_s of the uniform measure on the spheres, recalled from
// memory): feasible, as a moment matrix of a measure on the product of the
// spheres (PSD, constant on the orbits), with ⟨D, ρ⁰⟩ = ∫‖x⊗y⊗y‖² = 1
// (derived here: m·(1/m)·(3n + n(n−1))/(n(n+2)) = 1), and invariant under
// every sign change, so zero between the blocks.
//
// Any K ∈ 𝒦 with tD + K − Ĉ ⪰ 0 is the level-two certificate (t, −K) of
// level2.go, and extension.bound proves the bound from it whatever its
// accuracy (its orbit sums are subtracted again and t raised to cover the
// estimated λmin, as for LevelTwo), so the result never depends on
// convergence.
//
// The zero value is ready to use.
type LevelTwoFirstOrder struct {
	// MaxIter bounds the iterations; zero means 3000.
	MaxIter int
	// Tol is FirstOrder's (the relative gap at which the method stops);
	// zero means 1e-7.
	Tol float64
	// Progress, if set, is called at most every 200 ms with the iteration
	// and the current estimate of the bound on h* (not certified).
	Progress func(rankone.Progress)
	// Keep, if non-nil, receives the certificate whose verification gave
	// Lower (left unchanged when none was).
	Keep *LevelTwoCertificate
}

var _ rankone.Searcher = (*LevelTwoFirstOrder)(nil)

// MaxLevelTwoFirstOrder is the largest order m·n(n+1)/2 LevelTwoFirstOrder
// accepts (the extension's dense matrices take 16 bytes an entry, the
// method about ten vectors of the blocks' sizes).
const MaxLevelTwoFirstOrder = 1500

// Name returns "sos level 2 (first-order)".
func (l *LevelTwoFirstOrder) Name() string { return "sos level 2 (first-order)" }

// Search implements rankone.Searcher.
func (l *LevelTwoFirstOrder) Search(ctx context.Context, w *subspace.Subspace) (rankone.Result, error) {
	if err := rankone.CheckSettings("LevelTwoFirstOrder", rankone.Setting{Name: "MaxIter", Value: float64(l.MaxIter)},
		rankone.Setting{Name: "Tol", Value: l.Tol}); err != nil {
		return rankone.TrivialResult(w, l.Name()), err
	}
	begin := time.Now()
	res := startResult(w, l.Name())
	if w.Field() == subspace.Complex {
		return res, fmt.Errorf("%w: level two is real only", ErrTooLarge)
	}
	m, n := w.Rows(), w.Cols()
	e, err := newExtension(w, MaxLevelTwoFirstOrder)
	if err != nil {
		return res, err
	}
	f := newMomentForm(e, signGroup(e.ph, m, n))
	cn := f.conic()
	run := newBPM(cn)
	run.aa = newAnderson(andersonMemory, cn.blocks)
	it, limit := run.run(ctx, firstOrderSettings{maxIter: l.MaxIter, tol: l.Tol, name: l.Name(), progress: l.Progress, upper: res.Upper})
	res.Iterations = it
	// The certificate (t, −K): K expanded, its orbit sums subtracted, t
	// from the estimate raised to cover λmin.
	k := unflatten(run.bestK, f.rows, e.dim)
	for i := range k {
		k[i] = -k[i]
	}
	f.project(k)
	t := run.best
	if math.IsNaN(t) || math.IsInf(t, 0) {
		t = 0 // no estimate: raiseT makes it cover λmin
	}
	t = raiseT(e, t, k)
	// No stop here: the run ends at the deadline, and a check cut short by
	// that same deadline would throw the run's bound away (the review
	// found it falling back to the Gershgorin bound). The check costs one
	// verified test of the extension's order, as FirstOrder's final Verify.
	hb := e.bound(t, k, nil)
	if lo := rankone.DistanceLower(hb); lo > 0 {
		res.Lower, res.LowerBy = lo, l.Name()
		if l.Keep != nil {
			*l.Keep = LevelTwoCertificate{M: m, N: n, T: t, K: k}
		}
	}
	if ctx.Err() == nil {
		roundLevelTwo(ctx, w, e, unflatten(run.rho, f.rows, e.dim), &res)
	}
	if limit {
		res.Status, res.Limit = rankone.LimitReached, rankone.IterationLimit
	}
	return finishResult(ctx, res, begin, ctx.Err())
}

// conic returns the level-two relaxation on f's blocks as a conic (see
// LevelTwoFirstOrder): flat storage block after block, the entry (p, q)
// of block b standing for (rows[b][p], rows[b][q]).
func (f *momentForm) conic() *conic {
	e := f.e
	dim := e.dim
	c := &conic{}
	total := 0
	for _, rs := range f.rows {
		c.blocks = append(c.blocks, len(rs))
		c.off = append(c.off, total)
		total += len(rs) * len(rs)
	}
	c.off = append(c.off, total)
	c.c, c.class, c.rho0 = make([]float64, total), make([]int32, total), make([]float64, total)
	ids := make([]int32, e.norbits)
	for i := range ids {
		ids[i] = -1
	}
	var sizes []float64
	nn := float64(e.n * (e.n + 2))
	delta := func(a, b int) float64 {
		if a == b {
			return 1
		}
		return 0
	}
	for b, rs := range f.rows {
		nb := len(rs)
		for p, ra := range rs {
			c.drow = append(c.drow, e.dval(ra))
			for q, rb := range rs {
				lo, hi := min(ra, rb), max(ra, rb)
				o := e.orbit[lo*dim+hi]
				if ids[o] < 0 {
					ids[o] = int32(len(sizes))
					sizes = append(sizes, 0)
				}
				id := ids[o]
				sizes[id]++
				i := c.off[b] + p*nb + q
				c.class[i] = id
				c.c[i] = e.chat[lo*dim+hi]
				x, y := e.pq[ra%e.s], e.pq[rb%e.s]
				c.rho0[i] = delta(ra/e.s, rb/e.s) / float64(e.m) *
					(delta(x[0], x[1])*delta(y[0], y[1]) + delta(x[0], y[0])*delta(x[1], y[1]) + delta(x[0], y[1])*delta(x[1], y[0])) / nn
			}
		}
	}
	c.inv = make([]float64, len(sizes))
	for k, s := range sizes {
		c.inv[k] = 1 / s
	}
	c.finish()
	return c
}
