package rankone_test

import (
	"testing"

	"github.com/segre-lab/segre/rankone"
	"github.com/segre-lab/segre/rankone/searchtest"
)

// Every bundled strategy passes the conformance suite. The local methods
// claim accuracy 1e-10 on the closed-form families: every local maximum of
// those families is global (derived in each family's doc comment) or, for
// planted points, the spectral start lies in the planted basin.
func TestConformance(t *testing.T) {
	const acc = 1e-10
	cases := []struct {
		name string
		new  func() rankone.Searcher
		opt  searchtest.Options
	}{
		{"flattening", func() rankone.Searcher { return rankone.Flattening{} }, searchtest.Options{}},
		{"als", func() rankone.Searcher { return &rankone.ALS{} }, searchtest.Options{Accuracy: acc}},
		{"power", func() rankone.Searcher { return &rankone.Power{} }, searchtest.Options{Accuracy: acc}},
		{"trust-region", func() rankone.Searcher { return &rankone.TrustRegion{} }, searchtest.Options{Accuracy: acc}},
		{"multistart", func() rankone.Searcher { return &rankone.MultiStart{Starts: 6, Workers: 1} }, searchtest.Options{
			Accuracy: acc,
			SameAs:   []func() rankone.Searcher{func() rankone.Searcher { return &rankone.MultiStart{Starts: 6, Workers: 3} }},
		}},
		{"portfolio", func() rankone.Searcher { return &rankone.Portfolio{} }, searchtest.Options{Accuracy: acc}},
		// All-points makes no accuracy claim on families not spanned by
		// rank-one matrices; its bounds must still be valid everywhere.
		{"all-points", func() rankone.Searcher { return &rankone.AllPoints{} }, searchtest.Options{}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) { searchtest.Run(t, c.new, c.opt) })
	}
}
