package net

import "github.com/segre-lab/segre/internal/verified"

// cholWork is the reusable workspace of the verified eigenvalue bounds of
// the cells (two n×n buffers, grown on first use): one per worker, so the
// per-cell tests allocate nothing.
type cholWork = verified.Workspace

// maxEigUpperSym returns a proven upper bound on λmax(A) for the symmetric
// n×n matrix A given by the upper triangle (j ≥ i) of the row-major a, from
// the estimate guess: verified.MaxEigUpperTri (verified.MaxEigUpper with
// the caller's workspace, bit for bit; the argument is on
// verified.MinEigLower).
func maxEigUpperSym(a []float64, n int, guess float64, w *cholWork) float64 {
	return verified.MaxEigUpperTri(a, n, guess, w)
}

// minEigLowerSym is maxEigUpperSym for λmin (verified.MinEigLowerTri).
func minEigLowerSym(a []float64, n int, guess float64, w *cholWork) float64 {
	return verified.MinEigLowerTri(a, n, guess, w)
}
