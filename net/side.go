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
type side struct {
	w     *subspace.Subspace
	onX   bool // the net is over x ∈ S^{m−1}, y solved exactly
	d, p  int  // dimensions of the net side and of the exact side
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
	if f := BlockFormBytes(w, s.onX); f <= blockFormLimit && f <= w.MemoryLimit()/2 {
		s.form = NewBlockForm(w, s.onX)
	}
	return s
}

// value returns an estimate and a proven upper bound of s(ĉ)² =
// λmax(H(c))/‖c‖² for the direction ĉ of the float point c, and writes the
// best vector of the exact side into vec.
func (s *side) value(c, vec []float64) (est, upper float64) {
	s.evals++
	var e, u float64
	if s.form != nil {
		e, u = s.form.MaxEig(c, vec)
	} else if s.onX {
		e, u = MaxEigH(s.w, c, vec)
	} else {
		e, u = MaxEigG(s.w, c, vec)
	}
	cc := accurate.SumSqLower(c)
	var ccEst float64
	for _, v := range c {
		ccEst += float64(v * v)
	}
	return e / ccEst, accurate.Up(u / cc)
}

// witness returns (x, y) from a net-side point c and exact-side vector v.
func (s *side) witness(c, v []float64) (x, y []float64) {
	cn := append([]float64(nil), c...)
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
