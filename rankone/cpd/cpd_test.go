package cpd

import (
	"context"
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"

	"github.com/segre-lab/segre/rankone"
	"github.com/segre-lab/segre/rankone/suite"
)

func randFactors(rng *rand.Rand, m, n, p, r int) (*mat.Dense, *mat.Dense, *mat.Dense) {
	a, b, c := mat.NewDense(m, r, nil), mat.NewDense(n, r, nil), mat.NewDense(p, r, nil)
	for _, x := range []*mat.Dense{a, b, c} {
		raw := x.RawMatrix().Data
		for i := range raw {
			raw[i] = rng.NormFloat64()
		}
	}
	return a, b, c
}

// matched returns, for each true column of x, the best |cosine| with a
// column of y (recovery up to permutation, sign and scale).
func matched(x, y *mat.Dense) float64 {
	_, r := x.Dims()
	worst := 1.0
	for s := 0; s < r; s++ {
		xs := x.ColView(s)
		best := 0.0
		for u := 0; u < r; u++ {
			yu := y.ColView(u)
			best = math.Max(best, math.Abs(mat.Dot(xs, yu))/(mat.Norm(xs, 2)*mat.Norm(yu, 2)))
		}
		worst = math.Min(worst, best)
	}
	return worst
}

// Exact recovery of planted components (derived: with A, B of full column
// rank and C of full column rank, the slice span's rank-one points are the
// a_i b_iᵀ), also after rotating the first two modes by Haar matrices.
func TestExactRecovery(t *testing.T) {
	rng := rand.New(rand.NewPCG(31, 32))
	for _, c := range []struct{ m, n, p, r int }{{6, 5, 7, 4}, {8, 8, 8, 8}, {5, 9, 3, 3}} {
		a, b, cc := randFactors(rng, c.m, c.n, c.p, c.r)
		for _, rot := range []bool{false, true} {
			if rot {
				u := mat.NewDense(c.m, c.m, suite.Haar(rng, c.m))
				v := mat.NewDense(c.n, c.n, suite.Haar(rng, c.n))
				var ua, vb mat.Dense
				ua.Mul(u, a)
				vb.Mul(v, b)
				a, b = &ua, &vb
			}
			tt := Compose(a, b, cc)
			d, err := Decompose(context.Background(), tt, Options{Seed: 1})
			if err != nil {
				t.Fatalf("%v: %v", c, err)
			}
			// Rounding-level recovery (common practice: backward-stable steps, 1e-9).
			if ma, mb, mc := matched(a, d.A), matched(b, d.B), matched(cc, d.C); ma < 1-1e-9 || mb < 1-1e-9 || mc < 1-1e-9 {
				t.Errorf("%v rot=%v: cosines %v %v %v", c, rot, ma, mb, mc)
			}
			if d.RelError > 1e-10 {
				t.Errorf("%v: relative error %v", c, d.RelError)
			}
			for _, u := range d.Distances {
				if u > 1e-8 {
					t.Errorf("%v: certified distance %v", c, u)
				}
			}
			if !d.Unique {
				t.Errorf("%v: Kruskal's condition should hold for generic factors", c)
			}
		}
	}
}

// With noise of relative size σ the fit error is of order σ (the noise
// cannot be fitted by r components: derived, the residual of the true
// factors is the noise itself), and the components are close.
func TestNoisyRecovery(t *testing.T) {
	rng := rand.New(rand.NewPCG(33, 34))
	a, b, c := randFactors(rng, 7, 6, 8, 4)
	tt := Compose(a, b, c)
	var nrm float64
	for _, v := range tt.Data {
		nrm += v * v
	}
	nrm = math.Sqrt(nrm / float64(len(tt.Data)))
	for _, sigma := range []float64{1e-6, 1e-3} {
		noisy := Tensor{M: 7, N: 6, P: 8, Data: append([]float64(nil), tt.Data...)}
		for i := range noisy.Data {
			noisy.Data[i] += sigma * nrm * rng.NormFloat64()
		}
		d, err := Decompose(context.Background(), noisy, Options{Rank: 4, Seed: 2})
		if err != nil {
			t.Fatalf("σ=%g: %v", sigma, err)
		}
		if d.RelError > 2*sigma {
			t.Errorf("σ=%g: relative error %v", sigma, d.RelError)
		}
		if ma := matched(a, d.A); ma < 1-100*sigma {
			t.Errorf("σ=%g: A cosine %v", sigma, ma)
		}
	}
}

func TestFailures(t *testing.T) {
	rng := rand.New(rand.NewPCG(35, 36))
	// r > min(m, n): 6 components in 4×5 slices.
	a, b, c := randFactors(rng, 4, 5, 8, 6)
	if _, err := Decompose(context.Background(), Compose(a, b, c), Options{}); !errors.Is(err, rankone.ErrTooManyTerms) {
		t.Errorf("r > min(m, n): %v", err)
	}
	if _, err := Decompose(context.Background(), Tensor{M: 2, N: 2, P: 2, Data: []float64{1}}, Options{}); !errors.Is(err, ErrShape) {
		t.Errorf("bad shape: %v", err)
	}
	// Kruskal: parallel columns of C make the sufficient condition fail.
	a, b, c = randFactors(rng, 5, 5, 4, 3)
	for k := 0; k < 4; k++ {
		c.Set(k, 1, 2*c.At(k, 0))
	}
	if KruskalUnique(a, b, c) {
		t.Error("Kruskal's condition reported with parallel columns of C")
	}
}

// The many-start ALS baseline fits an exact low-rank tensor.
func TestFitALS(t *testing.T) {
	rng := rand.New(rand.NewPCG(37, 38))
	a, b, c := randFactors(rng, 5, 5, 5, 2)
	d, err := FitALS(context.Background(), Compose(a, b, c), 2, 3, 1, 2000)
	if err != nil {
		t.Fatal(err)
	}
	if d.RelError > 1e-6 {
		t.Errorf("ALS relative error %v", d.RelError)
	}
}

// Bad tensors and ranks are errors, not panics, and the input is not
// changed.
func TestBadInput(t *testing.T) {
	ctx := context.Background()
	good := Tensor{M: 2, N: 2, P: 2, Data: []float64{1, 0, 0, 1, 0, 1, 1, 0}}
	keep := append([]float64(nil), good.Data...)
	nan := Tensor{M: 1, N: 1, P: 2, Data: []float64{math.NaN(), 1}}
	cases := []struct {
		name string
		run  func() error
	}{
		{"negative size", func() error { _, err := Decompose(ctx, Tensor{M: -1, N: 2, P: 2}, Options{}); return err }},
		{"short data", func() error {
			_, err := Decompose(ctx, Tensor{M: 2, N: 2, P: 2, Data: make([]float64, 7)}, Options{})
			return err
		}},
		{"overflowing size", func() error {
			_, err := Decompose(ctx, Tensor{M: 1 << 40, N: 1 << 40, P: 1 << 40, Data: make([]float64, 8)}, Options{})
			return err
		}},
		{"NaN", func() error { _, err := Decompose(ctx, nan, Options{}); return err }},
		{"zero tensor", func() error {
			_, err := Decompose(ctx, Tensor{M: 2, N: 2, P: 2, Data: make([]float64, 8)}, Options{})
			return err
		}},
		{"rank too large", func() error { _, err := Decompose(ctx, good, Options{Rank: 5}); return err }},
		{"negative rank", func() error { _, err := Decompose(ctx, good, Options{Rank: -1}); return err }},
		{"ALS rank 0", func() error { _, err := FitALS(ctx, good, 0, 1, 1, 10); return err }},
		{"ALS rank 1e12", func() error { _, err := FitALS(ctx, good, 1e12, 1, 1, 10); return err }},
		{"ALS NaN", func() error { _, err := FitALS(ctx, nan, 1, 1, 1, 10); return err }},
	}
	for _, c := range cases {
		if err := c.run(); err == nil {
			t.Errorf("%s: no error", c.name)
		}
	}
	for i := range keep {
		if good.Data[i] != keep[i] {
			t.Fatal("input changed")
		}
	}
}
