package rankone_test

import (
	"context"
	"fmt"
	"testing"

	"github.com/segre-lab/segre/rankone"
	"github.com/segre-lab/segre/rankone/suite"
	"github.com/segre-lab/segre/subspace"
)

// BenchmarkPlanted times one Search (single start: the spectral start) of
// each local strategy on planted instances with m = n and k = n, and fails
// if Upper is not within 1e-10 of the planted optimum d* = 0. Target for the
// best strategy: under 20 ms at n = 64.
func BenchmarkPlanted(b *testing.B) {
	for _, n := range []int{32, 64} {
		in := suite.Planted(n, n, n, 1)
		w, err := subspace.New(context.Background(), in.Basis, subspace.Options{})
		if err != nil {
			b.Fatal(err)
		}
		for _, s := range []rankone.Searcher{&rankone.ALS{}, &rankone.Power{}, &rankone.TrustRegion{}} {
			b.Run(fmt.Sprintf("n%d/%s", n, rankone.NameOf(s)), func(b *testing.B) {
				for b.Loop() {
					r, err := s.Search(context.Background(), w)
					if err != nil || r.Upper > 1e-10 {
						b.Fatalf("Upper = %g, err %v", r.Upper, err)
					}
				}
			})
		}
	}
}
