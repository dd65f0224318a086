package subspace

import (
	"bytes"
	"context"
	"math"
	"testing"
)

// The readers never panic and, on success, return a consistent shape; a
// successful read round-trips through the writer of the same format. The
// seed corpus runs in the normal tests; `go test -fuzz FuzzReadNPY
// ./subspace` explores further.
func FuzzReadNPY(f *testing.F) {
	var buf bytes.Buffer
	WriteNPY(&buf, Basis{Count: 1, Rows: 2, Cols: 2, Data: []float64{1, 2, 3, 4}})
	f.Add(buf.Bytes())
	f.Add([]byte("\x93NUMPY\x01\x00\x10\x00{'descr': '<f4'}"))
	f.Add(npyBytes(2, ">i2", true, "(1, 2, 1)", []byte{0, 1, 0, 2}))
	f.Fuzz(func(t *testing.T, data []byte) {
		b, err := ReadNPY(bytes.NewReader(data), 1<<20)
		if err != nil {
			return
		}
		if b.Count*b.Rows*b.Cols != len(b.Data) {
			t.Fatalf("inconsistent shape %d×%d×%d with %d values", b.Count, b.Rows, b.Cols, len(b.Data))
		}
		var out bytes.Buffer
		if err := WriteNPY(&out, b); err != nil {
			t.Fatal(err)
		}
		back, err := ReadNPY(&out, 1<<20)
		if err != nil || !sameBasis(b, back) {
			t.Fatalf("round trip failed: %v", err)
		}
	})
}

func FuzzReadText(f *testing.F) {
	f.Add("1 2 2\n1 2\n3 4\n")
	f.Add("# c\n2 1 1\n1e308 -0\n")
	f.Add("1 1 1\nNaN\n")
	f.Fuzz(func(t *testing.T, s string) {
		b, err := ReadText(bytes.NewReader([]byte(s)), 1<<20)
		if err != nil {
			return
		}
		if b.Count*b.Rows*b.Cols != len(b.Data) {
			t.Fatalf("inconsistent shape")
		}
		var out bytes.Buffer
		WriteText(&out, b)
		back, err := ReadText(&out, 1<<20)
		if err != nil || !sameBasis(b, back) {
			t.Fatalf("round trip failed: %v", err)
		}
	})
}

// New never panics; on success the bounds it proves are finite or +Inf,
// never NaN, and the dimension is within [1, min(r, mn)].
func FuzzNew(f *testing.F) {
	f.Add(uint8(2), uint8(2), uint8(3), 1.0, 1e-300, -2.5, 1e300)
	f.Add(uint8(1), uint8(3), uint8(1), 0.0, 0.0, 5e-324, 1.0)
	f.Add(uint8(0), uint8(1), uint8(1), 1e-310, 0.0, 0.0, 5e-324) // all subnormal
	f.Add(uint8(1), uint8(1), uint8(1), 1.7976931348623157e308, -1.7976931348623157e308, 1e308, 0.0)
	f.Fuzz(func(t *testing.T, r, m, n uint8, a, b, c, d float64) {
		R, M, N := int(r%5)+1, int(m%4)+1, int(n%4)+1
		data := make([]float64, R*M*N)
		vals := []float64{a, b, c, d}
		for i := range data {
			data[i] = vals[i%4] * float64(1+i%3)
		}
		w, err := New(context.Background(), Basis{Count: R, Rows: M, Cols: N, Data: data}, Options{})
		if err != nil {
			return
		}
		if w.Dim() < 1 || w.Dim() > min(R, M*N) {
			t.Fatalf("dimension %d", w.Dim())
		}
		x, y := make([]float64, M), make([]float64, N)
		x[0], y[0] = 1, 1
		if ub := w.ResidualBound(x, y); math.IsNaN(ub) || ub < 0 {
			t.Fatalf("ResidualBound %v", ub)
		}
		// The stored basis is orthonormal to working accuracy whatever the
		// scale of the input (derived: the inputs are normalised before the
		// Householder QR, which is backward stable; Higham 2002, §19.3), so
		// its proven orthogonality bound is tiny and the backward errors
		// are numbers. (An exponent-range bug once made them NaN/+Inf for
		// subnormal inputs.)
		if eta := w.OrthogonalityBound(); !(eta < 1e-10) {
			t.Fatalf("orthogonality bound %v", eta)
		}
		if rec, orth := w.BackwardError(); !(rec < 1e-10) || !(orth < 1e-10) {
			t.Fatalf("backward errors %v, %v", rec, orth)
		}
	})
}

// FuzzNewComplex: NewComplex on complex bases built from arbitrary values
// (NaN/Inf, subnormal, huge; shapes up to 4×3×3) never panics; when it
// succeeds the realified dimension is at most 2·min(r, mn), the
// stored basis is orthonormal to working accuracy (the same argument as
// FuzzNew: the realified inputs are normalised before a backward-stable
// QR, and the 1/√2 scaling adds one rounding), and the certified complex
// residual at e₁, e₁ is a number in [0, ‖e₁e₁ᵀ‖].
func FuzzNewComplex(f *testing.F) {
	f.Add(uint8(1), uint8(1), uint8(1), 1.0, 0.0, 0.0, 1.0)
	f.Add(uint8(2), uint8(2), uint8(3), 1e-300, 1e300, -2.5, 5e-324)
	f.Add(uint8(0), uint8(0), uint8(0), 0.0, 0.0, 0.0, 0.0)
	f.Fuzz(func(t *testing.T, r, m, n uint8, a, b, c, d float64) {
		R, M, N := int(r%4)+1, int(m%3)+1, int(n%3)+1
		data := make([]complex128, R*M*N)
		for i := range data {
			data[i] = complex([]float64{a, b, c, d}[i%4]*float64(1+i%3), []float64{d, c, b, a}[i%4])
		}
		w, err := NewComplex(context.Background(), ComplexBasis{Count: R, Rows: M, Cols: N, Data: data}, Options{})
		if err != nil {
			return
		}
		if w.Dim() < 1 || w.Dim() > 2*min(R, M*N) {
			t.Fatalf("realified dimension %d", w.Dim())
		}
		if eta := w.OrthogonalityBound(); !(eta < 1e-10) {
			t.Fatalf("orthogonality bound %v", eta)
		}
		x, y := make([]float64, 2*M), make([]float64, 2*N)
		x[0], y[0] = 1, 1
		if ub := w.ComplexResidualBound(x, y); math.IsNaN(ub) || ub < 0 || ub > 1+1e-12 {
			t.Fatalf("ComplexResidualBound %v", ub)
		}
	})
}
