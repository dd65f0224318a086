package sos

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/floats"
	"gonum.org/v1/gonum/mat"

	"github.com/segre-lab/segre/internal/reference"
)

// refEigen is gonum's full decomposition of v, computed on v scaled by a
// power of two (exact) with its largest entry in [1, 2): gonum v0.17.0
// panics on entries near underflow (see internal/eigen.Sym).
func refEigen(t *testing.T, v []float64, n int) ([]float64, *mat.Dense) {
	t.Helper()
	var big float64
	for _, x := range v {
		big = math.Max(big, math.Abs(x))
	}
	ex := 0
	if big > 0 {
		_, ex = math.Frexp(big)
	}
	sc := make([]float64, len(v))
	for i, x := range v {
		sc[i] = math.Ldexp(x, 1-ex)
	}
	var es mat.EigenSym
	if !es.Factorize(mat.NewSymDense(n, sc), true) {
		t.Fatal("gonum EigenSym failed")
	}
	var vecs mat.Dense
	es.VectorsTo(&vecs)
	vals := es.Values(nil)
	for i := range vals {
		vals[i] = math.Ldexp(vals[i], ex-1)
	}
	return vals, &vecs
}

// refNegPart is (−V)₊ from gonum's full decomposition (the reference).
func refNegPart(t *testing.T, v []float64, n int) []float64 {
	t.Helper()
	ev, vecs := refEigen(t, v, n)
	out := make([]float64, n*n)
	for k, l := range ev {
		if l >= 0 {
			continue
		}
		for i := 0; i < n; i++ {
			for j := 0; j < n; j++ {
				out[i*n+j] -= l * vecs.At(i, k) * vecs.At(j, k)
			}
		}
	}
	return out
}

// withSpectrum returns Q diag(ev) Qᵀ for a random orthogonal Q.
func withSpectrum(rng *rand.Rand, ev []float64) []float64 {
	n := len(ev)
	q := reference.RandOrthogonal(rng, n)
	out := make([]float64, n*n)
	for i := 0; i < n; i++ {
		for j := i; j < n; j++ {
			var s float64
			for k := 0; k < n; k++ {
				s += q.At(i, k) * ev[k] * q.At(j, k)
			}
			out[i*n+j], out[j*n+i] = s, s
		}
	}
	return out
}

// The negative part from one sign's eigenpairs agrees with gonum's full
// decomposition. Tolerance (derived here): both are backward stable, the
// map V ↦ V₋ is the projection onto a convex cone (1-Lipschitz in the
// Frobenius norm), and inverse iteration's vectors are orthogonal to
// about n·ε relative to the cluster (Parlett 1998, §4.3), so the
// difference is a modest multiple of n·ε‖V‖_F; 1e-10·‖V‖_F leaves room.
// The cases: random (Gaussian) matrices of both dominant signs, matrices
// with multiple eigenvalues (the structured instances' moment matrices
// have few distinct ones; the tridiagonal form then splits), diagonal and
// zero matrices, one of order one, and tiny and huge scales.
func TestSplitterAgainstGonum(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 14))
	type tc struct {
		name string
		n    int
		v    []float64
	}
	var cases []tc
	for _, n := range []int{1, 2, 3, 7, 30, 97} {
		v := make([]float64, n*n)
		for i := 0; i < n; i++ {
			for j := i; j < n; j++ {
				x := rng.NormFloat64()
				v[i*n+j], v[j*n+i] = x, x
			}
		}
		cases = append(cases, tc{fmt.Sprintf("gauss%d", n), n, v})
		shift := append([]float64(nil), v...)
		for i := 0; i < n; i++ {
			shift[i*n+i] += 3 * math.Sqrt(float64(n))
		}
		cases = append(cases, tc{fmt.Sprintf("mostly-positive%d", n), n, shift})
	}
	for _, n := range []int{12, 40} {
		ev := make([]float64, n)
		for i := range ev {
			ev[i] = []float64{-1, 2, 0, -1, 2}[i%5]
		}
		cases = append(cases, tc{fmt.Sprintf("multiple%d", n), n, withSpectrum(rng, ev)})
		for i := range ev {
			ev[i] = float64(i%3-1) * (1 + 1e-9*float64(i)) // tight clusters
		}
		cases = append(cases, tc{fmt.Sprintf("clustered%d", n), n, withSpectrum(rng, ev)})
		for i := range ev {
			ev[i] = -1 + 1e-4*float64(i) // gaps between the two cluster thresholds
		}
		cases = append(cases, tc{fmt.Sprintf("spaced%d", n), n, withSpectrum(rng, ev)})
		d := make([]float64, n*n)
		for i := 0; i < n; i++ {
			d[i*n+i] = float64(i%4) - 1.5
		}
		cases = append(cases, tc{fmt.Sprintf("diagonal%d", n), n, d})
	}
	cases = append(cases, tc{"zero", 5, make([]float64, 25)})
	for _, sc := range []float64{1e-200, 1e200} {
		v := append([]float64(nil), cases[8].v...) // gauss30
		for i := range v {
			v[i] *= sc
		}
		cases = append(cases, tc{fmt.Sprintf("scaled%g", sc), cases[8].n, v})
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			in := append([]float64(nil), c.v...)
			got := make([]float64, c.n*c.n)
			s := newSplitter(c.n)
			if _, ok := s.negPart(c.v, got); !ok {
				t.Fatal("negPart failed")
			}
			for i := range in {
				if in[i] != c.v[i] {
					t.Fatal("input modified")
				}
			}
			want := refNegPart(t, c.v, c.n)
			d := make([]float64, len(got))
			floats.SubTo(d, got, want)
			diff, norm := floats.Norm(d, 2), floats.Norm(c.v, 2) // scaled: no underflow
			if diff > 1e-10*norm {
				t.Errorf("‖got − want‖ = %g, ‖V‖ = %g", diff, norm)
			}
			vals, ok := s.values(c.v)
			if !ok {
				t.Fatal("values failed")
			}
			ref, _ := refEigen(t, c.v, c.n)
			for i := range vals {
				if math.Abs(vals[i]-ref[i]) > 1e-10*norm {
					t.Errorf("eigenvalue %d: %g, gonum %g", i, vals[i], ref[i])
				}
			}
		})
	}
	// Non-finite input is refused, not propagated.
	v := make([]float64, 4)
	v[1], v[2] = math.NaN(), math.NaN()
	if _, ok := newSplitter(2).negPart(v, make([]float64, 4)); ok {
		t.Error("NaN accepted")
	}
}
