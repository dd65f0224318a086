package segre_test

import (
	"context"
	"testing"

	"github.com/segre-lab/segre"
	"github.com/segre-lab/segre/rankone/suite"
)

// BenchmarkReach runs Certify with its default budget (10 s) on the
// structured instances with known answers (suite.Structured: direct sums
// and Kronecker products of normed-algebra spans, rotated, 16×16 and
// 32×32) and reports the certified interval ("lower", "upper"), the known
// d* ("optimum") and the seconds Certify took ("seconds"): the reach of the
// lower bounds at sizes users have (issue 14's table).
func BenchmarkReach(b *testing.B) {
	for _, in := range suite.Structured(false) {
		w := suite.MustNew(b, in)
		b.Run(in.Name, func(b *testing.B) {
			var rep segre.Report
			for b.Loop() {
				var err error
				if rep, err = segre.Certify(context.Background(), w, segre.Options{}); err != nil {
					b.Fatal(err)
				}
			}
			if rep.Lower > in.Optimum || rep.Upper < in.Optimum {
				b.Fatalf("interval [%v, %v] excludes d* = %v", rep.Lower, rep.Upper, in.Optimum)
			}
			b.ReportMetric(rep.Lower, "lower")
			b.ReportMetric(rep.Upper, "upper")
			b.ReportMetric(in.Optimum, "optimum")
			b.ReportMetric(rep.Elapsed.Seconds(), "seconds")
		})
	}
}
