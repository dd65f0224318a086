package net

import (
	"errors"
	"math"

	"github.com/segre-lab/segre/internal/accurate"
	"github.com/segre-lab/segre/subspace"
)

// ErrTooLarge is returned when a net or search would exceed its size limit.
var ErrTooLarge = errors.New("net: search too large for its limit")

// side is the sphere the net or the cells live on (the smaller side).
//
// Complex subspaces (subspace.NewComplex): the net side is x ∈ C^m in real
// coordinates X = (re x, im x) ∈ R^{2m} (or y likewise). h is invariant
// under the phase symmetry (x, y) → (e^{iθ}x, e^{−iθ}y), and every orbit
// meets the set where the first coordinate of the net side is real: for
// x₁ ≠ 0 take e^{iθ} = conj(x₁)/|x₁|, and x₁ = 0 is already in it. So the
// maximum of h over the unit sphere of R^{2m} is its maximum over the unit
// sphere of the 2m − 1 coordinates left when im x₁ (index m of X) is fixed
// at 0 (derived here), and the nets and cells cover only that sphere: d is
// 2m − 1, and lift inserts the zero. Without the reduction the maximisers
// would form circles, which branch-and-bound cannot isolate.
type side struct {
	w     *subspace.Subspace
	onX   bool // the net is over x, y solved exactly
	d, p  int  // dimensions of the net side (after the phase reduction) and of the exact side
	fixed int  // 1 + the coordinate of the net side fixed at 0 by the phase reduction (0: none)
	form  *BlockForm
	evals int
}

// blockFormLimit is the largest block form (bytes) the searches build.
const blockFormLimit = 256 << 20

func newSide(w *subspace.Subspace) side {
	s := side{w: w, onX: true, d: w.Rows(), p: w.Cols()}
	if w.Rows() > w.Cols() {
		s = side{w: w, onX: false, d: w.Cols(), p: w.Rows()}
	}
	if w.Field() == subspace.Complex && s.d >= 2 {
		s.fixed = 1 + s.d/2 // im of the first coordinate
		s.d--
	}
	if f := BlockFormBytes(w, s.onX); f <= blockFormLimit && f <= w.MemoryLimit()/2 {
		s.form = NewBlockForm(w, s.onX)
	}
	return s
}

// value returns an estimate and a proven upper bound of s(ĉ)² =
// λmax(H(c))/‖c‖² for the direction ĉ of the float point c, and raw, the
// estimate of λmax(H(c)) at c itself (not normalised) from which the bound
// was proven: bound(c, raw) recomputes upper bit for bit. It writes the best
// vector of the exact side into vec.
func (s *side) value(c, vec []float64) (est, upper, raw float64) {
	s.evals++
	c = s.lift(c)
	var u float64
	if s.form != nil {
		raw, u = s.form.MaxEig(c, vec)
	} else if s.onX {
		raw, u = MaxEigH(s.w, c, vec)
	} else {
		raw, u = MaxEigG(s.w, c, vec)
	}
	return raw / sumSqEst(c), s.normalised(c, u), raw
}

// bound returns the proven upper bound of s(ĉ)² that value returns for the
// float point c, from raw, an estimate of λmax(H(c)) used only as the
// verified test's starting point (value's raw gives the same bound bit for
// bit; any other raw, even NaN, still gives a valid one). It runs no
// eigensolver and does not count an evaluation; it is safe for concurrent
// use.
func (s *side) bound(c []float64, raw float64) float64 {
	c = s.lift(c)
	return s.normalised(c, s.upper(c, raw))
}

// upper returns the proven upper bound of λmax(H(c)) (or λmax(G(c))) for
// the lifted point c from the estimate raw.
func (s *side) upper(c []float64, raw float64) float64 {
	switch {
	case s.form != nil:
		return s.form.maxEigUpper(c, raw)
	case s.onX:
		return maxEigUpper(s.w, s.w.HOperator(c), c, raw)
	default:
		return maxEigUpper(s.w, s.w.GOperator(c), c, raw)
	}
}

// normalised returns u/‖c‖² rounded upwards (u ≥ λmax(H(c)) proven, so the
// result bounds λmax(H(ĉ)) = λmax(H(c))/‖c‖², H being quadratic in c).
func (s *side) normalised(c []float64, u float64) float64 {
	return accurate.Up(u / accurate.SumSqLower(c))
}

// witness returns (x, y) from a net-side point c and exact-side vector v.
func (s *side) witness(c, v []float64) (x, y []float64) {
	cn := append([]float64(nil), s.lift(c)...)
	var n float64
	for _, a := range cn {
		n += float64(a * a)
	}
	n = math.Sqrt(n)
	for i := range cn {
		cn[i] /= n
	}
	vn := append([]float64(nil), v...)
	if s.onX {
		return cn, vn
	}
	return vn, cn
}

// lift returns the net side's full vector for a point c of the net
// coordinates: c itself, or c with the phase-reduction zero inserted.
func (s *side) lift(c []float64) []float64 {
	if s.fixed == 0 {
		return c
	}
	z := s.fixed - 1
	full := make([]float64, len(c)+1)
	copy(full, c[:z])
	copy(full[z+1:], c[z:])
	return full
}

// SideDimension returns the dimension of the sphere that the nets and
// branch-and-bound cover for w: min(m, n) for a real subspace, one less
// than the smaller side's real dimension 2·min(m, n) for a complex one (the
// phase reduction). Their cost grows exponentially with it.
func SideDimension(w *subspace.Subspace) int { return newSideDims(w) }

func newSideDims(w *subspace.Subspace) int {
	d := min(w.Rows(), w.Cols())
	if w.Field() == subspace.Complex && d >= 2 {
		d--
	}
	return d
}
