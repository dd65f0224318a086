package sdp

import (
	"context"
	"math"
	"testing"
)

// The search direction solves the Newton system of its doc at the
// infeasible start, where both residuals are nonzero: A(ΔX) = rp (the
// equation a direction formed from the whole ΔZ would miss) and
// ΔZ = AᵀΔy + Rd, on two blocks. At the start X = Z = αI, so M = ⟨A_i, A_j⟩
// is the Gram matrix of the constraints; those of theta5 and maxcut5 are
// orthogonal (the trace, disjoint off-diagonal units, diagonal units in
// the other block) with squared norms 5, ½ and 1, so κ(M) = 10 and the
// solve is accurate to a few units of roundoff times 10 (Higham 2002,
// Thm 10.4): 1e-12 relative to ‖rp‖ is ample.
func TestDirectionSolvesNewtonSystem(t *testing.T) {
	p := join(theta5(0), maxcut5(0), true)
	s := newHKM(p, Settings{})
	s.residuals()
	if !s.factorIterate() {
		t.Fatal("factorisation failed at the start")
	}
	s.schur(context.Background())
	if ok, err := s.factorSchur(context.Background()); !ok || err != nil {
		t.Fatal("Schur complement not factored")
	}
	dx := func(b *block) []float64 { return b.dx }
	dz := func(b *block) []float64 { return b.dz }
	if !s.direction(0.3*s.mu, false, s.dy, dx, dz) {
		t.Fatal("breakdown")
	}
	var rn, dn float64
	for i, a := range p.A {
		rn += s.rp[i] * s.rp[i]
		r := s.inner(a, dx) - s.rp[i]
		dn += r * r
	}
	if rn == 0 {
		t.Fatal("the start is primal feasible: the test would not test")
	}
	if math.Sqrt(dn) > 1e-12*math.Sqrt(rn) {
		t.Errorf("‖A(ΔX) − rp‖ = %v, ‖rp‖ = %v", math.Sqrt(dn), math.Sqrt(rn))
	}
	s.adjoint(s.dy, func(b *block) []float64 { return b.t1 })
	for bi, bl := range s.blocks {
		for i := range bl.dz {
			if want := bl.t1[i] + bl.rd[i]; bl.dz[i] != want {
				t.Fatalf("block %d: ΔZ ≠ AᵀΔy + Rd at %d", bi, i)
			}
		}
	}
}
