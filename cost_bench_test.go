package segre

import (
	"context"
	"fmt"
	"testing"
	"time"

	"github.com/segre-lab/segre/rankone"
	"github.com/segre-lab/segre/rankone/suite"
	"github.com/segre-lab/segre/sos"
	"github.com/segre-lab/segre/subspace"
)

// BenchmarkCostModel times each bound of Certify's ladder once at a few
// sizes (Gaussian subspaces of dimension mn/2, suite.Random, seed 1) and
// reports the measured seconds beside the cost model's prediction
// ("measured-s", "predicted-s"): the data the model's constants were
// fitted to, and the check that they still hold on the machine at hand.
// The first-order row times a fixed number of iterations (firstOrderProbe)
// and predicts them as such.
func BenchmarkCostModel(b *testing.B) {
	type row struct {
		kind string
		m, n int
		run  func(context.Context, *subspace.Subspace) error
		pred func(*subspace.Subspace) time.Duration
	}
	search := func(s rankone.Searcher) func(context.Context, *subspace.Subspace) error {
		return func(ctx context.Context, w *subspace.Subspace) error { _, err := s.Search(ctx, w); return err }
	}
	var rows []row
	for _, n := range []int{4, 6, 8, 10} {
		rows = append(rows, row{"level-one", n, n, search(&sos.Bound{}), predictLevelOne})
	}
	for _, n := range []int{8, 12, 16} {
		rows = append(rows, row{"first-order", n, n, search(&sos.FirstOrder{MaxIter: firstOrderProbe}), func(w *subspace.Subspace) time.Duration { return firstOrderProbe * predictFirstOrderStep(w) }})
	}
	for _, n := range []int{4, 5, 6} {
		rows = append(rows, row{"level-two", n, n, search(&sos.LevelTwo{}), predictLevelTwo})
	}
	for _, n := range []int{6, 8, 10} {
		rows = append(rows, row{"level-two-first-order", n, n, search(&sos.LevelTwoFirstOrder{MaxIter: firstOrderProbe}),
			func(w *subspace.Subspace) time.Duration { return firstOrderProbe * predictLevelTwoStep(w) }})
	}
	for _, n := range []int{8, 12, 16} {
		rows = append(rows, row{"two-copy", n, n, search(&sos.TwoCopy{}), predictTwoCopy})
	}
	for _, r := range rows {
		in := suite.Random(r.m, r.n, r.m*r.n/2, 1)
		w, err := subspace.New(context.Background(), in.Basis, subspace.Options{})
		if err != nil {
			b.Fatal(err)
		}
		b.Run(fmt.Sprintf("%s/%dx%d", r.kind, r.m, r.n), func(b *testing.B) {
			var took time.Duration
			for b.Loop() {
				t0 := time.Now()
				if err := r.run(context.Background(), w); err != nil {
					b.Fatal(err)
				}
				took += time.Since(t0)
			}
			b.ReportMetric(took.Seconds()/float64(b.N), "measured-s")
			b.ReportMetric(r.pred(w).Seconds(), "predicted-s")
		})
	}
}
