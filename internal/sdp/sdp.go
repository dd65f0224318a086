// Package sdp is a primal-dual interior-point solver for semidefinite
// programs over block-diagonal matrices with sparse constraint matrices:
//
//	primal  max ⟨C, X⟩  s.t. ⟨A_i, X⟩ = b_i (i = 1..k), X ⪰ 0,
//	dual    min bᵀy     s.t. Z = Σ_i y_i A_i − C ⪰ 0,
//
// where X, Z, C and every A_i are block diagonal with the same dense
// diagonal blocks (the convention of the SDPA sparse format as CSDP reads
// it). It follows the HKM search direction (Helmberg, Rendl, Vanderbei,
// Wolkowicz, SIAM J. Optim. 6, 1996; Kojima, Shindoh, Hara, SIAM J. Optim.
// 7, 1997; Monteiro, SIAM J. Optim. 7, 1997) with Mehrotra's
// predictor-corrector (SIAM J. Optim. 2, 1992), from the infeasible start
// X = Z = αI, and assembles the Schur complement M_ij = ⟨A_i, Z⁻¹A_jX⟩ from
// the sparsity of the A_i (schur.go).
//
// Blocks. Everything the iteration does to X and Z is done block by block:
// the inverse, the products of the search direction, the step lengths (the
// largest step of a block-diagonal matrix is the smallest over its blocks).
// A problem whose blocks are given as one larger block (zero between them)
// has the same iterates in exact arithmetic: the HKM direction of a
// block-diagonal iterate is block diagonal, and the solver's start, duality
// measure μ = ⟨X, Z⟩/n (n the sum of the orders) and stopping rules read
// only quantities that are sums over the blocks.
//
// Cost of an iteration: the Schur complement's assembly, Σ_ij nnz_i·nnz_j
// over shared blocks (schur.go), its Cholesky factorisation, k³/3 (chol.go,
// tiles.go), and a few dense products and eigenvalue problems of each
// block's order (dense.go, eigtop.go). On amd64 processors with AVX2 and
// FMA the products, the factorisation and the assembly's sums run through
// the assembly kernels of kernel_amd64.s; elsewhere, and in builds with the
// tag purego, through gonum's BLAS and plain Go loops.
//
// Determinism. On a given processor and build, the result depends only on
// the problem and the settings: the work split between goroutines (Schur
// complement rows, column strips of its factorisation) never changes which
// operations produce a number, nor their order, so GOMAXPROCS does not
// change it.
//
// Inputs are never modified; a Solution owns its matrices.
package sdp

import (
	"context"
	"errors"
	"math"

	"gonum.org/v1/gonum/mat"
)

// Entry is one entry of a symmetric sparse block-diagonal matrix: its
// diagonal block number Block (0-based, an index into Problem.Blocks) has V
// at (I, J) and at (J, I), with 0 ≤ I ≤ J < Problem.Blocks[Block]. Entries
// repeated in one matrix add up.
type Entry struct {
	Block int
	I, J  int
	V     float64
}

// Problem is an SDP in the form of the package doc.
type Problem struct {
	Blocks []int     // orders of the diagonal blocks of X (and Z, C, A_i)
	C      []Entry   // objective, upper triangles of its blocks
	A      [][]Entry // constraint matrices, upper triangles of their blocks
	B      []float64 // right-hand sides
}

// Order returns the sum of the orders of p's blocks.
func (p Problem) Order() int {
	var n int
	for _, b := range p.Blocks {
		n += b
	}
	return n
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
	X, Z         []*mat.SymDense // one per block of the Problem
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

// Errors of Solve.
var (
	ErrShape    = errors.New("sdp: inconsistent problem")
	ErrTooLarge = errors.New("sdp: problem too large for memory")
)

// maxBytes bounds the memory Solve allocates for its dense matrices: 16
// matrices of the order of each block (the iterate, its inverse factors,
// the directions, scratch) and two k×k matrices (the Schur complement and
// its factor), 8 bytes an entry.
const maxBytes = 1 << 34

// memory returns the bytes of dense storage Solve needs for p (computed in
// floating point, so it cannot overflow).
func memory(p Problem) float64 {
	k := float64(len(p.A))
	t := 2 * k * k
	for _, n := range p.Blocks {
		t += 16 * float64(n) * float64(n)
	}
	return 8 * t
}

// Solve solves p.
//
// The run is a plain loop over the state of hkm.go: record the iterate and
// report progress, test for stop, then one predictor-corrector step (factor
// X and Z and invert Z, assemble and factor the Schur complement,
// predictor, corrector, update). ctx is checked at the top of every
// iteration, while the Schur complement is assembled and inside its
// factorisation; a cancelled run returns the current iterate with status
// Cancelled and ctx's error.
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
		if !s.factorIterate() {
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
		sigma, ok := s.predictor()
		if !ok {
			return s.numericalStop(), nil
		}
		if !s.corrector(sigma) {
			return s.numericalStop(), nil
		}
		s.update()
	}
	s.record(s.maxIter)
	return s.sol, nil
}

// check reports ErrShape unless p has at least one block, every block a
// positive order, one finite right-hand side per constraint, and finite
// entries inside the upper triangle of an existing block; and ErrTooLarge
// when the dense storage would exceed maxBytes.
func check(p Problem) error {
	if len(p.Blocks) == 0 || len(p.B) != len(p.A) {
		return ErrShape
	}
	for _, n := range p.Blocks {
		if n <= 0 {
			return ErrShape
		}
	}
	if memory(p) > maxBytes {
		return ErrTooLarge
	}
	ok := func(a []Entry) bool {
		for _, e := range a {
			if e.Block < 0 || e.Block >= len(p.Blocks) || e.I < 0 || e.J < e.I || e.J >= p.Blocks[e.Block] ||
				math.IsNaN(e.V) || math.IsInf(e.V, 0) {
				return false
			}
		}
		return true
	}
	if !ok(p.C) {
		return ErrShape
	}
	for _, a := range p.A {
		if !ok(a) {
			return ErrShape
		}
	}
	for _, b := range p.B {
		if math.IsNaN(b) || math.IsInf(b, 0) {
			return ErrShape
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
