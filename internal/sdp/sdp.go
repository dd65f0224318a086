// Package sdp is a primal-dual interior-point solver for semidefinite
// programs with one dense block and sparse constraint matrices:
//
//	primal  max ⟨C, X⟩  s.t. ⟨A_i, X⟩ = b_i (i = 1..k), X ⪰ 0,
//	dual    min bᵀy     s.t. Z = Σ_i y_i A_i − C ⪰ 0,
//
// (the convention of the SDPA sparse format as CSDP reads it). It follows
// the HKM search direction (Helmberg, Rendl, Vanderbei, Wolkowicz, SIAM J.
// Optim. 6, 1996; Kojima, Shindoh, Hara, SIAM J. Optim. 7, 1997; Monteiro,
// SIAM J. Optim. 7, 1997) with Mehrotra's predictor-corrector (SIAM J.
// Optim. 2, 1992), from the infeasible start X = Z = αI, and assembles the
// Schur complement M_ij = ⟨A_i, Z⁻¹A_jX⟩ using the sparsity of the A_i.
package sdp

import (
	"context"
	"errors"
	"math"

	"gonum.org/v1/gonum/mat"

	"github.com/segre-lab/segre/internal/eigen"
)

// Entry is one entry (I ≤ J, 0-based) of a symmetric sparse matrix: the
// matrix has V at (I, J) and at (J, I).
type Entry struct {
	I, J int
	V    float64
}

// Problem is an SDP in the form of the package doc.
type Problem struct {
	N int       // order of the block
	C []Entry   // objective, upper triangle
	A [][]Entry // constraint matrices, upper triangles
	B []float64 // right-hand sides
}

// Status says how Solve ended.
type Status int

// Statuses.
const (
	Optimal Status = iota + 1
	IterationLimit
	Infeasible // primal or dual infeasibility detected (iterates diverge)
	Cancelled
	NumericalLimit // the factorisations broke down before the tolerance; best iterate returned
)

// Solution is the solver's output.
type Solution struct {
	X, Z         *mat.SymDense
	Y            []float64
	Primal, Dual float64 // ⟨C, X⟩ and bᵀy
	RelGap       float64
	PrimalInfeas float64 // ‖b − A(X)‖/(1+‖b‖)
	DualInfeas   float64 // ‖ΣyA − C − Z‖_F/(1+‖C‖_F)
	Iterations   int
	Status       Status
}

// Settings of Solve; the zero value gives the defaults.
type Settings struct {
	MaxIter  int     // zero means 100
	Tol      float64 // relative gap and infeasibility target; zero means 1e-9
	Progress func(iter int, primal, dual, gap float64)
}

// ErrShape reports an inconsistent problem.
var ErrShape = errors.New("sdp: inconsistent problem")

func dense(n int, e []Entry) *mat.SymDense {
	s := mat.NewSymDense(n, nil)
	for _, x := range e {
		s.SetSym(x.I, x.J, s.At(x.I, x.J)+x.V)
	}
	return s
}

// inner returns ⟨A, S⟩ for sparse A and a dense matrix S (not necessarily symmetric).
func inner(a []Entry, s mat.Matrix) float64 {
	var t float64
	for _, e := range a {
		if e.I == e.J {
			t += e.V * s.At(e.I, e.I)
		} else {
			t += e.V * (s.At(e.I, e.J) + s.At(e.J, e.I))
		}
	}
	return t
}

// Solve solves p.
func Solve(ctx context.Context, p Problem, set Settings) (*Solution, error) {
	n, k := p.N, len(p.A)
	if n <= 0 || len(p.B) != k {
		return nil, ErrShape
	}
	for _, a := range append([][]Entry{p.C}, p.A...) {
		for _, e := range a {
			if e.I < 0 || e.J < e.I || e.J >= n || math.IsNaN(e.V) || math.IsInf(e.V, 0) {
				return nil, ErrShape
			}
		}
	}
	maxIter := set.MaxIter
	if maxIter <= 0 {
		maxIter = 100
	}
	tol := set.Tol
	if tol <= 0 {
		tol = 1e-9
	}
	c := dense(n, p.C)
	full := make([][]Entry, k) // each A_i's entries in both triangles
	for i := range p.A {
		for _, e := range p.A[i] {
			full[i] = append(full[i], e)
			if e.I != e.J {
				full[i] = append(full[i], Entry{e.J, e.I, e.V})
			}
		}
	}
	var bn float64
	for _, v := range p.B {
		bn += v * v
	}
	bn = math.Sqrt(bn)
	cn := mat.Norm(c, 2)
	// Infeasible start scaled to the data.
	alpha := math.Max(10, math.Sqrt(float64(n))*math.Max(bn, cn))
	x, z := mat.NewSymDense(n, nil), mat.NewSymDense(n, nil)
	for i := 0; i < n; i++ {
		x.SetSym(i, i, alpha)
		z.SetSym(i, i, alpha)
	}
	y := make([]float64, k)
	var mch chol // the Schur complement's factor, storage reused
	sol := &Solution{Status: IterationLimit}
	var best *Solution // the iterate with the smallest worst measure
	measure := func(s *Solution) float64 { return math.Max(s.RelGap, math.Max(s.PrimalInfeas, s.DualInfeas)) }
	aOp := func(s mat.Matrix) []float64 {
		out := make([]float64, k)
		for i := range p.A {
			out[i] = inner(p.A[i], s)
		}
		return out
	}
	atOp := func(v []float64) *mat.SymDense {
		s := mat.NewSymDense(n, nil)
		for i := range p.A {
			for _, e := range p.A[i] {
				s.SetSym(e.I, e.J, s.At(e.I, e.J)+v[i]*e.V)
			}
		}
		return s
	}
	for it := 0; it < maxIter; it++ {
		if err := ctx.Err(); err != nil {
			sol.Status = Cancelled
			fill(sol, p, c, x, y, z, it, bn, cn)
			return sol, err
		}
		// Residuals: rp = b − A(X), Rd = ΣyA − C − Z.
		ax := aOp(x)
		rp := make([]float64, k)
		for i := range rp {
			rp[i] = p.B[i] - ax[i]
		}
		rd := atOp(y)
		subSym(rd, c)
		subSym(rd, z)
		fill(sol, p, c, x, y, z, it, bn, cn)
		if set.Progress != nil {
			set.Progress(it, sol.Primal, sol.Dual, sol.RelGap)
		}
		if measure(sol) <= tol {
			sol.Status = Optimal
			return sol, nil
		}
		if best == nil || measure(sol) < measure(best) {
			cp := *sol
			best = &cp
		} else if measure(best) <= 1e3*tol && measure(sol) > 10*measure(best) {
			// Past the attainable accuracy the iterates degrade: return the best.
			best.Status = Optimal
			if measure(best) > 10*tol {
				best.Status = IterationLimit
			}
			return best, nil
		}
		if mat.Norm(x, 2) > 1e12*(1+alpha) || mat.Norm(z, 2) > 1e12*(1+alpha) {
			sol.Status = Infeasible
			return sol, nil
		}
		mu := trace(x, z) / float64(n)
		var zch mat.Cholesky
		if !zch.Factorize(z) {
			return numericalStop(sol, best, measure), nil
		}
		var zinv mat.SymDense
		zch.InverseTo(&zinv)
		// Schur complement M_ij = tr(A_i Z⁻¹ A_j X), symmetric positive
		// definite (tr(A_iZ⁻¹A_jX) = tr(A_jZ⁻¹A_iX) by transposition and
		// cyclicity). With the sparse entries expanded to both triangles,
		// M_ij = Σ_{(a,b,v)∈A_i} Σ_{(p,q,w)∈A_j} v·w·Z⁻¹_bp·X_qa, which costs
		// nnz_i·nnz_j instead of a dense product.
		m := mat.NewSymDense(k, nil)
		zr, xr := zinv.RawSymmetric(), x.RawSymmetric()
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
				break // noticed below
			}
			ej := full[j]
			for i := 0; i <= j; i++ {
				var t float64
				for _, ea := range full[i] {
					for _, eb := range ej {
						t += ea.V * eb.V * zat(ea.J, eb.I) * xat(eb.J, ea.I)
					}
				}
				m.SetSym(i, j, t)
			}
		}
		cancelled := func(err error) (*Solution, error) {
			sol.Status = Cancelled
			fill(sol, p, c, x, y, z, it, bn, cn)
			return sol, err
		}
		if err := ctx.Err(); err != nil {
			return cancelled(err)
		}
		mraw := m.RawSymmetric().Data
		ok, err := mch.factor(ctx, mraw, k)
		if err != nil {
			return cancelled(err)
		}
		if !ok {
			// Near the optimum M becomes ill-conditioned: regularise its
			// diagonal slightly (this only perturbs the search direction).
			var dmax float64
			for i := 0; i < k; i++ {
				dmax = math.Max(dmax, m.At(i, i))
			}
			for _, eps := range []float64{1e-14, 1e-12, 1e-10} {
				for i := 0; i < k; i++ {
					mraw[i*k+i] += eps * dmax
				}
				if ok, err = mch.factor(ctx, mraw, k); err != nil {
					return cancelled(err)
				}
				if ok {
					break
				}
			}
			if !ok {
				return numericalStop(sol, best, measure), nil
			}
		}
		// direction solves for a given target and corrector term.
		direction := func(sigmaMu float64, corr *mat.Dense) (*mat.SymDense, []float64, *mat.SymDense) {
			// R = σμZ⁻¹ − X − Z⁻¹ Rd X − corr  (ΔX = R − Z⁻¹ AᵀΔy X)
			var r mat.Dense
			r.Mul(&zinv, rd)
			r.Mul(&r, x)
			r.Scale(-1, &r)
			r.Sub(&r, x)
			var sz mat.Dense
			sz.Scale(sigmaMu, &zinv)
			r.Add(&r, &sz)
			if corr != nil {
				r.Sub(&r, corr)
			}
			rhs := make([]float64, k)
			for i := range rhs {
				rhs[i] = inner(p.A[i], &r) - rp[i]
			}
			mch.solve(rhs)
			dy := rhs
			for _, v := range dy {
				if math.IsNaN(v) || math.IsInf(v, 0) {
					return nil, nil, nil // a breakdown: the caller stops with the best iterate
				}
			}
			dz := atOp(dy)
			dz.AddSym(dz, rd)
			var dxf mat.Dense
			dxf.Mul(&zinv, dz)
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
		dxa, _, dza := direction(0, nil)
		if dxa == nil {
			return numericalStop(sol, best, measure), nil
		}
		ap, ad := maxStep(x, dxa), maxStep(z, dza)
		var xa, zaff mat.SymDense
		xa.AddSym(x, scaled(dxa, ap))
		zaff.AddSym(z, scaled(dza, ad))
		muAff := trace(&xa, &zaff) / float64(n)
		sigma := math.Pow(muAff/mu, 3)
		sigma = math.Min(1, math.Max(sigma, 0))
		var corr mat.Dense
		corr.Mul(&zinv, dza)
		corr.Mul(&corr, dxa)
		dx, dy, dz := direction(sigma*mu, &corr)
		if dx == nil {
			return numericalStop(sol, best, measure), nil
		}
		ap = math.Min(1, 0.95*maxStep(x, dx))
		ad = math.Min(1, 0.95*maxStep(z, dz))
		x.AddSym(x, scaled(dx, ap))
		z.AddSym(z, scaled(dz, ad))
		for i := range y {
			y[i] += ad * dy[i]
		}
	}
	fill(sol, p, c, x, y, z, maxIter, bn, cn)
	return sol, nil
}

// numericalStop returns the best iterate when the factorisations break
// down: status Optimal if it met 10 times the tolerance (see Solve),
// IterationLimit otherwise; a breakdown is not evidence of infeasibility.
func numericalStop(cur, best *Solution, measure func(*Solution) float64) *Solution {
	s := cur
	if best != nil && measure(best) < measure(cur) {
		s = best
	}
	s.Status = NumericalLimit
	return s
}

// subSym sets a = a − b.
func subSym(a, b *mat.SymDense) {
	n := a.SymmetricDim()
	for i := 0; i < n; i++ {
		for j := i; j < n; j++ {
			a.SetSym(i, j, a.At(i, j)-b.At(i, j))
		}
	}
}

func scaled(a *mat.SymDense, s float64) *mat.SymDense {
	var o mat.SymDense
	o.ScaleSym(s, a)
	return &o
}

func trace(a, b mat.Matrix) float64 {
	r, _ := a.Dims()
	var t float64
	for i := 0; i < r; i++ {
		for j := 0; j < r; j++ {
			t += a.At(i, j) * b.At(j, i)
		}
	}
	return t
}

// traceProd returns tr(A·G) = Σ_ij A_ij G_ji.
func traceProd(a *mat.SymDense, g mat.Matrix) float64 { return trace(a, g) }

// maxStep returns the largest α (capped at 1e6) with S + αD ⪰ 0 for S ≻ 0:
// 1/λmax(−L⁻¹DL⁻ᵀ) with S = LLᵀ.
func maxStep(s, d *mat.SymDense) float64 {
	var ch mat.Cholesky
	if !ch.Factorize(s) {
		return 0
	}
	var l mat.TriDense
	ch.LTo(&l)
	n := s.SymmetricDim()
	var li mat.TriDense
	if err := li.InverseTri(&l); err != nil {
		return 0
	}
	var t mat.Dense
	t.Mul(&li, d)
	t.Mul(&t, li.T())
	ts := mat.NewSymDense(n, nil)
	for i := 0; i < n; i++ {
		for j := i; j < n; j++ {
			ts.SetSym(i, j, -(t.At(i, j)+t.At(j, i))/2)
		}
	}
	v, _, ok := eigen.Sym(ts, false)
	if !ok {
		return 0
	}
	top := v[len(v)-1]
	if top <= 1e-12 {
		return 1e6
	}
	return 1 / top
}

func fill(sol *Solution, p Problem, c *mat.SymDense, x *mat.SymDense, y []float64, z *mat.SymDense, it int, bn, cn float64) {
	n := p.N
	sol.X = mat.NewSymDense(n, append([]float64(nil), x.RawSymmetric().Data...))
	sol.Z = mat.NewSymDense(n, append([]float64(nil), z.RawSymmetric().Data...))
	sol.Y = append([]float64(nil), y...)
	sol.Primal = traceProd(c, x)
	var d float64
	for i, v := range p.B {
		d += v * y[i]
	}
	sol.Dual = d
	sol.RelGap = math.Abs(sol.Primal-sol.Dual) / (1 + math.Abs(sol.Primal) + math.Abs(sol.Dual))
	var rp float64
	for i := range p.A {
		r := p.B[i] - inner(p.A[i], x)
		rp += r * r
	}
	sol.PrimalInfeas = math.Sqrt(rp) / (1 + bn)
	rd := mat.NewSymDense(n, nil)
	for i := range p.A {
		for _, e := range p.A[i] {
			rd.SetSym(e.I, e.J, rd.At(e.I, e.J)+y[i]*e.V)
		}
	}
	subSym(rd, c)
	subSym(rd, z)
	sol.DualInfeas = mat.Norm(rd, 2) / (1 + cn)
	sol.Iterations = it
}
