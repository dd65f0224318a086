package searchtest

import (
	"context"
	"fmt"
	"strings"
	"testing"

	"github.com/segre-lab/segre/rankone"
	"github.com/segre-lab/segre/subspace"
)

// recorder captures what Run reports.
type recorder struct {
	testing.TB
	errs []string
}

func (r *recorder) Helper() {}
func (r *recorder) Errorf(format string, a ...any) {
	r.errs = append(r.errs, fmt.Sprintf(format, a...))
}
func (r *recorder) Fatalf(format string, a ...any) { r.Errorf(format, a...) }
func (r *recorder) Fatal(a ...any)                 { r.errs = append(r.errs, fmt.Sprint(a...)) }
func (r *recorder) Error(a ...any)                 { r.errs = append(r.errs, fmt.Sprint(a...)) }

// sloppy returns the trivial witness but claims Upper = 0: one mistake.
type sloppy struct{}

func (sloppy) Search(ctx context.Context, w *subspace.Subspace) (rankone.Result, error) {
	r := rankone.TrivialResult(w, "sloppy")
	r.Upper = 0
	if ctx.Err() != nil {
		r.Status = rankone.Cancelled
		return r, ctx.Err()
	}
	return r, nil
}

// One mistake is reported once per property it breaks, with a count, not
// once per instance (issue 12: 76 repeated lines before).
func TestOneMistakeOneLine(t *testing.T) {
	rec := &recorder{TB: t}
	Run(rec, func() rankone.Searcher { return sloppy{} }, Options{})
	if len(rec.errs) == 0 || len(rec.errs) > 3 {
		t.Fatalf("%d lines reported:\n%s", len(rec.errs), strings.Join(rec.errs, "\n"))
	}
	for _, e := range rec.errs {
		if !strings.Contains(e, "failed on") {
			t.Errorf("line without a count: %s", e)
		}
	}
	t.Logf("reported:\n%s", strings.Join(rec.errs, "\n"))
}

// The kit's own results pass the suite: a searcher that returns
// WitnessResult at a fixed point and proves nothing.
type fixed struct{}

func (fixed) Search(ctx context.Context, w *subspace.Subspace) (rankone.Result, error) {
	x, y := make([]float64, w.Rows()), make([]float64, w.Cols())
	x[0], y[0] = 1, 1
	r := rankone.WitnessResult(w, "fixed", x, y)
	if ctx.Err() != nil {
		r.Status = rankone.Cancelled
		return r, ctx.Err()
	}
	return r, nil
}

func TestKitPasses(t *testing.T) {
	Run(t, func() rankone.Searcher { return fixed{} }, Options{})
}
