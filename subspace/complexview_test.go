package subspace

import (
	"context"
	"errors"
	"math"
	"math/cmplx"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"

	"github.com/segre-lab/segre/internal/reference"
)

// ComplexSpan against gonum: the span of the returned matrices has the
// same projector as the span V of the input (the realified projector of V
// from gonum's SVD, reference.Projector), to within the proven distance θ
// between V and the stored W (ComplexInputDistance) plus the rounding of
// the Gram–Schmidt step, and the matrices are orthonormal in tr(A*B).
//
// Tolerances: the Gram–Schmidt step forms each matrix from at most 2k
// stored rows of norm 1/√2 with two passes of orthogonalisation, so its
// orthogonality and span are accurate to a small multiple of k·2⁻⁵² (common
// practice for Gram–Schmidt with reorthogonalisation); 1e-12 allows a
// factor of more than 100 for k ≤ 6 here.
func TestComplexSpanAgainstGonum(t *testing.T) {
	rng := rand.New(rand.NewPCG(71, 72))
	gauss := func(n int) []complex128 {
		v := make([]complex128, n)
		for i := range v {
			v[i] = complex(rng.NormFloat64(), rng.NormFloat64())
		}
		return v
	}
	// B1, B2 with small integer parts, B3 = B1 + iB2, B4 = (1 + 2i)B1,
	// all exact: the span has complex dimension 2 and is that of B1, B2.
	dependent := make([]complex128, 2*12)
	for l := range dependent {
		dependent[l] = complex(float64(rng.IntN(9)-4), float64(rng.IntN(9)-4))
	}
	b1, b2 := dependent[:12], dependent[12:]
	indep := ComplexBasis{Count: 2, Rows: 3, Cols: 4, Data: append([]complex128(nil), dependent...)}
	for l := 0; l < 12; l++ {
		dependent = append(dependent, b1[l]+1i*b2[l])
	}
	for l := 0; l < 12; l++ {
		dependent = append(dependent, (1+2i)*b1[l])
	}
	cases := []struct {
		name string
		cb   ComplexBasis
		dim  int           // complex dimension of the span (derived from the construction)
		span *ComplexBasis // independent matrices with the same span, for θ (nil: cb itself)
	}{
		{"random 3 in 3x4", ComplexBasis{Count: 3, Rows: 3, Cols: 4, Data: gauss(36)}, 3, nil},
		{"random 5 in 2x3", ComplexBasis{Count: 5, Rows: 2, Cols: 3, Data: gauss(30)}, 5, nil},
		{"dependent", ComplexBasis{Count: 4, Rows: 3, Cols: 4, Data: dependent}, 2, &indep},
		// span{I, J} over C, J the rotation by 90°: dimension 2.
		{"span I, J", ComplexBasis{Count: 2, Rows: 2, Cols: 2, Data: []complex128{1, 0, 0, 1, 0, -1, 1, 0}}, 2, nil},
		{"real data", ComplexFromReal(Basis{Count: 2, Rows: 2, Cols: 3, Data: reference.RandMatrices(rng, 2, 2, 3)}), 2, nil},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			w, err := NewComplex(context.Background(), c.cb, Options{})
			if err != nil {
				t.Fatal(err)
			}
			sp := w.ComplexSpan()
			if sp.Count != c.dim || sp.Count != w.ComplexDim() || sp.Rows != c.cb.Rows || sp.Cols != c.cb.Cols {
				t.Fatalf("%d matrices of %d×%d, want %d of %d×%d (ComplexDim %d)", sp.Count, sp.Rows, sp.Cols, c.dim, c.cb.Rows, c.cb.Cols, w.ComplexDim())
			}
			L := sp.Rows * sp.Cols
			for i := 0; i < sp.Count; i++ {
				for j := 0; j < sp.Count; j++ {
					var g complex128
					for l := 0; l < L; l++ {
						g += cmplx.Conj(sp.Data[i*L+l]) * sp.Data[j*L+l]
					}
					want := complex(0, 0)
					if i == j {
						want = 1
					}
					if cmplx.Abs(g-want) > 1e-12 {
						t.Errorf("tr(Q%d* Q%d) = %v, want %v", i, j, g, want)
					}
				}
			}
			pv, kv, ok := reference.Projector(realify(c.cb).Data, 2*c.cb.Count, 2, L)
			if !ok || kv != 2*c.dim {
				t.Fatalf("gonum: realified rank %d (ok %v), want %d", kv, ok, 2*c.dim)
			}
			// Realified projector of span Q: Σ v vᵀ + (Jv)(Jv)ᵀ over the
			// columns v = (Re Q, Im Q), Jv = (−Im Q, Re Q), which are real
			// orthonormal when the Q are complex orthonormal (derived:
			// Re tr(A*B) is the real inner product of the realified vectors,
			// and (v, Jv) realify Q and iQ).
			pq := mat.NewDense(2*L, 2*L, nil)
			for i := 0; i < sp.Count; i++ {
				v, jv := make([]float64, 2*L), make([]float64, 2*L)
				for l := 0; l < L; l++ {
					z := sp.Data[i*L+l]
					v[l], v[L+l] = real(z), imag(z)
					jv[l], jv[L+l] = -imag(z), real(z)
				}
				pq.RankOne(pq, 1, mat.NewVecDense(2*L, v), mat.NewVecDense(2*L, v))
				pq.RankOne(pq, 1, mat.NewVecDense(2*L, jv), mat.NewVecDense(2*L, jv))
			}
			span := c.cb
			if c.span != nil {
				span = *c.span
			}
			th, err := ComplexInputDistance(context.Background(), span, w)
			if err != nil {
				t.Fatal(err)
			}
			var diff mat.Dense
			diff.Sub(pq, pv)
			d := mat.Norm(&diff, 2)
			t.Logf("‖P_Q − P_V‖₂ = %.3g, θ = %.3g", d, th)
			if d > th+1e-12 {
				t.Errorf("‖P_Q − P_V‖₂ = %v > θ + 1e-12 = %v", d, th+1e-12)
			}
			// A copy: changing it changes nothing in w.
			sp.Data[0] = complex(math.NaN(), 0)
			if again := w.ComplexSpan(); cmplx.IsNaN(again.Data[0]) {
				t.Error("ComplexSpan returned the subspace's own storage")
			}
		})
	}
}

func TestComplexSpanPanicsOnReal(t *testing.T) {
	w, err := New(context.Background(), Basis{Count: 1, Rows: 2, Cols: 2, Data: []float64{1, 0, 0, 1}}, Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer func() {
		if recover() == nil {
			t.Error("ComplexSpan of a real subspace did not panic")
		}
	}()
	w.ComplexSpan()
}

// FromStoredComplex rebuilds the complex subspace from its stored W”
// rows: the same field, shape and certified complex residual (bit for bit,
// the same floats), and a row not of the form [[a, b], [b, −a]] is refused
// (derived on NewComplex: the complex reading rests on that form).
func TestFromStoredComplex(t *testing.T) {
	ctx := context.Background()
	cb := ComplexBasis{Count: 2, Rows: 2, Cols: 3, Data: []complex128{1, 2i, 0, 1 - 1i, 3, 0.5, 0, 1, 1i, 2, -1, 1 + 1i}}
	w, err := NewComplex(ctx, cb, Options{})
	if err != nil {
		t.Fatal(err)
	}
	st := w.Stored()
	var vecs []float64
	for i := 0; i < st.Count(); i++ {
		vecs = append(vecs, st.Vector(i, nil)...)
	}
	r, err := FromStoredComplex(ctx, vecs, st.Count(), 2, 3, Options{})
	if err != nil {
		t.Fatal(err)
	}
	if r.Field() != Complex || r.ComplexDim() != w.ComplexDim() || r.Rows() != 4 || r.Cols() != 6 {
		t.Fatalf("rebuilt: field %v, dim %d, %d×%d", r.Field(), r.ComplexDim(), r.Rows(), r.Cols())
	}
	x, y := []float64{0.6, 0.1, -0.2, 0.3}, []float64{0.5, -0.5, 0.1, 0.2, 0.3, -0.1}
	if a, b := w.ComplexResidualBound(x, y), r.ComplexResidualBound(x, y); a != b {
		t.Errorf("complex residual %v rebuilt, %v original", b, a)
	}
	bad := append([]float64(nil), vecs...)
	bad[2*6+1] += 1e-3 // row m+0, column 1 of the first vector: breaks b = b
	if _, err := FromStoredComplex(ctx, bad, st.Count(), 2, 3, Options{}); !errors.Is(err, ErrShape) {
		t.Errorf("broken form: %v", err)
	}
}
