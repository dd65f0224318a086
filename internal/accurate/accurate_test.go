package accurate

import (
	"math"
	"math/big"
	"math/rand/v2"
	"testing"
)

func exactDot(a, b []float64) *big.Float {
	s := new(big.Float).SetPrec(4096)
	for i := range a {
		p := new(big.Float).SetPrec(4096).SetFloat64(a[i])
		p.Mul(p, new(big.Float).SetPrec(4096).SetFloat64(b[i]))
		s.Add(s, p)
	}
	return s
}

// TwoSum and TwoProd are error-free (Ogita, Rump, Oishi 2005, §3): checked
// against exact big.Float arithmetic (4096-bit, so no rounding at all).
func TestErrorFreeTransformations(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 1))
	for i := 0; i < 2000; i++ {
		a := rng.NormFloat64() * math.Ldexp(1, rng.IntN(200)-100)
		b := rng.NormFloat64() * math.Ldexp(1, rng.IntN(200)-100)
		s, e := TwoSum(a, b)
		want := new(big.Float).SetPrec(4096).SetFloat64(a)
		want.Add(want, new(big.Float).SetPrec(4096).SetFloat64(b))
		got := new(big.Float).SetPrec(4096).SetFloat64(s)
		got.Add(got, new(big.Float).SetPrec(4096).SetFloat64(e))
		if got.Cmp(want) != 0 {
			t.Fatalf("TwoSum(%v, %v) not exact", a, b)
		}
		p, f := TwoProd(a, b)
		want = exactDot([]float64{a}, []float64{b})
		got = new(big.Float).SetPrec(4096).SetFloat64(p)
		got.Add(got, new(big.Float).SetPrec(4096).SetFloat64(f))
		if got.Cmp(want) != 0 {
			t.Fatalf("TwoProd(%v, %v) not exact", a, b)
		}
	}
}

// illDot returns vectors whose dot product cancels heavily: pairs (a, b),
// (−a, b) plus small terms, in shuffled order (derived here; the exact value
// is known through big.Float).
func illDot(rng *rand.Rand, n int) ([]float64, []float64) {
	x, y := make([]float64, n), make([]float64, n)
	for i := 0; i < n; i += 2 {
		e := rng.IntN(60)
		x[i] = rng.NormFloat64() * math.Ldexp(1, e)
		y[i] = rng.NormFloat64()
		if i+1 < n {
			x[i+1] = -x[i] * (1 + math.Ldexp(rng.NormFloat64(), -40))
			y[i+1] = y[i]
		}
	}
	rng.Shuffle(n, func(i, j int) { x[i], x[j] = x[j], x[i]; y[i], y[j] = y[j], y[i] })
	return x, y
}

// The bound of Acc.Result holds against the exact dot product (big.Float),
// on well- and ill-conditioned data (Ogita, Rump, Oishi 2005, Prop. 5.5).
func TestAccBound(t *testing.T) {
	rng := rand.New(rand.NewPCG(2, 2))
	trials := 500
	if testing.Short() {
		trials = 100
	}
	for i := 0; i < trials; i++ {
		n := 1 + rng.IntN(300)
		var x, y []float64
		if i%2 == 0 {
			x, y = illDot(rng, n)
		} else {
			x, y = make([]float64, n), make([]float64, n)
			for j := range x {
				x[j], y[j] = rng.NormFloat64(), rng.NormFloat64()
			}
		}
		var acc Acc
		for j := range x {
			acc.AddProd(x[j], y[j])
		}
		r, b := acc.Result()
		ex := exactDot(x, y)
		diff := new(big.Float).SetPrec(4096).Sub(new(big.Float).SetPrec(4096).SetFloat64(r), ex)
		diff.Abs(diff)
		if diff.Cmp(new(big.Float).SetFloat64(b)) > 0 {
			t.Fatalf("trial %d: |r − exact| = %v > bound %v", i, diff, b)
		}
	}
}

// SumSqUpper/Lower bracket the exact sum of squares (big.Float reference).
func TestSumSqBounds(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 3))
	for i := 0; i < 300; i++ {
		n := 1 + rng.IntN(500)
		x := make([]float64, n)
		for j := range x {
			x[j] = rng.NormFloat64() * math.Ldexp(1, rng.IntN(40)-20)
		}
		ex := exactDot(x, x)
		if ex.Cmp(new(big.Float).SetFloat64(SumSqUpper(x))) > 0 {
			t.Fatal("SumSqUpper below the exact value")
		}
		if ex.Cmp(new(big.Float).SetFloat64(SumSqLower(x))) < 0 {
			t.Fatal("SumSqLower above the exact value")
		}
	}
	// Subnormal inputs: the squares underflow to zero; the upper bound must
	// still cover them (derived: each square is below 2^-2148 < Tiny).
	x := []float64{5e-324, 1e-310, 3e-320}
	if ex := exactDot(x, x); ex.Cmp(new(big.Float).SetFloat64(SumSqUpper(x))) > 0 {
		t.Fatal("SumSqUpper below the exact value for subnormals")
	}
}

func TestGamma(t *testing.T) {
	// γ_n = nu/(1−nu) (Higham 2002, Lemma 3.1), checked in big.Float.
	for _, n := range []int{1, 2, 10, 1000, 1 << 20} {
		nu := new(big.Float).SetPrec(200).SetFloat64(float64(n) * U)
		den := new(big.Float).SetPrec(200).Sub(big.NewFloat(1), nu)
		g := new(big.Float).SetPrec(200).Quo(nu, den)
		if g.Cmp(new(big.Float).SetFloat64(Gamma(n))) > 0 {
			t.Fatalf("Gamma(%d) below γ_n", n)
		}
	}
}

// AddProds is AddProd term by term, bit for bit (derived: the same
// operations in the same order), on ordinary, huge, tiny, subnormal and
// signed-zero values.
func TestAddProdsMatchesAddProd(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 6))
	vals := []float64{0, math.Copysign(0, -1), 1, -1, 1e300, -1e-300, 5e-324, 1e-310, 3, 0.1}
	pick := func() float64 {
		if rng.IntN(3) == 0 {
			return vals[rng.IntN(len(vals))]
		}
		return rng.NormFloat64() * math.Pow(10, float64(rng.IntN(40)-20))
	}
	const n = 257
	a1, a2 := make([]Acc, n), make([]Acc, n)
	for round := 0; round < 50; round++ {
		a := pick()
		b := make([]float64, n)
		for i := range b {
			b[i] = pick()
		}
		AddProds(a2, a, b)
		for i := range b {
			a1[i].AddProd(a, b[i])
		}
	}
	for i := range a1 {
		if math.Float64bits(a1[i].S) != math.Float64bits(a2[i].S) || math.Float64bits(a1[i].C) != math.Float64bits(a2[i].C) ||
			math.Float64bits(a1[i].Abs) != math.Float64bits(a2[i].Abs) || a1[i].K != a2[i].K {
			t.Fatalf("entry %d: %+v vs %+v", i, a1[i], a2[i])
		}
	}
}

// Result (through ResultWith and its cached constants) gives the bits of
// the formula written out term by term with Gamma and UpperRel, as it
// was before the constants were cached (derived: the same operations).
func TestResultWithMatchesFormula(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 8))
	for trial := 0; trial < 2000; trial++ {
		var q Acc
		n := rng.IntN(300)
		for i := 0; i < n; i++ {
			q.AddProd(rng.NormFloat64()*math.Pow(10, float64(rng.IntN(60)-30)), rng.NormFloat64())
		}
		r, b := q.Result()
		k := max(q.K, 2)
		g := Gamma(k)
		wantR := q.S + q.C
		wb := AddUp(MulUp(U, math.Abs(wantR)), MulUp(MulUp(g, g), UpperRel(q.Abs, k+1)))
		wb = AddUp(wb, MulUp(2*U, wb))
		wb = AddUp(wb, float64(q.K+2)*Tiny)
		if math.Float64bits(r) != math.Float64bits(wantR) || math.Float64bits(b) != math.Float64bits(wb) {
			t.Fatalf("K=%d: (%v, %v), want (%v, %v)", q.K, r, b, wantR, wb)
		}
	}
}

// Pow2Scale: max·s ∈ [1, 2) for normal maxima (derived from frexp), a
// finite s for subnormal ones, 1 for zero and non-finite input.
func TestPow2Scale(t *testing.T) {
	for _, v := range []float64{1, 1.5, 3, 1e-300, 1e300, math.MaxFloat64, 0x1p-1022} {
		if p := v * Pow2Scale(v); p < 1 || p >= 2 {
			t.Errorf("%g·s = %g", v, p)
		}
	}
	for _, v := range []float64{5e-324, 1e-310} {
		if s := Pow2Scale(v); math.IsInf(s, 0) || s != 0x1p1023 {
			t.Errorf("subnormal %g: s = %g, want 2^1023", v, s)
		}
	}
	for _, v := range []float64{0, math.Inf(1), math.NaN()} {
		if Pow2Scale(v) != 1 {
			t.Errorf("%v: s ≠ 1", v)
		}
	}
}

// genDot returns x, y of length n ≥ 6 whose dot product has condition
// number about 2^(2·half) (cond = 2·Σ|xᵢyᵢ|/|Σ xᵢyᵢ|), built like GenDot of
// Ogita, Rump, Oishi, "Accurate sum and dot product", SIAM J. Sci. Comput.
// 26 (2005), Algorithm 6.1 (recalled from memory, written here in our own
// form): the first half of the terms has exponents spread over [0, half];
// each term of the second half is chosen, with exponents falling from half
// to 0, to cancel the running exact sum (tracked in big.Float), so that the
// exact result is tiny beside the terms. Shuffled, so the cancellation is
// met in any order.
func genDot(rng *rand.Rand, n, half int) ([]float64, []float64) {
	x, y := make([]float64, n), make([]float64, n)
	h := n / 2
	for i := 0; i < h; i++ {
		e := 0
		if i > 0 {
			e = rng.IntN(half + 1)
		}
		if i == h-1 {
			e = half
		}
		x[i] = (2*rng.Float64() - 1) * math.Ldexp(1, e/2)
		y[i] = (2*rng.Float64() - 1) * math.Ldexp(1, e-e/2)
	}
	for i := h; i < n; i++ {
		e := half - half*(i-h)/(n-h-1)
		x[i] = (2*rng.Float64() - 1) * math.Ldexp(1, e/2)
		if x[i] == 0 {
			x[i] = 1
		}
		// y[i] ≈ (r·2^e − exact)/x[i]: pull the running sum towards a
		// random value of size 2^e.
		s := exactDot(x[:i], y[:i])
		s.Neg(s)
		s.Add(s, new(big.Float).SetFloat64((2*rng.Float64()-1)*math.Ldexp(1, e)))
		s.Quo(s, new(big.Float).SetFloat64(x[i]))
		y[i], _ = s.Float64()
	}
	rng.Shuffle(n, func(i, j int) { x[i], x[j] = x[j], x[i]; y[i], y[j] = y[j], y[i] })
	return x, y
}

// The bound of the compensated dot product holds on thousands of
// ill-conditioned dot products (condition numbers 1e2 to 1e47, measured when
// the test was written), against the
// exact value in 4096-bit big.Float arithmetic (exact for these data), for
// both accumulation paths (AddProd and AddProds). This is the test that
// failed under GOAMD64=v3 and on arm64 when the compiler fused the rounded
// product of TwoProd into the following sum: any build must show zero
// violations (Ogita, Rump, Oishi 2005, Prop. 5.5, is the bound under test).
func TestAccBoundIllConditioned(t *testing.T) {
	rng := rand.New(rand.NewPCG(11, 12))
	trials := 4000
	if testing.Short() {
		trials = 1000
	}
	violations, worst := 0, 0.0
	for trial := 0; trial < trials; trial++ {
		n := 6 + rng.IntN(120)
		half := 5 + rng.IntN(150)
		x, y := genDot(rng, n, half)
		var q Acc
		for j := range x {
			q.AddProd(x[j], y[j])
		}
		qs := make([]Acc, 1)
		for j := range x {
			AddProds(qs, x[j], y[j:j+1])
		}
		ex := exactDot(x, y)
		for _, acc := range []*Acc{&q, &qs[0]} {
			r, b := acc.Result()
			diff := new(big.Float).SetPrec(4096).Sub(new(big.Float).SetPrec(4096).SetFloat64(r), ex)
			diff.Abs(diff)
			if diff.Cmp(new(big.Float).SetFloat64(b)) > 0 {
				violations++
				d, _ := diff.Float64()
				worst = max(worst, d/b)
			}
		}
	}
	if violations > 0 {
		t.Fatalf("%d of %d compensated dot products violate their bound (worst error/bound %.3g)", violations, 2*trials, worst)
	}
}
