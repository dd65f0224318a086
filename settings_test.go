package segre

import (
	"context"
	"errors"
	"math"
	"testing"
	"time"

	"github.com/segre-lab/segre/net"
	"github.com/segre-lab/segre/rankone"
	"github.com/segre-lab/segre/rankone/suite"
	"github.com/segre-lab/segre/sos"
)

// One rule for settings in every package (issue 12): zero is the default,
// a negative or NaN value is an error wrapping rankone.ErrOption, returned
// with a valid trivial Result (Upper = Verify at its witness).
func TestSettingsRule(t *testing.T) {
	w := mustNew(t, suite.Antisymmetric(3))
	bad := map[string]rankone.Searcher{
		"ALS.MaxIter":             &rankone.ALS{MaxIter: -1},
		"ALS.GradTol":             &rankone.ALS{GradTol: math.NaN()},
		"Power.GradTol":           &rankone.Power{GradTol: -1e-9},
		"TrustRegion.MaxInner":    &rankone.TrustRegion{MaxInner: -3},
		"MultiStart.Starts":       &rankone.MultiStart{Starts: -4},
		"MultiStart.Method":       &rankone.MultiStart{Method: &rankone.ALS{MaxIter: -2}},
		"Portfolio.Budget":        &rankone.Portfolio{Budget: -time.Second},
		"AllPoints.Tries":         &rankone.AllPoints{Tries: -1},
		"BranchBound.MaxNodes":    &net.BranchBound{MaxNodes: -10},
		"Exhaustive.Epsilon":      &net.Exhaustive{Epsilon: -0.1},
		"sos.Bound.MaxIter":       &sos.Bound{MaxIter: -1},
		"sos.LevelTwo.MaxIter":    &sos.LevelTwo{MaxIter: -1},
		"BranchBound.Gap above 1": &net.BranchBound{Gap: 2},
	}
	for name, s := range bad {
		res, err := s.Search(context.Background(), w)
		if !errors.Is(err, rankone.ErrOption) {
			t.Errorf("%s: error %v, want ErrOption", name, err)
			continue
		}
		if u, verr := rankone.Verify(w, res.X, res.Y); verr != nil || u != res.Upper || res.Lower != 0 {
			t.Errorf("%s: result not the valid trivial one: %+v (%v)", name, res, verr)
		}
	}
}

// Branch-and-bound says which budget stopped it in the typed Limit, and
// LowerBy names only the argument (issue 12: free text before).
func TestTypedLimit(t *testing.T) {
	w := mustNew(t, suite.Random(3, 4, 6, 2))
	res, err := (&net.BranchBound{MaxNodes: 8, Gap: 1e-12}).Search(context.Background(), w)
	if err != nil {
		t.Fatal(err)
	}
	if res.Status != rankone.LimitReached || res.Limit != rankone.NodeLimit {
		t.Errorf("status %v, limit %v; want limit reached at the node limit", res.Status, res.Limit)
	}
	if res.Lower > 0 && res.LowerBy == "" {
		t.Error("a Lower without its argument")
	}
}
