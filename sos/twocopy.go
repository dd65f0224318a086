package sos

import (
	"context"
	"fmt"
	"time"

	"github.com/segre-lab/segre/rankone"
	"github.com/segre-lab/segre/subspace"
)

// TwoCopy is EigenBound as a rankone.Searcher: the eigenvalue-only bound of
// the two-copy symmetric extension (the level-two argument with K = 0),
// certified by the verified Cholesky test. It searches for no witness (its
// Upper is the trivial witness's). It is strictly weaker than LevelTwo but
// costs one eigenvalue bound instead of an SDP, and, like level two, it can
// prove something where level one proves nothing (subspaces whose
// projector is invariant under the partial transpose, such as the
// complements of unextendible product bases). Real subspaces only (a
// complex subspace's realification would give a valid but needlessly weak
// bound).
type TwoCopy struct{}

var _ rankone.Searcher = (*TwoCopy)(nil)

// Name returns "two-copy eigenvalue bound".
func (*TwoCopy) Name() string { return "two-copy eigenvalue bound" }

// Search implements rankone.Searcher.
func (t *TwoCopy) Search(ctx context.Context, w *subspace.Subspace) (rankone.Result, error) {
	begin := time.Now()
	res := startResult(w, t.Name())
	if w.Field() == subspace.Complex {
		return res, fmt.Errorf("%w: the two-copy eigenvalue bound is real only", ErrTooLarge)
	}
	hb, err := EigenBound(ctx, w)
	if err == nil {
		if lo := rankone.DistanceLower(hb); lo > 0 {
			res.Lower, res.LowerBy = lo, t.Name()
		}
	}
	return finishResult(ctx, res, begin, err)
}
