package subspace

import (
	"bytes"
	"errors"
	"fmt"
	"math"
	"testing"
)

// hugeHeader is an .npy header declaring shape (r, m, n) with no data.
func hugeHeader(descr string, r, m, n int64) []byte {
	h := fmt.Sprintf("{'descr': '%s', 'fortran_order': False, 'shape': (%d, %d, %d), }", descr, r, m, n)
	for (10+len(h)+1)%64 != 0 {
		h += " "
	}
	h += "\n"
	b := []byte("\x93NUMPY\x01\x00")
	b = append(b, byte(len(h)), byte(len(h)>>8))
	return append(b, h...)
}

// Shapes whose memory estimate overflows int64 are refused with
// ErrTooLarge even under the largest limit, never allocated (they had
// wrapped to small estimates and panicked in make; found by the session-5
// review). The shapes are chosen so that each product in the estimate, or
// only the sum of its terms, overflows.
func TestOverflowingShapesRefused(t *testing.T) {
	for _, c := range []struct {
		descr   string
		r, m, n int64
	}{
		{"<c16", 344500000, 1, 344500000},
		{"<f8", 1<<30 - 1, 1, 1 << 30},
		{"<f8", 1<<30 - 1, 1 << 15, 1 << 15},
		{"<f8", 1200000000, 1, 1000000000},
	} {
		func() {
			defer func() {
				if p := recover(); p != nil {
					t.Errorf("%s (%d,%d,%d): panic: %v", c.descr, c.r, c.m, c.n, p)
				}
			}()
			_, err := ReadNPY(bytes.NewReader(hugeHeader(c.descr, c.r, c.m, c.n)), math.MaxInt64)
			if !errors.Is(err, ErrTooLarge) {
				t.Errorf("%s (%d,%d,%d): %v, want ErrTooLarge", c.descr, c.r, c.m, c.n, err)
			}
		}()
	}
	if got := workBytes(math.MaxInt32, math.MaxInt32); got != math.MaxInt64 || !tooLarge(got, math.MaxInt64) {
		t.Errorf("workBytes of a 2^31 × 2^31 array: %d, want saturated and refused", got)
	}
}
