package cpd

import (
	"context"
	"errors"
	"fmt"
	"math"
	"math/cmplx"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"

	"github.com/segre-lab/segre/rankone"
	"github.com/segre-lab/segre/rankone/suite"
)

func randComplexFactors(rng *rand.Rand, m, n, p, r int) (*mat.CDense, *mat.CDense, *mat.CDense) {
	out := make([]*mat.CDense, 3)
	for i, rows := range []int{m, n, p} {
		d := make([]complex128, rows*r)
		for l := range d {
			d[l] = complex(rng.NormFloat64(), rng.NormFloat64())
		}
		out[i] = mat.NewCDense(rows, r, d)
	}
	return out[0], out[1], out[2]
}

// matchedComplex returns, for each true column of x, the best
// |x_s* y_u|/(‖x_s‖‖y_u‖) over the columns of y: 1 exactly when the column
// is recovered up to a complex scalar (Cauchy–Schwarz), so the worst of
// them measures recovery up to permutation and scaling.
func matchedComplex(x, y *mat.CDense) float64 {
	rows, r := x.Dims()
	_, ry := y.Dims()
	worst := 1.0
	for s := 0; s < r; s++ {
		best := 0.0
		for u := 0; u < ry; u++ {
			var d complex128
			for i := 0; i < rows; i++ {
				d += cmplx.Conj(x.At(i, s)) * y.At(i, u)
			}
			best = math.Max(best, cmplx.Abs(d)/(colNorm(x, s)*colNorm(y, u)))
		}
		worst = math.Min(worst, best)
	}
	return worst
}

// cmul returns the complex product u·a of a row-major n×n u and a.
func cmul(u []complex128, a *mat.CDense) *mat.CDense {
	rows, r := a.Dims()
	out := mat.NewCDense(rows, r, nil)
	for i := 0; i < rows; i++ {
		for s := 0; s < r; s++ {
			var v complex128
			for k := 0; k < rows; k++ {
				v += u[i*rows+k] * a.At(k, s)
			}
			out.Set(i, s, v)
		}
	}
	return out
}

// Exact recovery of planted complex components (derived as for real
// arrays, see the package doc and the notes on complex arrays: with A, B,
// C of full column rank the rank-one points of the slice span are the
// a_i b_iᵀ, unique up to scale by Jennrich's argument, Harshman 1970;
// Leurgans, Ross, Abel 1993), also after rotating the first two modes by
// random unitaries (suite.Unitary). Tolerances as in TestExactRecovery
// (common practice: backward-stable steps, 1e-9 on the cosines).
func TestComplexExactRecovery(t *testing.T) {
	rng := rand.New(rand.NewPCG(41, 42))
	for _, c := range []struct{ m, n, p, r int }{{6, 5, 7, 4}, {8, 8, 8, 8}, {5, 9, 3, 3}, {2, 2, 2, 2}, {4, 3, 1, 1}} {
		a, b, cc := randComplexFactors(rng, c.m, c.n, c.p, c.r)
		for _, rot := range []bool{false, true} {
			t.Run(fmt.Sprintf("%v/rot=%v", c, rot), func(t *testing.T) {
				if rot {
					a, b = cmul(suite.Unitary(rng, c.m), a), cmul(suite.Unitary(rng, c.n), b)
				}
				d, err := DecomposeComplex(context.Background(), ComposeComplex(a, b, cc), Options{Seed: 1})
				if err != nil {
					t.Fatal(err)
				}
				if ma, mb, mc := matchedComplex(a, d.A), matchedComplex(b, d.B), matchedComplex(cc, d.C); ma < 1-1e-9 || mb < 1-1e-9 || mc < 1-1e-9 {
					t.Errorf("cosines %v %v %v", ma, mb, mc)
				}
				if d.RelError > 1e-10 {
					t.Errorf("relative error %v", d.RelError)
				}
				if len(d.Distances) != c.r {
					t.Errorf("%d distances for rank %d", len(d.Distances), c.r)
				}
				for _, u := range d.Distances {
					if u > 1e-8 {
						t.Errorf("certified distance %v", u)
					}
				}
				if !d.Unique {
					t.Error("Kruskal's condition should hold for generic factors")
				}
			})
		}
	}
}

// A real array given as complex: its slice span is the real span treated
// over C, whose points include the real components (every real point is a
// complex point); with r ≤ min(m, n) generic components they are all the
// points (complexSpanOf's argument in package rankone), so the real
// factors are recovered up to a complex scalar.
func TestComplexRealArray(t *testing.T) {
	rng := rand.New(rand.NewPCG(43, 44))
	a, b, c := randFactors(rng, 5, 6, 4, 3)
	rt := Compose(a, b, c)
	ct := ComplexTensor{M: rt.M, N: rt.N, P: rt.P, Data: make([]complex128, len(rt.Data))}
	for i, v := range rt.Data {
		ct.Data[i] = complex(v, 0)
	}
	d, err := DecomposeComplex(context.Background(), ct, Options{Seed: 2})
	if err != nil {
		t.Fatal(err)
	}
	toC := func(x *mat.Dense) *mat.CDense {
		rows, r := x.Dims()
		out := mat.NewCDense(rows, r, nil)
		for i := 0; i < rows; i++ {
			for s := 0; s < r; s++ {
				out.Set(i, s, complex(x.At(i, s), 0))
			}
		}
		return out
	}
	if ma, mb, mc := matchedComplex(toC(a), d.A), matchedComplex(toC(b), d.B), matchedComplex(toC(c), d.C); ma < 1-1e-9 || mb < 1-1e-9 || mc < 1-1e-9 {
		t.Errorf("cosines %v %v %v", ma, mb, mc)
	}
	if d.RelError > 1e-10 {
		t.Errorf("relative error %v", d.RelError)
	}
}

// Complex noise of relative size σ: the fit error is of order σ (derived
// as in TestNoisyRecovery: the residual of the true factors is the noise
// itself, of relative size about σ) and the components are close.
func TestComplexNoisyRecovery(t *testing.T) {
	rng := rand.New(rand.NewPCG(45, 46))
	a, b, c := randComplexFactors(rng, 7, 6, 8, 4)
	tt := ComposeComplex(a, b, c)
	var nrm float64
	for _, v := range tt.Data {
		nrm += real(v)*real(v) + imag(v)*imag(v)
	}
	nrm = math.Sqrt(nrm / float64(len(tt.Data)))
	for _, sigma := range []float64{1e-6, 1e-3} {
		noisy := ComplexTensor{M: 7, N: 6, P: 8, Data: append([]complex128(nil), tt.Data...)}
		for i := range noisy.Data {
			// Each of the two parts has variance σ²/2 times the entries' mean
			// square, so the noise has relative size σ.
			noisy.Data[i] += complex(sigma*nrm*rng.NormFloat64()/math.Sqrt2, sigma*nrm*rng.NormFloat64()/math.Sqrt2)
		}
		d, err := DecomposeComplex(context.Background(), noisy, Options{Rank: 4, Seed: 2})
		if err != nil {
			t.Fatalf("σ=%g: %v", sigma, err)
		}
		if d.RelError > 2*sigma {
			t.Errorf("σ=%g: relative error %v", sigma, d.RelError)
		}
		if ma := matchedComplex(a, d.A); ma < 1-100*sigma {
			t.Errorf("σ=%g: A cosine %v", sigma, ma)
		}
		t.Logf("σ=%g: relative error %.3g, %d ALS iterations, A cosine %.12f", sigma, d.RelError, d.Iterations, matchedComplex(a, d.A))
	}
}

// Bad complex arrays and ranks are errors, not panics, and the input is
// not changed; r > min(m, n) is refused as over R.
func TestComplexBadInput(t *testing.T) {
	ctx := context.Background()
	rng := rand.New(rand.NewPCG(47, 48))
	a, b, c := randComplexFactors(rng, 4, 5, 8, 6)
	if _, err := DecomposeComplex(ctx, ComposeComplex(a, b, c), Options{}); !errors.Is(err, rankone.ErrTooManyTerms) {
		t.Errorf("r > min(m, n): %v", err)
	}
	good := ComplexTensor{M: 2, N: 2, P: 2, Data: []complex128{1, 1i, 0, 0, 0, 0, 1, -1i}}
	keep := append([]complex128(nil), good.Data...)
	cases := []struct {
		name string
		t    ComplexTensor
		opt  Options
	}{
		{"negative size", ComplexTensor{M: -1, N: 2, P: 2}, Options{}},
		{"short data", ComplexTensor{M: 2, N: 2, P: 2, Data: make([]complex128, 7)}, Options{}},
		{"overflowing size", ComplexTensor{M: 1 << 40, N: 1 << 40, P: 1 << 40, Data: make([]complex128, 8)}, Options{}},
		{"NaN imaginary part", ComplexTensor{M: 1, N: 1, P: 2, Data: []complex128{complex(1, math.NaN()), 1}}, Options{}},
		{"infinite real part", ComplexTensor{M: 1, N: 1, P: 2, Data: []complex128{complex(math.Inf(-1), 0), 1}}, Options{}},
		{"zero tensor", ComplexTensor{M: 2, N: 2, P: 2, Data: make([]complex128, 8)}, Options{}},
		{"rank too large", good, Options{Rank: 5}},
		{"negative rank", good, Options{Rank: -1}},
	}
	for _, c := range cases {
		if _, err := DecomposeComplex(ctx, c.t, c.opt); err == nil {
			t.Errorf("%s: no error", c.name)
		}
	}
	for i := range keep {
		if good.Data[i] != keep[i] {
			t.Fatal("input changed")
		}
	}
	// The good array itself: e₁⊗e₁⊗(1, i) + e₂⊗e₂⊗(1, −i) (derived from
	// its entries), two terms.
	d, err := DecomposeComplex(ctx, good, Options{})
	if err != nil || d.RelError > 1e-12 {
		t.Fatalf("good array: %v, %v", d, err)
	}
	// Kruskal: parallel columns of C (c₂ = (1 + i)c₁) make the condition fail.
	a, b, c = randComplexFactors(rng, 5, 5, 4, 3)
	for k := 0; k < 4; k++ {
		c.Set(k, 1, (1+1i)*c.At(k, 0))
	}
	if kruskalUniqueComplex(a, b, c) {
		t.Error("Kruskal's condition reported with parallel columns of C")
	}
}
