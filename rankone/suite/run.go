package suite

import (
	"context"
	"fmt"
	"math"
	"time"

	"github.com/segre-lab/segre/rankone"
	"github.com/segre-lab/segre/subspace"
)

// Named is a Searcher with the name used in records.
type Named struct {
	Name     string
	Searcher rankone.Searcher
}

// Record is the outcome of one (instance, searcher) run: one JSON line.
type Record struct {
	Index    int     `json:"index"` // position of the instance in the sweep
	Family   string  `json:"family"`
	Instance string  `json:"instance"`
	Rows     int     `json:"rows"`
	Cols     int     `json:"cols"`
	Dim      int     `json:"dim"`
	Optimum  *Number `json:"optimum"` // d* when known, else null
	Bound    float64 `json:"bound,omitempty"`
	Searcher string  `json:"searcher"`
	Lower    float64 `json:"lower"`
	Upper    float64 `json:"upper"`
	Status   string  `json:"status"`
	Seconds  float64 `json:"seconds"`
	Evals    int     `json:"evaluations"`
	Success  bool    `json:"success"`
	// Points counts the distinct certified rank-one points found (Upper ≤
	// SuccessTol), for searchers that report all their points (a SearchAll method
	// like rankone.MultiStart's, or rankone.AllPoints); -1 otherwise.
	Points int    `json:"points"`
	Error  string `json:"error,omitempty"`
}

// Number is a float64 that may be absent (JSON null) for unknown values.
type Number struct{ V float64 }

// MarshalJSON writes the number.
func (n *Number) MarshalJSON() ([]byte, error) {
	return []byte(fmt.Sprintf("%.17g", n.V)), nil
}

// UnmarshalJSON reads the number.
func (n *Number) UnmarshalJSON(b []byte) error {
	_, err := fmt.Sscan(string(b), &n.V)
	return err
}

// Settings configures Run. The zero value gives the defaults.
type Settings struct {
	// SuccessTol is the success tolerance on d: Upper ≤ d* + SuccessTol when
	// d* is known, else Upper ≤ (best Upper of any searcher on the instance)
	// + SuccessTol.
	// Zero means 1e-8.
	SuccessTol float64
	// Budget is the time allowed for each run; zero means no limit.
	Budget time.Duration
	// Shard and Shards select the Shard-th (0-based) of Shards disjoint
	// slices of the instance list (instance i belongs to shard i mod
	// Shards). Zero Shards means one shard.
	Shard, Shards int
	// Progress, if set, is called after each instance with the instances
	// done and in this shard, and the elapsed time.
	Progress func(done, total int, elapsed time.Duration)
}

// Run runs every searcher on every instance of this shard, in order, and
// emits the records of each instance (all searchers) as soon as they are
// complete. Success needs all searchers of an instance, which a shard always
// has, so sharded and unsharded sweeps give the same records (times aside).
func Run(ctx context.Context, searchers []Named, instances []Instance, set Settings, emit func(Record) error) error {
	shards := set.Shards
	if shards <= 0 {
		shards = 1
	}
	if set.Shard < 0 || set.Shard >= shards {
		return fmt.Errorf("suite: shard %d of %d", set.Shard, shards)
	}
	tol := set.SuccessTol
	if tol <= 0 {
		tol = 1e-8
	}
	var mine []int
	for i := range instances {
		if i%shards == set.Shard {
			mine = append(mine, i)
		}
	}
	begin := time.Now()
	for done, idx := range mine {
		if err := ctx.Err(); err != nil {
			return err
		}
		in := instances[idx]
		w, err := subspace.New(context.Background(), in.Basis, subspace.Options{})
		recs := make([]Record, len(searchers))
		for j, s := range searchers {
			r := Record{Index: idx, Family: in.Family, Instance: in.Name, Rows: in.Basis.Rows, Cols: in.Basis.Cols,
				Searcher: s.Name, Bound: in.Bound, Upper: 1}
			if !math.IsNaN(in.Optimum) {
				r.Optimum = &Number{in.Optimum}
			}
			if err != nil {
				r.Error, r.Status = err.Error(), "error"
				recs[j] = r
				continue
			}
			r.Dim = w.Dim()
			rctx, cancel := ctx, context.CancelFunc(func() {})
			if set.Budget > 0 {
				rctx, cancel = context.WithTimeout(ctx, set.Budget)
			}
			t0 := time.Now()
			var res rankone.Result
			var serr error
			r.Points = -1
			switch ps := s.Searcher.(type) {
			case interface {
				SearchAll(context.Context, *subspace.Subspace) (rankone.Result, []rankone.Point, error)
			}:
				var pts []rankone.Point
				res, pts, serr = ps.SearchAll(rctx, w)
				r.Points = countPoints(pts, tol)
			case *rankone.AllPoints:
				pts, _ := ps.Points(rctx, w)
				res, serr = ps.Search(rctx, w)
				r.Points = countPoints(pts, tol)
			default:
				res, serr = s.Searcher.Search(rctx, w)
			}
			r.Seconds = time.Since(t0).Seconds()
			cancel()
			if serr != nil && ctx.Err() != nil {
				return ctx.Err()
			}
			r.Lower, r.Upper, r.Status, r.Evals = res.Lower, res.Upper, res.Status.String(), res.Evaluations
			if serr != nil && rctx.Err() == nil {
				r.Error = serr.Error()
			}
			recs[j] = r
		}
		best := math.Inf(1)
		for _, r := range recs {
			if r.Error == "" {
				best = math.Min(best, r.Upper)
			}
		}
		for j := range recs {
			r := &recs[j]
			ref := best
			if r.Optimum != nil {
				ref = r.Optimum.V
			}
			r.Success = r.Error == "" && r.Upper <= ref+tol
			if err := emit(*r); err != nil {
				return err
			}
		}
		if set.Progress != nil {
			set.Progress(done+1, len(mine), time.Since(begin))
		}
	}
	return nil
}

func countPoints(pts []rankone.Point, tol float64) int {
	c := 0
	for _, p := range pts {
		if p.Upper <= tol {
			c++
		}
	}
	return c
}
