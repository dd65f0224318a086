package subspace

import "github.com/segre-lab/segre/internal/rawstore"

// Stored is a read-only view of what a Subspace stores, for bound builders
// outside this package (ours and users') that do their own proofs: the
// stored vectors S (rows of length m·n, row-major matrices), whether they
// span W or W⊥, the proven orthogonality defect η ≥ ‖SSᵀ − I‖₂ and a proven
// bound on ‖S‖_F². Every certified statement of this module is about the
// subspace spanned exactly by these float vectors (or its complement).
type Stored struct{ w *Subspace }

// Stored returns the read-only view of w's stored basis.
func (w *Subspace) Stored() Stored { return Stored{w} }

// Count returns the number of stored vectors: Dim() when W is stored,
// m·n − Dim() when W⊥ is.
func (s Stored) Count() int { return s.w.s }

// Complement reports whether the stored vectors span W⊥.
func (s Stored) Complement() bool { return s.w.comp }

// Vector copies stored vector t (length m·n: the m×n matrix row by row)
// into dst, allocated when nil or too short, and returns it.
// It panics if t is out of range.
func (s Stored) Vector(t int, dst []float64) []float64 {
	if t < 0 || t >= s.w.s {
		panic("subspace: stored vector index out of range")
	}
	L := s.w.m * s.w.n
	if len(dst) < L {
		dst = make([]float64, L)
	}
	copy(dst, s.w.q[t*L:(t+1)*L])
	return dst[:L]
}

// OrthogonalityBound returns η ≥ ‖SSᵀ − I‖₂, proven (as
// Subspace.OrthogonalityBound).
func (s Stored) OrthogonalityBound() float64 { return s.w.eta }

// SumSqUpper returns a proven upper bound on ‖S‖_F², the sum of squares of
// every stored entry.
func (s Stored) SumSqUpper() float64 { return s.w.sumSq }

func init() {
	rawstore.Register(
		func(w any) []float64 { return w.(*Subspace).q },
		func(op any) rawstore.Factor {
			o := op.(*Operator)
			return rawstore.Factor{Z: o.z, S: o.s, P: o.p, Complement: o.comp, Shift: o.shift}
		})
}
