// Package accurate holds error-free transformations, compensated sums and
// dot products, and helpers that turn a floating-point result into a proven
// upper or lower bound on the exact real value it approximates.
//
// Model: IEEE 754 binary64, round to nearest, unit roundoff u = 2^-53.
// Every bound here is derived in the standard model fl(a∘b) = (a∘b)(1+δ),
// |δ| ≤ u (Higham, "Accuracy and Stability of Numerical Algorithms", 2nd ed.,
// 2002, §2.2), which holds whenever no underflow occurs. Underflow is covered
// by an absolute slack term: every product or quotient that underflows errs by
// at most 2^-1075 in absolute value, and sums are exact in the subnormal range,
// so each bound adds Tiny per operation it counts (Tiny = 2^-1060 is far larger
// than any accumulated underflow error and far below any value of interest).
//
// Fused multiply-add. The Go specification lets a compiler fuse x*y + z
// into one instruction with a single rounding, across statements, unless the
// product is converted explicitly: float64(x*y). Amd64 with GOAMD64=v3 and
// the default arm64 build do so. Fusion does not only "remove a rounding":
// an error-free transformation needs the *rounded* product p = fl(a·b) in
// every place it is used; if the compiler fuses p into the following sum,
// s = fl(S + a·b) is computed from the exact product while the error term
// e = a·b − p still assumes S + p, and the compensated result can be wrong
// by far more than its bound (measured: false Upper bounds on v3 builds).
// Hence the rule of this package and of every certified computation in this
// module: every product whose rounding an argument counts is written
// float64(a*b), which the specification forbids to fuse; math.FMA is used
// where an argument needs the exact product. `.ci/fusion-check` compiles the
// module for amd64 v3 and for arm64 and fails if a fused instruction appears
// in a function that is not listed there as uncertified.
//
// A priori bounds of the form |fl(Σ aᵢbᵢ) − Σ aᵢbᵢ| ≤ γ_n Σ|aᵢbᵢ| (used for
// sums computed by gonum, whose pure-Go kernels may be fused on arm64) stay
// valid under fusion: a fused step s_k = (s_{k−1} + a_k b_k)(1+δ_k) has one
// rounding where the unfused one has two, so the product of (1+δ) factors
// that multiplies each term has at most n factors either way (derived here,
// in the model of Higham 2002, §2.2 and §3.1).
package accurate

import "math"

// U is the unit roundoff of binary64 arithmetic, 2^-53.
const U = 0x1p-53

// Tiny is the absolute slack added per counted operation for underflow.
const Tiny = 0x1p-1060

// Gamma returns an upper bound on γ_n = n·u/(1 − n·u) (Higham 2002, Lemma 3.1).
// It panics if n·u ≥ 1/2, where the model's constants stop being useful.
func Gamma(n int) float64 {
	if n < 0 {
		panic("accurate: negative n in Gamma")
	}
	nu := float64(float64(n) * U) // exact for n < 2^53
	if nu >= 0.5 {
		panic("accurate: n too large in Gamma")
	}
	return Up(nu / (1 - nu)) // 1 − nu is exact in [1/2, 1]
}

// AddUp returns an upper bound on a + b (exact sum of the two floats).
func AddUp(a, b float64) float64 { return Up(a + b) }

// MulUp returns an upper bound on a·b for a, b ≥ 0.
func MulUp(a, b float64) float64 { return Up(a * b) }

// Up returns a float strictly above v when v is finite: the next float after v
// towards +Inf. Applied to a value computed with one rounding it gives an
// upper bound on the exact value.
func Up(v float64) float64 { return math.Nextafter(v, math.Inf(1)) }

// Down returns the next float after v towards -Inf.
func Down(v float64) float64 { return math.Nextafter(v, math.Inf(-1)) }

// UpperRel returns an upper bound on a nonnegative exact quantity E whose
// floating-point evaluation v satisfies |v − E| ≤ γ_ops·E (an expression of
// ops roundings on nonnegative data): E ≤ v/(1−γ_ops) ≤ v·(1+2γ_ops), each
// operation of the bound itself rounded upwards (AddUp, MulUp), plus the
// underflow slack.
//
// A NaN v (an evaluation that broke down, e.g. by overflow) gives +Inf, the
// only safe upper bound. It panics if v < 0.
func UpperRel(v float64, ops int) float64 {
	if math.IsNaN(v) {
		return math.Inf(1)
	}
	if v < 0 {
		panic("accurate: UpperRel of a negative value")
	}
	g := Gamma(ops)
	b := AddUp(v, MulUp(2*g, v))
	return AddUp(b, float64(float64(ops+1)*Tiny))
}

// LowerRel returns a lower bound (≥ 0) on a nonnegative exact quantity E with
// |v − E| ≤ γ_ops·E: E ≥ v/(1+γ_ops) ≥ v·(1−γ_ops), rounded downwards, less
// the underflow slack.
//
// A NaN v gives 0, the only safe lower bound. It panics if v < 0.
func LowerRel(v float64, ops int) float64 {
	if math.IsNaN(v) {
		return 0
	}
	if v < 0 {
		panic("accurate: LowerRel of a negative value")
	}
	g := Gamma(ops)
	l := Down(v - MulUp(g, v))
	l = Down(l - float64(float64(ops+1)*Tiny))
	if l < 0 {
		return 0
	}
	return l
}

// TwoSum returns s = fl(a+b) and e with a + b = s + e exactly
// (Knuth, TAOCP vol. 2; Ogita, Rump, Oishi 2005, Algorithm 3.1).
func TwoSum(a, b float64) (s, e float64) {
	s = a + b
	z := s - a
	e = (a - (s - z)) + (b - z)
	return s, e
}

// TwoProd returns p = fl(a·b) and e with a·b = p + e exactly, barring
// underflow (Ogita, Rump, Oishi 2005, §3, with FMA).
func TwoProd(a, b float64) (p, e float64) {
	p = float64(a * b) // the rounded product: must not be fused below
	e = math.FMA(a, b, -p)
	return p, e
}

// Acc accumulates a dot product Σ aᵢbᵢ (plus single terms) by the Dot2
// scheme of Ogita, Rump, Oishi, "Accurate sum and dot product", SIAM J. Sci.
// Comput. 26 (2005), Algorithm 5.3, and keeps what its error bound needs.
// The zero value is an empty sum.
type Acc struct {
	S   float64 // running high part
	C   float64 // running compensation
	Abs float64 // Σ |p| of the rounded products (and |a| of added terms)
	K   int     // number of terms
}

// AddProd adds a·b.
func (q *Acc) AddProd(a, b float64) {
	p, e := TwoProd(a, b)
	s, sig := TwoSum(q.S, p)
	q.S = s
	q.C += sig + e
	q.Abs += math.Abs(p)
	q.K++
}

// AddProds does acc[i].AddProd(a, b[i]) for every i, with the same
// operations in the same order (so bit-identical results), written out so
// that the hot loops of the certified bounds pay no call per term.
func AddProds(acc []Acc, a float64, b []float64) {
	acc = acc[:len(b)]
	for i, bi := range b {
		q := &acc[i]
		p := float64(a * bi) // rounded; see the package comment on fusion
		e := math.FMA(a, bi, -p)
		s := q.S + p
		z := s - q.S
		sig := (q.S - (s - z)) + (p - z)
		q.S = s
		q.C += sig + e
		q.Abs += math.Abs(p)
		q.K++
	}
}

// Add adds a single term a.
func (q *Acc) Add(a float64) {
	s, sig := TwoSum(q.S, a)
	q.S = s
	q.C += sig
	q.Abs += math.Abs(a)
	q.K++
}

// Result returns the compensated value r and a proven bound b with
// |r − exact| ≤ b.
//
// Derivation. Ogita, Rump, Oishi (2005), Proposition 5.5 (recalled from
// memory, checked against the statement of the compensated dot product's
// error in the literature): with K terms and K·u < 1,
// |r − exact| ≤ u·|exact| + γ_K²·Σ|aᵢbᵢ|. Since |exact| ≤ |r| + err, this
// gives err ≤ (u|r| + γ_K²·Σ|aᵢbᵢ|)/(1−u). The exact Σ|aᵢbᵢ| is at most
// (1+u)·Σ|pᵢ| and the float sum Abs of the |pᵢ| underestimates Σ|pᵢ| by at
// most γ_K, hence the UpperRel inflation. Underflow adds Tiny per term.
func (q *Acc) Result() (r, bound float64) {
	c := NewResultConsts(q.K)
	return q.ResultWith(&c)
}

// ResultConsts holds the constants of Result for accumulators of K terms,
// so that many accumulators of the same length share their computation.
type ResultConsts struct {
	k      int     // the K they are for
	g2     float64 // MulUp(γ_k, γ_k), k = max(K, 2)
	relAbs float64 // 2·γ_{k+1}, the UpperRel factor of Abs
	tinyA  float64 // (k+2)·Tiny, UpperRel's underflow slack
	tinyB  float64 // (K+2)·Tiny
}

// NewResultConsts returns the constants of Result for K terms.
func NewResultConsts(K int) ResultConsts {
	k := max(K, 2)
	g := Gamma(k)
	return ResultConsts{k: K, g2: MulUp(g, g), relAbs: 2 * Gamma(k+1), tinyA: float64(k+2) * Tiny, tinyB: float64(K+2) * Tiny}
}

// ResultWith is Result with the constants precomputed; it is Result's own
// code, so both give the same bits. It panics if c is for another K.
func (q *Acc) ResultWith(c *ResultConsts) (r, bound float64) {
	if c.k != q.K {
		panic("accurate: ResultConsts for another number of terms")
	}
	r = q.S + q.C
	abs := q.Abs
	if math.IsNaN(abs) {
		abs = math.Inf(1)
	} else {
		// UpperRel(q.Abs, k+1), written out with the cached γ.
		abs = AddUp(AddUp(abs, MulUp(c.relAbs, abs)), c.tinyA)
	}
	b := AddUp(MulUp(U, math.Abs(r)), MulUp(c.g2, abs))
	b = AddUp(b, MulUp(2*U, b)) // the factor 1/(1−u) ≤ 1 + 2u
	b = AddUp(b, c.tinyB)
	return r, b
}

// SumSqUpper returns a proven upper bound on Σ xᵢ².
func SumSqUpper(x []float64) float64 {
	var s float64
	for _, v := range x {
		s += float64(v * v)
	}
	return UpperRel(s, len(x)+1)
}

// SumSqLower returns a proven lower bound on Σ xᵢ² (never negative).
func SumSqLower(x []float64) float64 {
	var s float64
	for _, v := range x {
		s += float64(v * v)
	}
	return LowerRel(s, len(x)+1)
}

// SqrtUp returns an upper bound on √E given an upper bound v ≥ E ≥ 0.
func SqrtUp(v float64) float64 { return Up(math.Sqrt(v)) }

// SqrtDown returns a lower bound on √E given a lower bound 0 ≤ v ≤ E.
func SqrtDown(v float64) float64 {
	if v <= 0 {
		return 0
	}
	l := Down(math.Sqrt(v))
	if l < 0 {
		return 0
	}
	return l
}

// MaxAbs returns max |xᵢ| (0 for an empty slice; NaN propagates as NaN).
func MaxAbs(x []float64) float64 {
	var m float64
	for _, v := range x {
		a := math.Abs(v)
		if a > m || a != a {
			m = a
		}
	}
	return m
}

// Pow2Scale returns the power of two s such that max|xᵢ|·s lies in [1, 2),
// or 1 when x is all zero. Multiplying by s is exact unless entries fall into
// the subnormal range, which callers must check when exactness matters.
// For a subnormal maxAbs the power needed exceeds the largest float, so s is
// capped at 2^1023 (finite; max|xᵢ|·s is then below 1).
func Pow2Scale(maxAbs float64) float64 {
	if maxAbs == 0 || math.IsInf(maxAbs, 0) || math.IsNaN(maxAbs) {
		return 1
	}
	_, e := math.Frexp(maxAbs) // maxAbs = f·2^e, f ∈ [0.5, 1)
	return math.Ldexp(1, min(1-e, 1023))
}
