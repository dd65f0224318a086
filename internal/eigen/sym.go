package eigen

import (
	"math"

	"gonum.org/v1/gonum/mat"
)

// Sym returns the eigenvalues (ascending) of the symmetric matrix a and, if
// vectors is set, its eigenvectors (columns), by gonum's EigenSym made safe
// for any input. It exists because gonum v0.17.0 misbehaves on finite
// matrices with entries near the underflow threshold, as this project's
// adversarial tests found: on
//
//	[[-0.2, 0, 0, -1.5e-301], [0, 0, -5e-302, 0], [0, -5e-302, 0, 0], [-1.5e-301, 0, 0, 0]]
//
// the values-only decomposition panics ("lapack: insufficient length of a",
// in Dlascl called from Dsterf) and the one with vectors returns the
// eigenvalue −3.3e120 in place of −0.2.
//
// What Sym does: it refuses non-finite entries; scales a by the power of
// two that brings max|a_ij| into [1, 2) (exact); sets the entries below
// 2^-500 to zero (a perturbation E with ‖E‖₂ ≤ n·2^-500 relative to
// max|a_ij|, far below rounding), so no entry is near underflow; recovers a
// panic of gonum as a failure; and rejects a decomposition whose
// eigenvalues do not sum to the trace within 1e-8·n·max|a_ij| (a check that
// the result above fails). The eigenvalues are scaled back.
//
// Callers use the decomposition as an estimate: every certified quantity of
// the library is proven independently (internal/verified).
func Sym(a *mat.SymDense, vectors bool) (vals []float64, vecs *mat.Dense, ok bool) {
	n := a.SymmetricDim()
	if n == 0 {
		return nil, nil, false
	}
	raw := a.RawSymmetric()
	var big float64
	for i := 0; i < n; i++ {
		for j := i; j < n; j++ {
			v := raw.Data[i*raw.Stride+j]
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return nil, nil, false
			}
			big = math.Max(big, math.Abs(v))
		}
	}
	if big == 0 {
		vals = make([]float64, n)
		if vectors {
			vecs = mat.NewDense(n, n, nil)
			for i := 0; i < n; i++ {
				vecs.Set(i, i, 1)
			}
		}
		return vals, vecs, true
	}
	_, e := math.Frexp(big) // big = f·2^e, f ∈ [1/2, 1)
	s := mat.NewSymDense(n, nil)
	var tr float64
	for i := 0; i < n; i++ {
		for j := i; j < n; j++ {
			v := math.Ldexp(raw.Data[i*raw.Stride+j], 1-e) // max |v| ∈ [1, 2)
			if math.Abs(v) < 0x1p-500 {
				v = 0
			}
			s.SetSym(i, j, v)
		}
		tr += s.At(i, i)
	}
	es, ok := tryFactorize(s, vectors)
	if !ok {
		return nil, nil, false
	}
	vals = es.Values(nil)
	var sum float64
	for _, v := range vals {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return nil, nil, false
		}
		sum += v
	}
	if math.Abs(sum-tr) > 1e-8*float64(n)*2 {
		return nil, nil, false
	}
	for i := range vals {
		vals[i] = math.Ldexp(vals[i], e-1)
	}
	if vectors {
		vecs = new(mat.Dense)
		es.VectorsTo(vecs)
	}
	return vals, vecs, true
}

// tryFactorize runs gonum's EigenSym, turning a panic into a failure.
func tryFactorize(a *mat.SymDense, vectors bool) (es *mat.EigenSym, ok bool) {
	defer func() {
		if r := recover(); r != nil {
			es, ok = nil, false
		}
	}()
	es = new(mat.EigenSym)
	ok = es.Factorize(a, vectors)
	return es, ok
}
