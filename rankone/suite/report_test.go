package suite

import (
	"bytes"
	"math"
	"math/big"
	"strings"
	"testing"
)

// Summary orders sizes numerically: by m, then n, then k, within a family
// ("10x10" after "4x4", "k10" after "k2"), whatever the order of the records.
func TestReportSummaryOrdersSizesNumerically(t *testing.T) {
	rec := func(idx int, fam string, m, n, k int) Record {
		return Record{Index: idx, Family: fam, Instance: fam, Rows: m, Cols: n, Dim: k, Searcher: "s", Upper: 1, Points: -1}
	}
	recs := []Record{
		rec(0, "random", 10, 10, 3),
		rec(1, "random", 4, 10, 1),
		rec(2, "random", 4, 4, 10),
		rec(3, "planted", 16, 16, 2),
		rec(4, "random", 4, 4, 2),
		rec(5, "planted", 8, 8, 20),
	}
	want := []string{"planted 8x8 k20", "planted 16x16 k2", "random 4x4 k2", "random 4x4 k10", "random 4x10 k1", "random 10x10 k3"}
	rows := Summary(recs)
	if len(rows) != len(want) {
		t.Fatalf("%d rows, want %d", len(rows), len(want))
	}
	for i, r := range rows {
		if got := r.Family + " " + r.Size; got != want[i] {
			t.Errorf("row %d is %q, want %q", i, got, want[i])
		}
	}
}

// The excess column on three hand-made instances of one size, with three
// searchers. Every number is a dyadic rational with few bits, so each
// difference below is exact in binary64 and the expected values are exact
// (derived here):
//
//	instance  a: lower, upper   b: lower, upper   c (failed)   best lower
//	0         0, 0.5            0.25, 0.75        0.4 ignored   0.25
//	1         0, 0.375          0.125, 0.125      ignored       0.125
//	2         0, 1              0.5, 0.625        ignored       0.5
//
// a's excesses: 0.5−0.25, 0.375−0.125, 1−0.5 = 0.25, 0.25, 0.5: median 0.25.
// b's excesses: 0.75−0.25, 0.125−0.125, 0.625−0.5 = 0.5, 0, 0.125: median
// 0.125. c failed everywhere: no excess (ExcessRuns 0, printed "-"). A failed run's
// lower bound 0.4 must not count: with it, a's excess on instance 0 would be
// 0.5 − 0.4 = 0.1, which the check on instance 0 alone catches.
func TestReportSummaryExcess(t *testing.T) {
	var recs []Record
	add := func(idx int, s string, lower, upper float64, failed bool) {
		r := Record{Index: idx, Family: "hand", Instance: "hand/" + string(rune('0'+idx)), Rows: 3, Cols: 3, Dim: 4,
			Searcher: s, Lower: lower, Upper: upper, Points: -1}
		if failed {
			r.Error, r.Status = "failed on purpose", "error"
		}
		recs = append(recs, r)
	}
	add(0, "a", 0, 0.5, false)
	add(0, "b", 0.25, 0.75, false)
	add(0, "c", 0.4, 1, true)
	add(1, "a", 0, 0.375, false)
	add(1, "b", 0.125, 0.125, false)
	add(1, "c", 0, 1, true)
	add(2, "a", 0, 1, false)
	add(2, "b", 0.5, 0.625, false)
	add(2, "c", 0, 1, true)
	rows := Summary(recs)
	want := map[string]float64{"a": 0.25, "b": 0.125}
	for _, r := range rows {
		w, ok := want[r.Searcher]
		switch {
		case !ok && r.ExcessRuns != 0:
			t.Errorf("%s: excess over %d runs, want none (every run failed)", r.Searcher, r.ExcessRuns)
		case ok && (r.MedianExcess != w || r.ExcessRuns != 3):
			t.Errorf("%s: excess %v over %d runs, want %v over 3", r.Searcher, r.MedianExcess, r.ExcessRuns, w)
		}
	}
	// Only instance 0, where the failed record's 0.4 would be the best
	// lower: a's excess must be 0.5 − 0.25, not 0.5 − 0.4.
	if r := Summary(recs[:3]); r[0].Searcher != "a" || r[0].MedianExcess != 0.25 {
		t.Errorf("instance 0 alone: %s excess %v, want a 0.25 (a failed record's lower bound counted?)", r[0].Searcher, r[0].MedianExcess)
	}
	var buf bytes.Buffer
	if err := WriteSummary(&buf, rows); err != nil {
		t.Fatal(err)
	}
	lines := strings.Split(buf.String(), "\n")
	if len(lines) < 4 || !strings.Contains(lines[0], "excess") {
		t.Fatalf("unexpected table:\n%s", buf.String())
	}
	for i, want := range []string{"0.25", "0.125", "-"} {
		f := strings.Fields(lines[i+1])
		// Columns from the right: points, excess, med. gap.
		if got := f[len(f)-2]; got != want {
			t.Errorf("line %q: excess printed %q, want %q", lines[i+1], got, want)
		}
	}
}

// diffUp never understates the exact difference and exceeds it by at most
// one unit in the last place; checked against exact rational arithmetic
// (math/big) on differences that round both ways and on exact ones.
func TestReportDiffUp(t *testing.T) {
	pairs := [][2]float64{{0.3, 0.1}, {0.7, 0.1}, {1, 1e-17}, {0.5, 0.25}, {0.125, 0.125}, {1e-300, 3e-301},
		{0.1, 0.3}, {2, math.Nextafter(1, 0)}, {1e308, -1e308}}
	for _, p := range pairs {
		got := diffUp(p[0], p[1])
		exact := new(big.Rat).Sub(new(big.Rat).SetFloat64(p[0]), new(big.Rat).SetFloat64(p[1]))
		if math.IsInf(got, 1) {
			if f, _ := exact.Float64(); !math.IsInf(f, 1) {
				t.Errorf("diffUp(%v, %v) = +Inf for a finite difference", p[0], p[1])
			}
			continue
		}
		if new(big.Rat).SetFloat64(got).Cmp(exact) < 0 {
			t.Errorf("diffUp(%v, %v) = %v is below the exact difference", p[0], p[1], got)
		}
		// The float nearest to the exact difference, then one step up, is
		// the most diffUp may return.
		near, _ := exact.Float64()
		if got > math.Nextafter(near, math.Inf(1)) {
			t.Errorf("diffUp(%v, %v) = %v, more than one step above %v", p[0], p[1], got, near)
		}
	}
	if !math.IsInf(diffUp(math.NaN(), 0), 1) {
		t.Error("a NaN operand must give +Inf")
	}
}
