package sos

import (
	"context"
	"errors"
	"sync/atomic"
	"testing"

	"github.com/segre-lab/segre/rankone/suite"
)

// countdownCtx reports itself done after n calls of Err: a deadline at a
// fixed point of a run, independent of the machine's speed.
type countdownCtx struct {
	context.Context
	n atomic.Int64
}

func (c *countdownCtx) Err() error {
	if c.n.Add(-1) < 0 {
		return context.Canceled
	}
	return nil
}

// A first-order level two cut by its deadline still checks the certificate
// it has and keeps its bound (the session-5 review found the check itself
// cut by the same deadline, falling back to the Gershgorin bound: Lower 0).
// On the UPB complement embedded in 6×6, after about 70 iterations the
// certificate proves d* ≥ 0.1685 (level two's value there is 0.1685711,
// agreeing with branch-and-bound: TestUPBComplement in rankone/suite).
func TestLevelTwoFirstOrderKeepsItsBoundAtTheDeadline(t *testing.T) {
	w := mustNew(t, suite.Embed(suite.UPBComplement(), 6, 6))
	ctx := &countdownCtx{Context: context.Background()}
	ctx.n.Store(80)
	r, err := (&LevelTwoFirstOrder{}).Search(ctx, w)
	if !errors.Is(err, context.Canceled) {
		t.Fatalf("the run was not cut by the deadline (err %v, %d iterations); the test needs it", err, r.Iterations)
	}
	if r.Lower < 0.1685 || r.Lower > 0.16857110 {
		t.Errorf("Lower %v after %d iterations, want about 0.16856 (a cut run keeps its verified bound)", r.Lower, r.Iterations)
	}
}
