package rankone_test

import (
	"context"
	"errors"
	"math"
	"math/rand/v2"
	"testing"
	"time"

	"github.com/segre-lab/segre/rankone"

	"gonum.org/v1/gonum/mat"

	"github.com/segre-lab/segre/rankone/suite"
	"github.com/segre-lab/segre/subspace"
)

func mustNew(t *testing.T, b subspace.Basis) *subspace.Subspace {
	t.Helper()
	w, err := subspace.New(context.Background(), b, subspace.Options{})
	if err != nil {
		t.Fatal(err)
	}
	return w
}

// The flattening bound is exact for one matrix (Eckart & Young,
// Psychometrika 1, 1936: h* = σ₁²/‖B‖_F², from gonum's SVD in the family)
// and never below it; on random subspaces it is at least every h found.
func TestFlatteningBound(t *testing.T) {
	for _, in := range []suite.Instance{suite.OneMatrix(4, 7, 1), suite.OneMatrix(9, 3, 2), suite.Rotated(suite.OneMatrix(5, 5, 3), 1)} {
		w := mustNew(t, in.Basis)
		hu, lo := rankone.FlatteningBound(context.Background(), w)
		hstar := 1 - in.Optimum*in.Optimum
		if hu < hstar-1e-14 || hu > hstar+1e-12 {
			t.Errorf("%s: hUpper = %.17g, h* = %.17g", in.Name, hu, hstar)
		}
		// Lower is within about 1e-12/d* of d* (derived: d = √(1−h), dd/dh = −1/(2d)).
		if lo > in.Optimum+1e-14 || lo < in.Optimum-1e-11 {
			t.Errorf("%s: Lower = %.17g, d* = %.17g", in.Name, lo, in.Optimum)
		}
	}
	// Cross-check against gonum's EigenSym of the partial traces.
	rng := rand.New(rand.NewPCG(1, 1))
	for trial := 0; trial < 5; trial++ {
		in := suite.Random(3+trial, 4, 2, uint64(trial))
		w := mustNew(t, in.Basis)
		hu, _ := rankone.FlatteningBound(context.Background(), w)
		t1, _, t2, _ := rankone.PartialTraces(w)
		var es mat.EigenSym
		ref := 1.0
		for _, tt := range []*mat.SymDense{t1, t2} {
			es.Factorize(tt, false)
			v := es.Values(nil)
			ref = math.Min(ref, v[len(v)-1])
		}
		if hu < ref || hu > ref+1e-12 {
			t.Errorf("hUpper %.17g, gonum λmax %.17g", hu, ref)
		}
		res, _ := (&rankone.MultiStart{Starts: 8}).Search(context.Background(), w)
		if res.Value > hu {
			t.Errorf("found h = %v above the bound %v", res.Value, hu)
		}
		_ = rng
	}
}

// rankone.TopEigen agrees with gonum's EigenSym (reference library) on random
// symmetric matrices, from zero and from given starts.
func TestTopEigen(t *testing.T) {
	rng := rand.New(rand.NewPCG(2, 2))
	for _, n := range []int{1, 2, 7, 40, 120} {
		a := mat.NewSymDense(n, nil)
		for i := 0; i < n; i++ {
			for j := i; j < n; j++ {
				a.SetSym(i, j, rng.NormFloat64())
			}
		}
		var es mat.EigenSym
		es.Factorize(a, true)
		vals := es.Values(nil)
		x := make([]float64, n)
		th, _ := rankone.TopEigen(symApply(a), x, 0, 50, 1e-13)
		gap := 1.0
		if n > 1 {
			gap = vals[n-1] - vals[n-2]
		}
		if math.Abs(th-vals[n-1]) > 1e-10*math.Max(1, math.Abs(vals[n-1])) {
			t.Errorf("n=%d: θ = %v, gonum λmax = %v (gap %v)", n, th, vals[n-1], gap)
		}
	}
}

func TestVerifyErrors(t *testing.T) {
	w := mustNew(t, suite.Antisymmetric(3).Basis)
	cases := []struct {
		x, y []float64
		want error
	}{
		{[]float64{1, 0}, []float64{0, 1, 0}, rankone.ErrLength},
		{[]float64{1, 0, math.NaN()}, []float64{0, 1, 0}, rankone.ErrNotFinite},
		{[]float64{0, 0, 0}, []float64{0, 1, 0}, rankone.ErrZeroVec},
		{[]float64{1, 0, 0}, []float64{math.Inf(1), 1, 0}, rankone.ErrNotFinite},
	}
	for _, c := range cases {
		if _, err := rankone.Verify(w, c.x, c.y); !errors.Is(err, c.want) {
			t.Errorf("rankone.Verify(%v, %v): %v, want %v", c.x, c.y, err, c.want)
		}
	}
	// Scale invariance: rankone.Verify certifies the directions (derived: d is
	// homogeneous of degree 0 in x and y); powers of two are exact.
	x, y := []float64{1, 2, 3}, []float64{0.5, -1, 0.25}
	u1, _ := rankone.Verify(w, x, y)
	xs := []float64{0x1p-600, 0x1p-599, 3 * 0x1p-600}
	u2, _ := rankone.Verify(w, xs, y)
	if u1 != u2 {
		t.Errorf("rankone.Verify not scale invariant: %v vs %v", u1, u2)
	}
	// Antisymmetric 3×3, x = e1, y = e2: d² = 1 − 1/2 (derived in the family).
	// The bound's own inflation is about γ_{mn+1}·d plus a few ulps
	// (derived on subspace.ResidualBound): 4e-15 covers mn = 9.
	u, _ := rankone.Verify(w, []float64{1, 0, 0}, []float64{0, 1, 0})
	if u < math.Sqrt(0.5) || u > math.Sqrt(0.5)+4e-15 {
		t.Errorf("rankone.Verify = %.17g, want just above √½", u)
	}
}

func TestValueBounds(t *testing.T) {
	r := rankone.Result{Upper: 0.6, Lower: 0.8 * 0.5}
	lo, hi := r.ValueBounds()
	// Derived: 1 − 0.36 = 0.64 and 1 − 0.16 = 0.84, rounded outwards.
	if lo > 0.64 || lo < 0.64-1e-15 || hi < 0.84 || hi > 0.84+1e-15 {
		t.Errorf("ValueBounds = [%v, %v]", lo, hi)
	}
}

// rankone.MultiStart finds the antisymmetric optimum from every start and
// deduplicates: the maximisers x ⊥ y form a connected set, so distinct
// points are many, but every one has d = √½ (derived in the family).
func TestMultiStartPoints(t *testing.T) {
	w := mustNew(t, suite.HurwitzRadon(2, 1).Basis)
	// span{I}: h = (x·y)²/2, maximisers x = ±y: a single point up to sign.
	_, pts, err := (&rankone.MultiStart{Starts: 10, Method: &rankone.ALS{}}).SearchAll(context.Background(), w)
	if err != nil {
		t.Fatal(err)
	}
	for _, p := range pts {
		if math.Abs(p.Value-0.5) > 1e-12 {
			t.Errorf("point with h = %v, want 1/2", p.Value)
		}
	}
	total := 0
	for _, p := range pts {
		total += p.Hits
	}
	if total != 10 {
		t.Errorf("hits add to %d, want 10", total)
	}
}

// A portfolio with a budget returns by its deadline with valid bounds; on a
// cancelled context it says so.
func TestPortfolioBudget(t *testing.T) {
	in := suite.Planted(12, 12, 30, 5)
	w := mustNew(t, in.Basis)
	p := &rankone.Portfolio{Budget: 50 * time.Millisecond, Members: []rankone.Searcher{
		&rankone.MultiStart{Starts: 1 << 20, Workers: 1}, rankone.Flattening{},
	}}
	res, err := p.Search(context.Background(), w)
	if err != nil {
		t.Fatal(err)
	}
	if res.Status != rankone.LimitReached {
		t.Errorf("status %v, want limit reached (budget)", res.Status)
	}
	if u, _ := rankone.Verify(w, res.X, res.Y); u != res.Upper {
		t.Errorf("Upper %v ≠ rankone.Verify %v", res.Upper, u)
	}
}

func dotv(a, b []float64) float64 {
	var s float64
	for i := range a {
		s += a[i] * b[i]
	}
	return s
}

func symApply(a *mat.SymDense) func(dst, src []float64) {
	return func(dst, src []float64) {
		mat.NewVecDense(len(dst), dst).MulVec(a, mat.NewVecDense(len(src), src))
	}
}
