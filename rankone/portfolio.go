package rankone

import (
	"context"
	"errors"
	"fmt"
	"math"
	"sync"
	"time"

	"github.com/segre-lab/segre/subspace"
)

// Portfolio runs several searchers concurrently under one deadline and
// merges their bounds: the smallest Upper (with its witness) and the
// largest Lower. Both are certified by their own searchers, so the merged
// interval is certified too. Ties go to the earlier member, so the Result
// is deterministic whenever every member is.
//
// The zero value is ready to use.
type Portfolio struct {
	// Members are the searchers; nil means DefaultMembers().
	Members []Searcher
	// Budget is the time allowed for the whole run; zero means no limit
	// beyond the context's own deadline.
	Budget time.Duration
	// Progress, if set, is called at most every 200 ms with the merged bounds.
	Progress func(Progress)
}

var _ Searcher = (*Portfolio)(nil)

// DefaultMembers returns the default portfolio: the flattening bound and
// multi-start runs of the three local methods.
func DefaultMembers() []Searcher {
	return []Searcher{
		Flattening{},
		&MultiStart{Method: &TrustRegion{}, Workers: 1},
		&MultiStart{Method: &ALS{}, Workers: 1},
		&MultiStart{Method: &Power{}, Workers: 1},
	}
}

// Name returns "portfolio".
func (p *Portfolio) Name() string { return "portfolio" }

// Entry is one member's outcome in a portfolio run.
type Entry struct {
	Name   string
	Result Result
	Err    error
}

// NameOf returns s.Name() when s has such a method, else its Go type.
func NameOf(s any) string {
	if n, ok := s.(interface{ Name() string }); ok {
		return n.Name()
	}
	return fmt.Sprintf("%T", s)
}

// Search implements Searcher.
func (p *Portfolio) Search(ctx context.Context, w *subspace.Subspace) (Result, error) {
	res, _, err := p.SearchEach(ctx, w)
	return res, err
}

// SearchEach is Search that also returns every member's outcome, in member
// order.
func (p *Portfolio) SearchEach(ctx context.Context, w *subspace.Subspace) (Result, []Entry, error) {
	begin := time.Now()
	if err := p.check(); err != nil {
		return TrivialResult(w, p.Name()), nil, err
	}
	members := p.Members
	if members == nil {
		members = DefaultMembers()
	}
	rctx := ctx
	if p.Budget > 0 {
		var cancel context.CancelFunc
		rctx, cancel = context.WithTimeout(ctx, p.Budget)
		defer cancel()
	}
	entries := make([]Entry, len(members))
	var wg sync.WaitGroup
	var mu sync.Mutex
	gate := NewThrottle(p.Progress)
	bestU, bestL := 1.0, 0.0
	for i, s := range members {
		wg.Add(1)
		go func() {
			defer wg.Done()
			r, err := s.Search(rctx, w)
			entries[i] = Entry{Name: NameOf(s), Result: r, Err: err}
			mu.Lock()
			if entries[i].Usable() {
				if r.X != nil && r.Upper < bestU {
					bestU = r.Upper
				}
				if r.Lower > bestL {
					bestL = r.Lower
				}
			}
			gate.Report(Progress{Searcher: p.Name(), Upper: bestU, Lower: bestL})
			mu.Unlock()
		}()
	}
	wg.Wait()
	res := Merge(w, entries)
	res.Elapsed = time.Since(begin)
	if err := ctx.Err(); err != nil {
		res.Status = Cancelled
		return res, entries, err
	}
	if rctx.Err() != nil {
		res.Status, res.Limit = LimitReached, TimeLimit // the portfolio's own budget ran out
	}
	return res, entries, nil
}

func (p *Portfolio) check() error {
	return CheckSettings("Portfolio", []Setting{{"Budget", float64(p.Budget.Seconds())}}...)
}

// Usable reports whether the member's Result may enter a merge: it did not
// fail (no error, or only the context's error, with which a Result is
// still valid by the Searcher contract).
func (e Entry) Usable() bool {
	return e.Err == nil || errors.Is(e.Err, context.Canceled) || errors.Is(e.Err, context.DeadlineExceeded)
}

// Merge merges finished members' Results: the smallest Upper with its
// witness (from a Result that has one), the largest Lower with its
// argument, the counts summed; Status is Converged unless a member failed
// or did not succeed (then LimitReached, with the first member's Limit). A
// member that failed contributes nothing but its status. Without any
// witness the trivial one is used. Both bounds are certified by their
// members, so the merged interval is certified too.
func Merge(w *subspace.Subspace, entries []Entry) Result {
	res := Result{Upper: 1, Status: Converged}
	found := false
	bestKey := math.Inf(1)
	for _, e := range entries {
		r := e.Result
		if !e.Usable() || !r.Status.Success() {
			res.Status = LimitReached
			if res.Limit == NoLimit {
				res.Limit = r.Limit
			}
		}
		if !e.Usable() {
			continue
		}
		res.Iterations += r.Iterations
		res.Evaluations += r.Evaluations
		res.Starts += r.Starts
		if key := rankKey(w, r.X, r.Y, r.Upper); r.X != nil && (!found || key < bestKey) {
			found, bestKey = true, key
			res.X, res.Y, res.Upper, res.Value = r.X, r.Y, r.Upper, r.Value
			res.FoundBy = e.Name
			if r.FoundBy != "" {
				res.FoundBy = r.FoundBy
			}
		}
		if r.Lower > res.Lower {
			res.Lower, res.LowerBy = r.Lower, r.LowerBy
		}
	}
	if !found {
		res.X, res.Y, res.Upper = TrivialWitness(w)
		res.FoundBy = "trivial witness"
	}
	return res
}
