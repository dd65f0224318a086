package sdp

import (
	"context"
	"math"

	"gonum.org/v1/gonum/mat"
)

// hkm is the state of one Solve run: the problem in the forms the
// iteration reads, the iterate (X, y, Z), the quantities of the current
// iteration that its steps share, and the best iterate recorded so far.
// Each method below is one step of an iteration, called by Solve in order.
type hkm struct {
	p       Problem
	n, k    int
	maxIter int
	tol     float64

	c      *mat.SymDense // C, dense
	full   [][]Entry     // each A_i's entries in both triangles
	bn, cn float64       // ‖b‖ and ‖C‖_F, the scales of the infeasibility measures
	alpha  float64       // the starting X = Z = αI

	x, z *mat.SymDense
	y    []float64

	// Set by the steps of the current iteration.
	rp   []float64     // b − A(X)
	rd   *mat.SymDense // ΣyA − C − Z
	zinv *mat.SymDense // Z⁻¹
	m    *mat.SymDense // the Schur complement
	mch  chol          // its factor, storage reused across iterations
	mu   float64       // ⟨X, Z⟩/n

	sol  *Solution // the current iterate as last recorded
	best *Solution // the iterate with the smallest worst measure
}

// newHKM sets up the run for a checked problem: the defaults of set, the
// dense C, the A_i expanded to both triangles, the data norms, and the
// infeasible start X = Z = αI, y = 0 with α = max(10, √n·max(‖b‖, ‖C‖_F)).
func newHKM(p Problem, set Settings) *hkm {
	n, k := p.N, len(p.A)
	s := &hkm{p: p, n: n, k: k, maxIter: set.MaxIter, tol: set.Tol}
	if s.maxIter <= 0 {
		s.maxIter = 100
	}
	if s.tol <= 0 {
		s.tol = 1e-9
	}
	s.c = dense(n, p.C)
	s.full = make([][]Entry, k)
	for i := range p.A {
		for _, e := range p.A[i] {
			s.full[i] = append(s.full[i], e)
			if e.I != e.J {
				s.full[i] = append(s.full[i], Entry{e.J, e.I, e.V})
			}
		}
	}
	var bn float64
	for _, v := range p.B {
		bn += v * v
	}
	s.bn = math.Sqrt(bn)
	s.cn = mat.Norm(s.c, 2)
	// Infeasible start scaled to the data.
	s.alpha = math.Max(10, math.Sqrt(float64(n))*math.Max(s.bn, s.cn))
	s.x, s.z = mat.NewSymDense(n, nil), mat.NewSymDense(n, nil)
	for i := 0; i < n; i++ {
		s.x.SetSym(i, i, s.alpha)
		s.z.SetSym(i, i, s.alpha)
	}
	s.y = make([]float64, k)
	s.sol = &Solution{Status: IterationLimit}
	return s
}

// apply returns A(S) = (⟨A_i, S⟩)_i.
func (s *hkm) apply(m mat.Matrix) []float64 {
	out := make([]float64, s.k)
	for i := range s.p.A {
		out[i] = inner(s.p.A[i], m)
	}
	return out
}

// adjoint returns Aᵀv = Σ_i v_i A_i.
func (s *hkm) adjoint(v []float64) *mat.SymDense {
	out := mat.NewSymDense(s.n, nil)
	for i := range s.p.A {
		for _, e := range s.p.A[i] {
			out.SetSym(e.I, e.J, out.At(e.I, e.J)+v[i]*e.V)
		}
	}
	return out
}

// residuals sets the primal residual rp = b − A(X) and the dual residual
// Rd = ΣyA − C − Z of the current iterate.
func (s *hkm) residuals() {
	ax := s.apply(s.x)
	s.rp = make([]float64, s.k)
	for i := range s.rp {
		s.rp[i] = s.p.B[i] - ax[i]
	}
	s.rd = s.adjoint(s.y)
	subSym(s.rd, s.c)
	subSym(s.rd, s.z)
}

// record writes the current iterate, its objectives and its measures into
// s.sol, with it as the iteration count.
func (s *hkm) record(it int) {
	fill(s.sol, s.p, s.c, s.x, s.y, s.z, it, s.bn, s.cn)
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
// iterates diverging beyond 10¹²·(1+α) in norm, the sign of primal or dual
// infeasibility (Infeasible). It keeps the best iterate on the way and
// returns the solution to hand back and whether the run ends.
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
	if mat.Norm(s.x, 2) > 1e12*(1+s.alpha) || mat.Norm(s.z, 2) > 1e12*(1+s.alpha) {
		sol.Status = Infeasible
		return sol, true
	}
	return nil, false
}

// invertZ sets the duality measure μ = ⟨X, Z⟩/n and Z⁻¹ from the Cholesky
// factor of Z. It reports false when Z is not numerically positive
// definite.
func (s *hkm) invertZ() bool {
	s.mu = trace(s.x, s.z) / float64(s.n)
	var zch mat.Cholesky
	if !zch.Factorize(s.z) {
		return false
	}
	s.zinv = new(mat.SymDense)
	zch.InverseTo(s.zinv)
	return true
}

// schur assembles the Schur complement into s.m. It checks ctx every 64
// columns and stops early when it is done (the caller notices).
func (s *hkm) schur(ctx context.Context) {
	// Schur complement M_ij = tr(A_i Z⁻¹ A_j X), symmetric positive
	// definite (tr(A_iZ⁻¹A_jX) = tr(A_jZ⁻¹A_iX) by transposition and
	// cyclicity). With the sparse entries expanded to both triangles,
	// M_ij = Σ_{(a,b,v)∈A_i} Σ_{(p,q,w)∈A_j} v·w·Z⁻¹_bp·X_qa, which costs
	// nnz_i·nnz_j instead of a dense product.
	k := s.k
	s.m = mat.NewSymDense(k, nil)
	zr, xr := s.zinv.RawSymmetric(), s.x.RawSymmetric()
	zat := func(i, j int) float64 {
		if i > j {
			i, j = j, i
		}
		return zr.Data[i*zr.Stride+j]
	}
	xat := func(i, j int) float64 {
		if i > j {
			i, j = j, i
		}
		return xr.Data[i*xr.Stride+j]
	}
	for j := 0; j < k; j++ {
		if j%64 == 0 && ctx.Err() != nil {
			break // noticed by the caller
		}
		ej := s.full[j]
		for i := 0; i <= j; i++ {
			var t float64
			for _, ea := range s.full[i] {
				for _, eb := range ej {
					t += ea.V * eb.V * zat(ea.J, eb.I) * xat(eb.J, ea.I)
				}
			}
			s.m.SetSym(i, j, t)
		}
	}
}

// factorSchur factors the Schur complement into s.mch, regularising its
// diagonal by 1e-14, then 1e-12, then 1e-10 times its largest diagonal
// entry (cumulatively) when the plain factorisation fails. It reports false
// when all of them fail, and ctx's error when the factorisation was
// cancelled.
func (s *hkm) factorSchur(ctx context.Context) (bool, error) {
	k := s.k
	mraw := s.m.RawSymmetric().Data
	ok, err := s.mch.factor(ctx, mraw, k)
	if err != nil || ok {
		return ok, err
	}
	// Near the optimum M becomes ill-conditioned: regularise its
	// diagonal slightly (this only perturbs the search direction).
	var dmax float64
	for i := 0; i < k; i++ {
		dmax = math.Max(dmax, s.m.At(i, i))
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
// target σμ and the corrector term corr (nil for none), with Z⁻¹ and the
// factored Schur complement of this iteration. It returns nil matrices when
// Δy is not finite (a breakdown: the caller stops with the best iterate).
func (s *hkm) direction(sigmaMu float64, corr *mat.Dense) (*mat.SymDense, []float64, *mat.SymDense) {
	n, zinv, x := s.n, s.zinv, s.x
	// R = σμZ⁻¹ − X − Z⁻¹ Rd X − corr  (ΔX = R − Z⁻¹ AᵀΔy X)
	var r mat.Dense
	r.Mul(zinv, s.rd)
	r.Mul(&r, x)
	r.Scale(-1, &r)
	r.Sub(&r, x)
	var sz mat.Dense
	sz.Scale(sigmaMu, zinv)
	r.Add(&r, &sz)
	if corr != nil {
		r.Sub(&r, corr)
	}
	rhs := make([]float64, s.k)
	for i := range rhs {
		rhs[i] = inner(s.p.A[i], &r) - s.rp[i]
	}
	s.mch.solve(rhs)
	dy := rhs
	for _, v := range dy {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return nil, nil, nil
		}
	}
	dz := s.adjoint(dy)
	dz.AddSym(dz, s.rd)
	var dxf mat.Dense
	dxf.Mul(zinv, dz)
	dxf.Mul(&dxf, x)
	dxf.Sub(&r, &dxf)
	dx := mat.NewSymDense(n, nil)
	for i := 0; i < n; i++ {
		for j := i; j < n; j++ {
			dx.SetSym(i, j, (dxf.At(i, j)+dxf.At(j, i))/2)
		}
	}
	return dx, dy, dz
}

// predictor computes Mehrotra's affine-scaling (σ = 0) direction (ΔX_a,
// ΔZ_a) and the centring parameter σ = (μ_a/μ)³ clipped to [0, 1], where
// μ_a = ⟨X + α_pΔX_a, Z + α_dΔZ_a⟩/n at the largest feasible steps α_p, α_d.
// It reports false on a breakdown.
func (s *hkm) predictor() (dxa, dza *mat.SymDense, sigma float64, ok bool) {
	dxa, _, dza = s.direction(0, nil)
	if dxa == nil {
		return nil, nil, 0, false
	}
	ap, ad := maxStep(s.x, dxa), maxStep(s.z, dza)
	var xa, zaff mat.SymDense
	xa.AddSym(s.x, scaled(dxa, ap))
	zaff.AddSym(s.z, scaled(dza, ad))
	muAff := trace(&xa, &zaff) / float64(s.n)
	sigma = math.Pow(muAff/s.mu, 3)
	sigma = math.Min(1, math.Max(sigma, 0))
	return dxa, dza, sigma, true
}

// corrector computes the combined direction for the target σμ with
// Mehrotra's second-order term Z⁻¹ΔZ_aΔX_a. It returns nil matrices on a
// breakdown.
func (s *hkm) corrector(sigma float64, dxa, dza *mat.SymDense) (*mat.SymDense, []float64, *mat.SymDense) {
	var corr mat.Dense
	corr.Mul(s.zinv, dza)
	corr.Mul(&corr, dxa)
	return s.direction(sigma*s.mu, &corr)
}

// stepLengths returns the primal and dual step lengths along (ΔX, ΔZ):
// 0.95 of the distance to the boundary of the cone, at most 1.
func (s *hkm) stepLengths(dx, dz *mat.SymDense) (ap, ad float64) {
	ap = math.Min(1, 0.95*maxStep(s.x, dx))
	ad = math.Min(1, 0.95*maxStep(s.z, dz))
	return ap, ad
}

// update moves the iterate: X += α_pΔX, Z += α_dΔZ, y += α_dΔy.
func (s *hkm) update(dx *mat.SymDense, dy []float64, dz *mat.SymDense) {
	ap, ad := s.stepLengths(dx, dz)
	s.x.AddSym(s.x, scaled(dx, ap))
	s.z.AddSym(s.z, scaled(dz, ad))
	for i := range s.y {
		s.y[i] += ad * dy[i]
	}
}
