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
//
// The run is a plain loop over the state of hkm.go: record the iterate and
// report progress, test for stop, then one predictor-corrector step (invert
// Z, assemble and factor the Schur complement, predictor, corrector,
// update). ctx is checked at the top of every iteration, while the Schur
// complement is assembled and inside its factorisation; a cancelled run
// returns the current iterate with status Cancelled and ctx's error.
func Solve(ctx context.Context, p Problem, set Settings) (*Solution, error) {
	if err := check(p); err != nil {
		return nil, err
	}
	s := newHKM(p, set)
	for it := 0; it < s.maxIter; it++ {
		if err := ctx.Err(); err != nil {
			return s.cancelled(it, err)
		}
		s.residuals()
		s.record(it)
		if set.Progress != nil {
			set.Progress(it, s.sol.Primal, s.sol.Dual, s.sol.RelGap)
		}
		if out, done := s.stopTest(); done {
			return out, nil
		}
		if !s.invertZ() {
			return s.numericalStop(), nil
		}
		s.schur(ctx)
		if err := ctx.Err(); err != nil {
			return s.cancelled(it, err)
		}
		ok, err := s.factorSchur(ctx)
		if err != nil {
			return s.cancelled(it, err)
		}
		if !ok {
			return s.numericalStop(), nil
		}
		dxa, dza, sigma, ok := s.predictor()
		if !ok {
			return s.numericalStop(), nil
		}
		dx, dy, dz := s.corrector(sigma, dxa, dza)
		if dx == nil {
			return s.numericalStop(), nil
		}
		s.update(dx, dy, dz)
	}
	s.record(s.maxIter)
	return s.sol, nil
}

// check reports ErrShape unless p has a positive order, one right-hand side
// per constraint, and finite entries inside the upper triangle.
func check(p Problem) error {
	n, k := p.N, len(p.A)
	if n <= 0 || len(p.B) != k {
		return ErrShape
	}
	for _, a := range append([][]Entry{p.C}, p.A...) {
		for _, e := range a {
			if e.I < 0 || e.J < e.I || e.J >= n || math.IsNaN(e.V) || math.IsInf(e.V, 0) {
				return ErrShape
			}
		}
	}
	return nil
}

// measure is the worst of the three stopping measures of an iterate.
func measure(s *Solution) float64 { return math.Max(s.RelGap, math.Max(s.PrimalInfeas, s.DualInfeas)) }

// numericalStop returns the better (by measure) of the current and the best
// iterate when the factorisations break down, with status NumericalLimit;
// a breakdown is not evidence of infeasibility.
func numericalStop(cur, best *Solution) *Solution {
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
