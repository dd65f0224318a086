package proof

import (
	"context"
	"testing"
	"time"

	"github.com/segre-lab/segre/net"
	"github.com/segre-lab/segre/rankone/suite"
	"github.com/segre-lab/segre/sos"
)

// BenchmarkRecheckRatio reports, for a branch-and-bound proof and a
// level-one proof on the benchmark instances (Gaussian subspaces of
// dimension mn/2: 3×32 as in net's BenchmarkBranchBound/d3/n32, 8×8 as in
// sos's BenchmarkLevelOne/n8), the time to find (the search that produces
// the evidence), the time to re-check the proof (Check, with the input),
// and their ratio. The target: re-checking at most 1/5 of finding.
func BenchmarkRecheckRatio(b *testing.B) {
	ctx := context.Background()
	type kind struct {
		name string
		in   suite.Instance
		find func(ev *Evidence) error
	}
	kinds := []kind{
		{"branch-and-bound/3x32", suite.Random(3, 32, 48, 1), func(ev *Evidence) error {
			var cv net.Cover
			res, err := (&net.BranchBound{Record: &cv}).Search(ctx, ev.W)
			ev.X, ev.Y, ev.Cover = res.X, res.Y, &cv
			return err
		}},
		{"sos-level-1/8x8", suite.Random(8, 8, 32, 1), func(ev *Evidence) error {
			var cert sos.Certificate
			res, err := (&sos.Bound{Keep: &cert}).Search(ctx, ev.W)
			ev.X, ev.Y, ev.Certificate = res.X, res.Y, &cert
			return err
		}},
	}
	for _, k := range kinds {
		b.Run(k.name, func(b *testing.B) {
			var find, check time.Duration
			for b.Loop() {
				w := suite.MustNew(b, k.in)
				ev := Evidence{W: w}
				t0 := time.Now()
				if err := k.find(&ev); err != nil {
					b.Fatal(err)
				}
				find += time.Since(t0)
				p, err := Build(ctx, ev)
				if err != nil {
					b.Fatal(err)
				}
				t0 = time.Now()
				if _, err := Check(ctx, p, &k.in.Basis, nil); err != nil {
					b.Fatal(err)
				}
				check += time.Since(t0)
				if p.File.LowerArgument == ArgNone {
					b.Fatal("the proof proves no Lower")
				}
			}
			b.ReportMetric(find.Seconds()/float64(b.N), "find-s")
			b.ReportMetric(check.Seconds()/float64(b.N), "recheck-s")
			b.ReportMetric(check.Seconds()/find.Seconds(), "ratio")
		})
	}
}

// BenchmarkShardedRecheck reports, for the branch-and-bound benchmark
// instance (3×32, as BenchmarkRecheckRatio) split into 3 parts run one
// after the other: the parts' total and longest search time (the longest
// is the cluster's wall time), the merge (recheck merge: the parts' checks,
// one evaluation per cell), the re-check of the merged proof, and the ratio
// of that re-check to the parts' total.
func BenchmarkShardedRecheck(b *testing.B) {
	ctx := context.Background()
	in := suite.Random(3, 32, 48, 1)
	const n = 3
	var find, longest, merge, check time.Duration
	for b.Loop() {
		w := suite.MustNew(b, in)
		parts := make([]*Proof, n)
		for i := range parts {
			var cv net.Cover
			t0 := time.Now()
			res, err := (&net.BranchBound{Record: &cv, Shard: net.Shard{Index: i, Count: n}}).Search(ctx, w)
			if err != nil {
				b.Fatal(err)
			}
			d := time.Since(t0)
			find += d
			longest = max(longest, d)
			if parts[i], err = Build(ctx, Evidence{W: w, X: res.X, Y: res.Y, Cover: &cv}); err != nil {
				b.Fatal(err)
			}
		}
		t0 := time.Now()
		whole, err := Merge(ctx, parts, nil)
		if err != nil {
			b.Fatal(err)
		}
		merge += time.Since(t0)
		t0 = time.Now()
		if _, err := Check(ctx, whole, &in.Basis, nil); err != nil {
			b.Fatal(err)
		}
		check += time.Since(t0)
	}
	nb := float64(b.N)
	b.ReportMetric(find.Seconds()/nb, "parts-find-s")
	b.ReportMetric(longest.Seconds()/nb, "longest-part-s")
	b.ReportMetric(merge.Seconds()/nb, "merge-s")
	b.ReportMetric(check.Seconds()/nb, "recheck-s")
	b.ReportMetric(check.Seconds()/find.Seconds(), "ratio")
}
