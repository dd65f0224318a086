package accurate

import (
	"fmt"
	"math"
	"math/big"
	"math/rand/v2"
	"testing"
)

// FormatDown/FormatUp print a decimal on the right side of v (checked
// exactly with big.Rat), never more than one unit in the last digit away
// from %g's nearest decimal, and equal to %g's output when that is already
// on the right side (derived: the nearest decimal is within half a unit).
func TestFormatDirected(t *testing.T) {
	rng := rand.New(rand.NewPCG(21, 22))
	vals := []float64{1 / math.Sqrt2, 0.5, 1, 9.9999999999, 0.99999999999, 1e-300, 5e-324, math.MaxFloat64,
		-1 / math.Sqrt2, 123456789, 0.000123456789, 1e21, 0.1, 1.5e-5}
	for i := 0; i < 20000; i++ {
		vals = append(vals, rng.NormFloat64()*math.Pow(10, float64(rng.IntN(60)-30)))
	}
	for _, v := range vals {
		for _, digits := range []int{1, 3, 6, 10, 17} {
			exact := new(big.Rat).SetFloat64(v)
			lo, hi := FormatDown(v, digits), FormatUp(v, digits)
			rl, ok1 := new(big.Rat).SetString(lo)
			rh, ok2 := new(big.Rat).SetString(hi)
			if !ok1 || !ok2 {
				t.Fatalf("%v, %d digits: unparsable %q %q", v, digits, lo, hi)
			}
			if rl.Cmp(exact) > 0 || rh.Cmp(exact) < 0 {
				t.Fatalf("%v, %d digits: [%s, %s] does not contain it", v, digits, lo, hi)
			}
			g := fmt.Sprintf("%.*g", digits, v)
			rg, _ := new(big.Rat).SetString(g)
			if rg.Cmp(exact) <= 0 && lo != g {
				t.Fatalf("%v, %d digits: FormatDown %q, %%g %q already below", v, digits, lo, g)
			}
			if rg.Cmp(exact) >= 0 && hi != g {
				t.Fatalf("%v, %d digits: FormatUp %q, %%g %q already above", v, digits, hi, g)
			}
		}
	}
	// The two cases of the issue: 1/√2 (the distance of span{I₂}) printed
	// with 10 digits by %g is 0.7071067812, above 1/√2 = 0.70710678118654752…
	// (common practice: the decimal expansion of √2/2).
	if got := FormatDown(1/math.Sqrt2, 10); got != "0.7071067811" {
		t.Errorf("FormatDown(1/√2, 10) = %s, want 0.7071067811", got)
	}
	if got := FormatUp(1/math.Sqrt2, 10); got != "0.7071067812" {
		t.Errorf("FormatUp(1/√2, 10) = %s, want 0.7071067812", got)
	}
	for _, c := range []struct {
		v      float64
		d      int
		lo, hi string
	}{
		{9.99, 2, "9.9", "10"}, {1.001, 3, "1", "1.01"}, {-1.001, 3, "-1.01", "-1"}, {0, 4, "0", "0"},
		// float64(1e-5) is 1.00000000000000008e-05, just above 1e-5.
		{math.Inf(1), 3, "+Inf", "+Inf"}, {1e-5, 3, "1e-05", "1.01e-05"},
		// One digit, where the nearest decimal is 10^k on the wrong side
		// (found by an adversarial review: printed "0" before).
		{0.96, 1, "0.9", "1"}, {9.5, 1, "9", "1e+01"}, {99999.5, 1, "9e+04", "1e+05"}, {-9.6e-05, 1, "-0.0001", "-9e-05"},
	} {
		if lo, hi := FormatDown(c.v, c.d), FormatUp(c.v, c.d); lo != c.lo || hi != c.hi {
			t.Errorf("%v, %d digits: [%s, %s], want [%s, %s] (derived by hand)", c.v, c.d, lo, hi, c.lo, c.hi)
		}
	}
}
