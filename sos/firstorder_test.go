package sos

import (
	"context"
	"math"
	"testing"

	"github.com/segre-lab/segre/internal/sdp"
	"github.com/segre-lab/segre/rankone/suite"
)

// The first-order route proves the interior-point route's level-one bound
// (the same SDP; our interior-point solver is checked against CSDP in
// TestAgainstCSDP) to 1e-6, on Gaussian subspaces and on the exact cases.
func TestFirstOrderAgainstInteriorPoint(t *testing.T) {
	ctx := context.Background()
	for _, in := range []suite.Instance{suite.Random(3, 3, 4, 1), suite.Random(4, 4, 8, 2), suite.Random(3, 5, 7, 3),
		suite.Antisymmetric(3), suite.NormedAlgebraComplement(4, 1), suite.HurwitzRadon(4, 4)} {
		w := mustNew(t, in)
		rel, err := LevelOne(w)
		if err != nil {
			t.Fatal(err)
		}
		sol, err := sdp.Solve(ctx, rel.Problem, sdp.Settings{})
		if err != nil {
			t.Fatal(err)
		}
		hIP, err := Verify(w, rel.Certificate(sol.Y))
		if err != nil {
			t.Fatal(err)
		}
		var keep Certificate
		r, err := (&FirstOrder{Keep: &keep}).Search(ctx, w)
		if err != nil {
			t.Fatal(err)
		}
		hFO, err := Verify(w, keep)
		if err != nil {
			t.Fatalf("%s: kept certificate: %v", in.Name, err)
		}
		if math.Abs(hFO-hIP) > 1e-6 {
			t.Errorf("%s: first-order bound %.10f, interior point %.10f (%d iterations)", in.Name, hFO, hIP, r.Iterations)
		}
		if r.Lower > r.Upper {
			t.Errorf("%s: Lower %v > Upper %v", in.Name, r.Lower, r.Upper)
		}
		t.Logf("%s: %d iterations, %.10f vs %.10f", in.Name, r.Iterations, hFO, hIP)
	}
}
