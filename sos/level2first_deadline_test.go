package sos

import (
	"context"
	"errors"
	"sync/atomic"
	"testing"

	"github.com/segre-lab/segre/rankone"
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

// The interior-point level two cut by its deadline checks the certificate
// of its last iterate and keeps its bound too (before, the check was cut
// by the same deadline: Lower 0 whatever the iterate). The cut is the
// latest that falls inside the solve, found from a full run's number of
// context checks. On the UPB complement itself (3×3: a small SDP, so that
// the test is quick under qemu too) d* = 0.1685711, the value the test
// above uses (embedding does not change d*; branch-and-bound agrees,
// TestUPBComplement in rankone/suite).
func TestLevelTwoKeepsItsBoundAtTheDeadline(t *testing.T) {
	w := mustNew(t, suite.UPBComplement())
	count := &countdownCtx{Context: context.Background()}
	count.n.Store(1 << 40)
	full, err := (&LevelTwo{}).Search(count, w)
	if err != nil || full.Lower < 0.1685 {
		t.Fatalf("the full run: Lower %v, err %v", full.Lower, err)
	}
	checks := (1 << 40) - count.n.Load()
	// The latest cut that falls inside the solve (fewer iterations than
	// the full run's), found by stepping back 2% of the checks at a time.
	var r rankone.Result
	for n := checks - 1; ; n -= max(1, checks/50) {
		if n <= 0 {
			t.Fatal("no cut fell inside the solve")
		}
		ctx := &countdownCtx{Context: context.Background()}
		ctx.n.Store(n)
		r, err = (&LevelTwo{}).Search(ctx, w)
		if !errors.Is(err, context.Canceled) {
			t.Fatalf("the run was not cut by the deadline (err %v); the test needs it", err)
		}
		if r.Iterations < full.Iterations {
			break
		}
	}
	if r.Lower < 0.1685 || r.Lower > 0.16857110 {
		t.Errorf("Lower %v after %d of %d iterations, want about 0.16857 (a cut run keeps its verified bound)", r.Lower, r.Iterations, full.Iterations)
	}
}
