package sos

// Found by the adversarial review: VerifyLevelTwo returned NaN with a nil
// error when an orbit sum of K overflows (two entries of one orbit at
// math.MaxFloat64: the compensated sum's TwoSum computes Inf − Inf), and
// math.Min(1, NaN) is NaN. NaN is not a certified upper bound on h*: the
// doc promises "a certified upper bound on h*" or an error (the standards:
// bad input gets a clear error). The module's own callers are safe only
// because they pass the result through rankone.DistanceLower, whose
// !(h < 1) test maps NaN to 0; a user who tests `hb > target` to reject a
// certificate accepts this one. (sos.Verify and VerifyComplex return 1 or
// an error on the same kind of input.)

import (
	"math"
	"testing"

	"github.com/segre-lab/segre/rankone/suite"
)

func TestLevelTwoOverflowingCertificate(t *testing.T) {
	w := suite.MustNew(t, suite.Random(3, 3, 4, 1))
	dim := 3 * 3 * 4 / 2
	k := make([]float64, dim*dim)
	// Entries (0, 1) and (1, 0) lie in one orbit (same {i, k}, same
	// multiset of y indices): both MaxFloat64, their sum overflows.
	k[0*dim+1], k[1*dim+0] = math.MaxFloat64, math.MaxFloat64
	hb, err := VerifyLevelTwo(w, LevelTwoCertificate{M: 3, N: 3, T: 1, K: k})
	if err == nil && !(hb >= 0 && hb <= 1) {
		t.Fatalf("VerifyLevelTwo = %v with no error: not a certified bound in [0, 1]", hb)
	}
}
