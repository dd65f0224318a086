package sdp

import (
	"context"
	"math"

	"gonum.org/v1/gonum/mat"
)

// hkm is the state of one Solve run: the problem in the forms the
// iteration reads, the iterate (X, y, Z) block by block, the quantities of
// the current iteration that its steps share, and the best iterate
// recorded so far. Each method below is one step of an iteration, called
// by Solve in order.
type hkm struct {
	p       Problem
	k       int
	order   int // n, the sum of the block orders
	maxIter int
	tol     float64

	blocks []*block
	sp     *sparse   // the constraints indexed by block, for the Schur complement
	bn, cn float64   // ‖b‖ and ‖C‖_F, the scales of the infeasibility measures
	alpha  float64   // the starting X = Z = αI
	y      []float64 // the dual iterate

	// Set by the steps of the current iteration.
	rp      []float64 // b − A(X)
	m       []float64 // the Schur complement, upper triangle, row-major k×k
	rowCost []float64 // prefix sums of the Schur rows' work (parallel split)
	mch     chol      // its factor, storage reused across iterations
	mu      float64   // ⟨X, Z⟩/n
	dy      []float64 // Δy of the last direction
	dya     []float64 // Δy of the predictor (kept for reuse of the buffer)

	sol  *Solution // the current iterate as last recorded
	best *Solution // the iterate with the smallest worst measure
}

// block holds one diagonal block of every matrix of the iteration, each
// stored in full (n×n row-major, both triangles; see dense.go).
type block struct {
	n        int
	c        []float64 // C
	x, z     []float64 // the iterate
	rd       []float64 // ΣyA − C − Z
	w        []float64 // Z⁻¹
	vx, vz   []float64 // U⁻¹ for the upper Cholesky factors U of X and Z
	xok      bool      // X was numerically positive definite
	g        []float64 // sym(Z⁻¹ Rd X), shared by predictor and corrector
	r        []float64 // the symmetric R of the current direction
	corr     []float64 // sym(Z⁻¹ ΔZ_a ΔX_a), Mehrotra's second-order term
	dxa, dza []float64 // the predictor's direction
	dx, dz   []float64 // the corrector's direction
	t1, t2   []float64 // scratch
	pr       product   // packed operands of the block's products
}

func newBlock(n int) *block {
	buf := make([]float64, 16*n*n)
	next := func() []float64 {
		s := buf[: n*n : n*n]
		buf = buf[n*n:]
		return s
	}
	return &block{n: n, c: next(), x: next(), z: next(), rd: next(), w: next(), vx: next(), vz: next(),
		g: next(), r: next(), corr: next(), dxa: next(), dza: next(), dx: next(), dz: next(),
		t1: next(), t2: next()}
}

// newHKM sets up the run for a checked problem: the defaults of set, the
// dense blocks of C, the constraints indexed by block, the data norms, and
// the infeasible start X = Z = αI, y = 0 with α = max(10, √n·max(‖b‖, ‖C‖_F)).
func newHKM(p Problem, set Settings) *hkm {
	k := len(p.A)
	s := &hkm{p: p, k: k, order: p.Order(), maxIter: set.MaxIter, tol: set.Tol}
	if s.maxIter <= 0 {
		s.maxIter = 100
	}
	if s.tol <= 0 {
		s.tol = 1e-9
	}
	s.blocks = make([]*block, len(p.Blocks))
	for b, n := range p.Blocks {
		s.blocks[b] = newBlock(n)
	}
	for _, e := range p.C {
		bl := s.blocks[e.Block]
		bl.c[e.I*bl.n+e.J] += e.V
		if e.I != e.J {
			bl.c[e.J*bl.n+e.I] += e.V
		}
	}
	s.sp = newSparse(len(p.Blocks), p.A)
	var bn, cn float64
	for _, v := range p.B {
		bn += v * v
	}
	for _, bl := range s.blocks {
		cn += frob2(bl.c)
	}
	s.bn, s.cn = math.Sqrt(bn), math.Sqrt(cn)
	// Infeasible start scaled to the data.
	s.alpha = math.Max(10, math.Sqrt(float64(s.order))*math.Max(s.bn, s.cn))
	for _, bl := range s.blocks {
		for i := 0; i < bl.n; i++ {
			bl.x[i*bl.n+i] = s.alpha
			bl.z[i*bl.n+i] = s.alpha
		}
	}
	s.y = make([]float64, k)
	s.rp = make([]float64, k)
	s.dy = make([]float64, k)
	s.dya = make([]float64, k)
	s.sol = &Solution{Status: IterationLimit}
	return s
}

// inner returns ⟨A, S⟩ for the sparse A and the blocks S(bl) (full
// storage, not necessarily symmetric).
func (s *hkm) inner(a []Entry, get func(*block) []float64) float64 {
	var t float64
	for _, e := range a {
		bl := s.blocks[e.Block]
		m, n := get(bl), bl.n
		if e.I == e.J {
			t += e.V * m[e.I*n+e.I]
		} else {
			t += e.V * (m[e.I*n+e.J] + m[e.J*n+e.I])
		}
	}
	return t
}

// adjoint sets dst(bl) = Σ_i v_i A_i on every block.
func (s *hkm) adjoint(v []float64, dst func(*block) []float64) {
	for _, bl := range s.blocks {
		clear(dst(bl))
	}
	for i, a := range s.p.A {
		for _, e := range a {
			bl := s.blocks[e.Block]
			d, n := dst(bl), bl.n
			d[e.I*n+e.J] += v[i] * e.V
			if e.I != e.J {
				d[e.J*n+e.I] += v[i] * e.V
			}
		}
	}
}

// residuals sets the primal residual rp = b − A(X) and the dual residual
// Rd = ΣyA − C − Z of the current iterate.
func (s *hkm) residuals() {
	for i, a := range s.p.A {
		s.rp[i] = s.p.B[i] - s.inner(a, func(b *block) []float64 { return b.x })
	}
	s.adjoint(s.y, func(b *block) []float64 { return b.rd })
	for _, bl := range s.blocks {
		for i := range bl.rd {
			bl.rd[i] = bl.rd[i] - bl.c[i] - bl.z[i]
		}
	}
}

// record writes the current iterate (fresh copies of its blocks), its
// objectives and its measures into s.sol, with it as the iteration count.
func (s *hkm) record(it int) {
	sol := s.sol
	sol.X, sol.Z = make([]*mat.SymDense, len(s.blocks)), make([]*mat.SymDense, len(s.blocks))
	var primal float64
	for b, bl := range s.blocks {
		sol.X[b] = mat.NewSymDense(bl.n, append([]float64(nil), bl.x...))
		sol.Z[b] = mat.NewSymDense(bl.n, append([]float64(nil), bl.z...))
		primal += dot(bl.c, bl.x)
	}
	sol.Y = append([]float64(nil), s.y...)
	sol.Primal = primal
	var d float64
	for i, v := range s.p.B {
		d += v * s.y[i]
	}
	sol.Dual = d
	sol.RelGap = math.Abs(sol.Primal-sol.Dual) / (1 + math.Abs(sol.Primal) + math.Abs(sol.Dual))
	var rp float64
	for i, a := range s.p.A {
		r := s.p.B[i] - s.inner(a, func(b *block) []float64 { return b.x })
		rp += r * r
	}
	sol.PrimalInfeas = math.Sqrt(rp) / (1 + s.bn)
	// The dual residual, formed afresh in the scratch t1 (residuals may
	// not have run for this iterate).
	s.adjoint(s.y, func(b *block) []float64 { return b.t1 })
	var rd float64
	for _, bl := range s.blocks {
		for i, v := range bl.t1 {
			r := v - bl.c[i] - bl.z[i]
			rd += r * r
		}
	}
	sol.DualInfeas = math.Sqrt(rd) / (1 + s.cn)
	sol.Iterations = it
}

// cancelled returns the current iterate, recorded at iteration it, with
// status Cancelled and the context's error.
func (s *hkm) cancelled(it int, err error) (*Solution, error) {
	s.sol.Status = Cancelled
	s.record(it)
	return s.sol, err
}

// numericalStop returns the better of the current and the best iterate
// with status NumericalLimit (see the package function numericalStop).
func (s *hkm) numericalStop() *Solution {
	return numericalStop(s.sol, s.best)
}

// stopTest applies the stopping rules to the recorded iterate, in order:
// every measure within the tolerance (Optimal); past the attainable
// accuracy, iterates ten times worse than the best one, which is returned
// (Optimal if within ten times the tolerance, IterationLimit otherwise);
// iterates diverging beyond 10¹²·(1+α) in Frobenius norm, the sign of
// primal or dual infeasibility (Infeasible). It keeps the best iterate on
// the way and returns the solution to hand back and whether the run ends.
func (s *hkm) stopTest() (*Solution, bool) {
	sol := s.sol
	if measure(sol) <= s.tol {
		sol.Status = Optimal
		return sol, true
	}
	if s.best == nil || measure(sol) < measure(s.best) {
		cp := *sol
		s.best = &cp
	} else if measure(s.best) <= 1e3*s.tol && measure(sol) > 10*measure(s.best) {
		// Past the attainable accuracy the iterates degrade: return the best.
		s.best.Status = Optimal
		if measure(s.best) > 10*s.tol {
			s.best.Status = IterationLimit
		}
		return s.best, true
	}
	var xn, zn float64
	for _, bl := range s.blocks {
		xn += frob2(bl.x)
		zn += frob2(bl.z)
	}
	if math.Sqrt(xn) > 1e12*(1+s.alpha) || math.Sqrt(zn) > 1e12*(1+s.alpha) {
		sol.Status = Infeasible
		return sol, true
	}
	return nil, false
}

// factorIterate sets the duality measure μ = ⟨X, Z⟩/n, the inverses
// V = U⁻¹ of the upper Cholesky factors of X and Z (that of X may fail:
// the primal steps are then zero), Z⁻¹ = V_zV_zᵀ, and G = sym(Z⁻¹ Rd X),
// the part of the search direction that predictor and corrector share. It
// reports false when Z is not numerically positive definite.
func (s *hkm) factorIterate() bool {
	var xz float64
	for _, bl := range s.blocks {
		xz += dot(bl.x, bl.z)
	}
	s.mu = xz / float64(s.order)
	for _, bl := range s.blocks {
		n := bl.n
		if !factorUpper(n, bl.z, bl.vz) || !inverseFactor(n, bl.vz, bl.vz) {
			return false
		}
		bl.pr.gemm(n, false, bl.vz, true, bl.vz, bl.w)
		symPart(n, bl.w, bl.w)
		bl.xok = factorUpper(n, bl.x, bl.vx) && inverseFactor(n, bl.vx, bl.vx)
		bl.pr.mulSym3(n, bl.g, bl.w, bl.rd, bl.x, bl.t1, bl.t2)
	}
	return true
}

// factorSchur factors the Schur complement into s.mch, regularising its
// diagonal by 1e-14, then 1e-12, then 1e-10 times its largest diagonal
// entry (cumulatively) when the plain factorisation fails. It reports false
// when all of them fail, and ctx's error when the factorisation was
// cancelled.
func (s *hkm) factorSchur(ctx context.Context) (bool, error) {
	k := s.k
	mraw := s.m[:k*k]
	ok, err := s.mch.factor(ctx, mraw, k)
	if err != nil || ok {
		return ok, err
	}
	// Near the optimum M becomes ill-conditioned: regularise its
	// diagonal slightly (this only perturbs the search direction).
	var dmax float64
	for i := 0; i < k; i++ {
		dmax = math.Max(dmax, mraw[i*k+i])
	}
	for _, eps := range []float64{1e-14, 1e-12, 1e-10} {
		for i := 0; i < k; i++ {
			mraw[i*k+i] += eps * dmax
		}
		if ok, err = s.mch.factor(ctx, mraw, k); err != nil || ok {
			return ok, err
		}
	}
	return false, nil
}

// direction solves the Newton system of the HKM direction for the centring
// target σμ, with the corrector term sym(Z⁻¹ΔZ_aΔX_a) when corr is set,
// into dx, dy, dz (dx and dz selecting a block's buffers). The system is
//
//	A(ΔX) = rp,   AᵀΔy − ΔZ = −Rd,   ΔX = σμZ⁻¹ − X − Z⁻¹ΔZX − corr (symmetrised).
//
// Substituting ΔZ = AᵀΔy + Rd into the third equation gives
// ΔX = R − Z⁻¹(AᵀΔy)X with R = σμZ⁻¹ − X − Z⁻¹RdX − corr, and then the
// first gives A(R) − MΔy = rp with M_ij = ⟨A_i, Z⁻¹A_jX⟩, the Schur
// complement: Δy = M⁻¹(A(R) − rp), ΔX = R − sym(Z⁻¹(AᵀΔy)X),
// ΔZ = AᵀΔy + Rd. (Z⁻¹RdX is in R once: forming ΔX from the whole ΔZ
// would subtract it twice, and ΔX would then miss A(ΔX) = rp whenever the
// dual residual is not zero.) Only the symmetric part of R enters (A(R)
// pairs R_ij with R_ji, and ΔX is symmetrised), so R is formed symmetric
// from G = sym(Z⁻¹RdX). It reports false when Δy is not finite (a
// breakdown: the caller stops with the best iterate).
func (s *hkm) direction(sigmaMu float64, corr bool, dy []float64, dx, dz func(*block) []float64) bool {
	for _, bl := range s.blocks {
		for i := range bl.r {
			v := -bl.g[i] - bl.x[i] + sigmaMu*bl.w[i]
			if corr {
				v -= bl.corr[i]
			}
			bl.r[i] = v
		}
	}
	for i, a := range s.p.A {
		dy[i] = s.inner(a, func(b *block) []float64 { return b.r }) - s.rp[i]
	}
	s.mch.solve(dy)
	for _, v := range dy {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return false
		}
	}
	s.adjoint(dy, dz)
	for _, bl := range s.blocks {
		d, x := dz(bl), dx(bl)
		bl.pr.mulSym3(bl.n, x, bl.w, d, bl.x, bl.t1, bl.t2)
		for i := range x {
			x[i] = bl.r[i] - x[i]
		}
		for i := range d {
			d[i] += bl.rd[i]
		}
	}
	return true
}

// maxStep returns the largest α (capped at 1e6) with S + αD ⪰ 0 on every
// block, S = X (primal) or Z, D the matching direction.
func (s *hkm) maxStep(primal bool, d func(*block) []float64) float64 {
	top := math.Inf(-1)
	for _, bl := range s.blocks {
		var t float64
		if primal {
			t = bl.pr.stepTop(bl.n, bl.vx, bl.xok, d(bl), bl.t1, bl.t2)
		} else {
			t = bl.pr.stepTop(bl.n, bl.vz, true, d(bl), bl.t1, bl.t2)
		}
		top = math.Max(top, t)
	}
	return stepFromTop(top)
}

// predictor computes Mehrotra's affine-scaling (σ = 0) direction (ΔX_a,
// ΔZ_a) and returns the centring parameter σ = (μ_a/μ)³ clipped to [0, 1],
// where μ_a = ⟨X + α_pΔX_a, Z + α_dΔZ_a⟩/n at the largest feasible steps
// α_p, α_d. It reports false on a breakdown.
func (s *hkm) predictor() (sigma float64, ok bool) {
	dxa := func(b *block) []float64 { return b.dxa }
	dza := func(b *block) []float64 { return b.dza }
	if !s.direction(0, false, s.dya, dxa, dza) {
		return 0, false
	}
	ap, ad := s.maxStep(true, dxa), s.maxStep(false, dza)
	var xz float64
	for _, bl := range s.blocks {
		for i := range bl.t1 {
			bl.t1[i] = bl.x[i] + ap*bl.dxa[i]
			bl.t2[i] = bl.z[i] + ad*bl.dza[i]
		}
		xz += dot(bl.t1, bl.t2)
	}
	muAff := xz / float64(s.order)
	sigma = math.Pow(muAff/s.mu, 3)
	sigma = math.Min(1, math.Max(sigma, 0))
	return sigma, true
}

// corrector computes the combined direction for the target σμ with
// Mehrotra's second-order term sym(Z⁻¹ΔZ_aΔX_a). It reports false on a
// breakdown.
func (s *hkm) corrector(sigma float64) bool {
	for _, bl := range s.blocks {
		bl.pr.mulSym3(bl.n, bl.corr, bl.w, bl.dza, bl.dxa, bl.t1, bl.t2)
	}
	return s.direction(sigma*s.mu, true, s.dy,
		func(b *block) []float64 { return b.dx }, func(b *block) []float64 { return b.dz })
}

// update moves the iterate along the corrector's direction: X += α_pΔX,
// Z += α_dΔZ, y += α_dΔy, with the step lengths 0.95 of the distance to
// the boundary of the cone, at most 1.
func (s *hkm) update() {
	ap := math.Min(1, 0.95*s.maxStep(true, func(b *block) []float64 { return b.dx }))
	ad := math.Min(1, 0.95*s.maxStep(false, func(b *block) []float64 { return b.dz }))
	for _, bl := range s.blocks {
		for i := range bl.x {
			bl.x[i] += ap * bl.dx[i]
			bl.z[i] += ad * bl.dz[i]
		}
	}
	for i := range s.y {
		s.y[i] += ad * s.dy[i]
	}
}
