package sos

import (
	"context"
	"math"
	"runtime"
	"testing"

	"github.com/segre-lab/segre/internal/sdp"
	"github.com/segre-lab/segre/rankone"
	"github.com/segre-lab/segre/rankone/searchtest"
	"github.com/segre-lab/segre/rankone/suite"
)

// The first-order route proves the interior-point route's level-one bound
// (the same SDP; our interior-point solver is checked against CSDP in
// TestAgainstCSDP) to 1e-6, on Gaussian subspaces of dimension mn/2 up to
// the largest the interior-point method takes (10×10), on the exact cases,
// and on an embedded instance whose sign symmetries split the moment
// matrix into blocks (checked: more than one).
func TestFirstOrderAgainstInteriorPoint(t *testing.T) {
	ctx := context.Background()
	ins := []suite.Instance{suite.Random(3, 3, 4, 1), suite.Random(4, 4, 8, 2), suite.Random(3, 5, 7, 3),
		suite.Antisymmetric(3), suite.NormedAlgebraComplement(4, 1), suite.HurwitzRadon(4, 4),
		suite.Embed(suite.Random(3, 3, 4, 1), 5, 4)}
	if !testing.Short() {
		ins = append(ins, suite.Random(6, 6, 18, 1), suite.Random(8, 8, 32, 1), suite.Random(10, 10, 50, 1))
	}
	emb := mustNew(t, ins[6])
	p, _ := ProjectorBound(emb)
	if cn, _ := levelOneConic(p, emb.Rows(), emb.Cols()); len(cn.blocks) < 2 {
		t.Errorf("embedded instance: %d blocks, want a split", len(cn.blocks))
	}
	for _, in := range ins {
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

// The first-order routes never lie on inputs built to mislead their
// reductions and their arithmetic (the instances of TestLevelTwoNeverLies:
// exact zeros that make sign symmetries, permuted, then perturbed by
// 1e-13, entries of magnitude 1e±150, one-dimensional W): Lower ≤ the
// Upper of a local search's witness (derived: a certified Lower can never
// exceed a certified Upper), and a kept certificate re-verifies.
func TestFirstOrderNeverLies(t *testing.T) {
	ctx := context.Background()
	emb := suite.Embed(suite.UPBComplement(), 4, 4)
	perm := permuted(emb, []int{3, 0, 2, 1}, []int{1, 3, 0, 2})
	for _, in := range []suite.Instance{suite.UPBComplement(), emb, perm, perturbZeros(perm, 1e-13),
		scaled(suite.Random(3, 3, 4, 2), 1e150), scaled(suite.Random(3, 3, 4, 2), 1e-150), suite.OneMatrix(3, 3, 1),
		suite.Antisymmetric(4)} {
		w := mustNew(t, in)
		ms, _ := (&rankone.MultiStart{Starts: 16}).Search(ctx, w)
		var k1 Certificate
		r1, err := (&FirstOrder{Keep: &k1}).Search(ctx, w)
		if err != nil {
			t.Fatalf("%s: %v", in.Name, err)
		}
		if r1.Lower > ms.Upper {
			t.Errorf("%s: level one Lower %v > Upper %v", in.Name, r1.Lower, ms.Upper)
		}
		if r1.Lower > 0 {
			if hb, err := Verify(w, k1); err != nil || rankone.DistanceLower(hb) != r1.Lower {
				t.Errorf("%s: level one re-verified %v (%v), Lower %v", in.Name, hb, err, r1.Lower)
			}
		}
		var k2 LevelTwoCertificate
		r2, err := (&LevelTwoFirstOrder{Keep: &k2}).Search(ctx, w)
		if err != nil {
			t.Fatalf("%s: %v", in.Name, err)
		}
		if r2.Lower > ms.Upper {
			t.Errorf("%s: level two Lower %v > Upper %v", in.Name, r2.Lower, ms.Upper)
		}
		if r2.Lower > 0 {
			if hb, err := VerifyLevelTwo(w, k2); err != nil || rankone.DistanceLower(hb) != r2.Lower {
				t.Errorf("%s: level two re-verified %v (%v), Lower %v", in.Name, hb, err, r2.Lower)
			}
		}
	}
}

func TestLevelTwoFirstOrderConformance(t *testing.T) {
	small := []suite.Instance{suite.OneMatrix(3, 3, 1), suite.Antisymmetric(3), suite.HurwitzRadon(2, 2), suite.Planted(3, 3, 3, 1)}
	searchtest.Run(t, func() rankone.Searcher { return &LevelTwoFirstOrder{} }, searchtest.Options{Accuracy: 1e-10, Instances: small})
}

// The result does not depend on the number of threads (the contract of
// every Searcher): the parallel parts of the method (the split's matrix
// products and symmetric products, Anderson's sums) compute every number
// by the same operations whatever GOMAXPROCS is, so the kept certificate
// is the same bit for bit.
func TestFirstOrderThreadsSame(t *testing.T) {
	if testing.Short() {
		t.Skip("two runs at 16×16")
	}
	w := mustNew(t, suite.Random(16, 16, 128, 1))
	run := func(procs int) Certificate {
		defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(procs))
		var keep Certificate
		if _, err := (&FirstOrder{MaxIter: 30, Keep: &keep}).Search(context.Background(), w); err != nil {
			t.Fatal(err)
		}
		return keep
	}
	a, b := run(1), run(2)
	if len(a.K) == 0 || len(a.K) != len(b.K) {
		t.Fatalf("certificates of %d and %d entries", len(a.K), len(b.K))
	}
	for i := range a.K {
		if math.Float64bits(a.K[i]) != math.Float64bits(b.K[i]) {
			t.Fatalf("entry %d: %v with one thread, %v with two", i, a.K[i], b.K[i])
		}
	}
}
