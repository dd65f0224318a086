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
