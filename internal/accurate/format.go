package accurate

import (
	"math"
	"math/big"
	"strconv"
	"strings"
)

// FormatDown returns v written with at most digits significant decimal
// digits (in the style of %g), rounded towards −∞: the printed decimal is
// ≤ v exactly, so a lower bound stays a lower bound as printed.
// FormatUp rounds towards +∞. Infinities print as "+Inf"/"-Inf", NaN as
// "NaN". It panics if digits < 1.
//
// Method (derived here): strconv gives the decimal nearest to v with the
// requested digits; big.Rat compares that decimal with v exactly (both are
// rationals); if it lies on the wrong side, the last digit is moved by one
// unit, which crosses v because the nearest decimal is within half a unit.
func FormatDown(v float64, digits int) string { return formatDirected(v, digits, -1) }

// FormatUp is FormatDown rounded towards +∞: the printed decimal is ≥ v.
func FormatUp(v float64, digits int) string { return formatDirected(v, digits, +1) }

func formatDirected(v float64, digits, dir int) string {
	if digits < 1 {
		panic("accurate: digits < 1 in FormatDown/FormatUp")
	}
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return strconv.FormatFloat(v, 'g', -1, 64)
	}
	if v == 0 {
		return "0"
	}
	s := strconv.FormatFloat(v, 'e', digits-1, 64) // "-d.ddde±XX"
	neg := s[0] == '-'
	if neg {
		s = s[1:]
	}
	epos := strings.IndexByte(s, 'e')
	mant := strings.Replace(s[:epos], ".", "", 1)
	exp, _ := strconv.Atoi(s[epos+1:])
	m, _ := new(big.Int).SetString(mant, 10)
	// The decimal's value is ±m·10^(exp−digits+1).
	sign := 1
	if neg {
		sign = -1
	}
	dec := decimalRat(m, exp-digits+1, sign)
	cmp := dec.Cmp(new(big.Rat).SetFloat64(v))
	if cmp != 0 && cmp != dir {
		// Wrong side: move the magnitude one unit towards the right side.
		// For a negative v, "down" means a larger magnitude.
		step := int64(dir * sign)
		m.Add(m, big.NewInt(step))
		lo := new(big.Int).Exp(big.NewInt(10), big.NewInt(int64(digits-1)), nil)
		hi := new(big.Int).Mul(lo, big.NewInt(10))
		switch {
		case m.Cmp(hi) >= 0: // 9.99 → 10.0: one more decimal place
			m.Quo(m, big.NewInt(10))
			exp++
		case m.Cmp(lo) < 0: // 1.00 → 0.999 (and, with one digit, 1 → 0.9)
			m.Mul(m, big.NewInt(10))
			m.Add(m, big.NewInt(9))
			exp--
		}
	}
	return gStyle(neg, m.String(), exp, digits)
}

// decimalRat returns sign·m·10^e as an exact rational.
func decimalRat(m *big.Int, e, sign int) *big.Rat {
	r := new(big.Rat).SetInt(m)
	p := new(big.Int).Exp(big.NewInt(10), big.NewInt(int64(abs(e))), nil)
	if e >= 0 {
		r.Mul(r, new(big.Rat).SetInt(p))
	} else {
		r.Quo(r, new(big.Rat).SetInt(p))
	}
	if sign < 0 {
		r.Neg(r)
	}
	return r
}

func abs(i int) int {
	if i < 0 {
		return -i
	}
	return i
}

// gStyle writes the digit string d (first digit nonzero, value d.ddd·10^exp)
// as %g does with the given precision: plain notation when
// −4 ≤ exp < digits, else d.ddde±XX; trailing zeros dropped.
func gStyle(neg bool, d string, exp, digits int) string {
	var b strings.Builder
	if neg {
		b.WriteByte('-')
	}
	if exp < -4 || exp >= digits {
		frac := strings.TrimRight(d[1:], "0")
		b.WriteByte(d[0])
		if frac != "" {
			b.WriteByte('.')
			b.WriteString(frac)
		}
		b.WriteByte('e')
		if exp < 0 {
			b.WriteByte('-')
		} else {
			b.WriteByte('+')
		}
		es := strconv.Itoa(abs(exp))
		if len(es) < 2 {
			b.WriteByte('0')
		}
		b.WriteString(es)
		return b.String()
	}
	if exp < 0 {
		b.WriteString("0.")
		b.WriteString(strings.Repeat("0", -exp-1))
		b.WriteString(strings.TrimRight(d, "0"))
		return b.String()
	}
	intPart, frac := d[:exp+1], strings.TrimRight(d[exp+1:], "0")
	b.WriteString(intPart)
	if frac != "" {
		b.WriteByte('.')
		b.WriteString(frac)
	}
	return b.String()
}
