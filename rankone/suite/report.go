package suite

import (
	"bufio"
	"encoding/csv"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"sort"
	"strconv"
	"strings"

	"github.com/segre-lab/segre/internal/accurate"
)

// WriteJSONL writes one record per line (append-safe: concatenated files of
// several runs or shards are again valid input for ReadJSONL).
func WriteJSONL(w io.Writer, recs []Record) error {
	enc := json.NewEncoder(w)
	for _, r := range recs {
		if err := enc.Encode(r); err != nil {
			return err
		}
	}
	return nil
}

// ReadJSONL reads records written by WriteJSONL; a malformed line is an
// error naming it.
func ReadJSONL(rd io.Reader) ([]Record, error) {
	sc := bufio.NewScanner(rd)
	sc.Buffer(make([]byte, 1<<16), 1<<24)
	var out []Record
	line := 0
	for sc.Scan() {
		line++
		t := strings.TrimSpace(sc.Text())
		if t == "" {
			continue
		}
		var r Record
		if err := json.Unmarshal([]byte(t), &r); err != nil {
			return nil, fmt.Errorf("suite: line %d: %v", line, err)
		}
		out = append(out, r)
	}
	return out, sc.Err()
}

// Merge sorts the records of several shards or runs into sweep order
// (instance index, then searcher name), dropping exact duplicates of the
// same (instance, searcher) pair (the last one read wins), so that resumed
// runs merge cleanly.
func Merge(parts ...[]Record) []Record {
	type key struct {
		idx      int
		searcher string
	}
	seen := map[key]int{}
	var out []Record
	for _, p := range parts {
		for _, r := range p {
			k := key{r.Index, r.Searcher}
			if i, ok := seen[k]; ok {
				out[i] = r
				continue
			}
			seen[k] = len(out)
			out = append(out, r)
		}
	}
	sort.SliceStable(out, func(i, j int) bool {
		if out[i].Index != out[j].Index {
			return out[i].Index < out[j].Index
		}
		return out[i].Searcher < out[j].Searcher
	})
	return out
}

// WriteCSV writes the records as CSV with a header.
func WriteCSV(w io.Writer, recs []Record) error {
	cw := csv.NewWriter(w)
	cw.Write([]string{"index", "family", "instance", "rows", "cols", "dim", "optimum", "bound", "searcher",
		"lower", "upper", "status", "seconds", "evaluations", "success", "points", "error"})
	f := func(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }
	for _, r := range recs {
		opt := ""
		if r.Optimum != nil {
			opt = f(r.Optimum.V)
		}
		cw.Write([]string{strconv.Itoa(r.Index), r.Family, r.Instance, strconv.Itoa(r.Rows), strconv.Itoa(r.Cols),
			strconv.Itoa(r.Dim), opt, f(r.Bound), r.Searcher, f(r.Lower), f(r.Upper), r.Status, f(r.Seconds),
			strconv.Itoa(r.Evals), strconv.FormatBool(r.Success), strconv.Itoa(r.Points), r.Error})
	}
	cw.Flush()
	return cw.Error()
}

// SummaryRow aggregates one (family, size, searcher) group.
type SummaryRow struct {
	Family, Size, Searcher string
	// Rows, Cols and Dim are the group's size (m, n and the dimension k of
	// the stored subspace); Size is the same as text, "4x5 k7".
	Rows, Cols, Dim int
	Runs            int
	SuccessRate     float64
	MedianSeconds   float64
	P90Seconds      float64
	MedianGap       float64 // median of Upper − Lower, rounded up
	// MedianExcess is the median, over the group's runs, of Upper minus the
	// best certified lower bound on the same instance: the largest Lower of
	// any searcher's record on that instance (records with an error left
	// out). Since that Lower ≤ d*, each term is a certified upper bound on
	// how far this searcher's witness lies above the optimum, and the
	// median of upward-rounded terms is an upper bound on the median of the
	// exact ones (a median is monotone in each term). ExcessRuns counts the
	// runs it is taken over (those without an error); when it is zero,
	// MedianExcess is 0 and means nothing.
	MedianExcess float64
	ExcessRuns   int
	MedianPoints float64 // median distinct points found (-1: not reported)
}

// Summary groups records by family, size (m×n, k) and searcher, in order of
// family name, then m, n and k numerically, then searcher name.
func Summary(recs []Record) []SummaryRow {
	type key struct {
		fam        string
		rows, cols int
		dim        int
		searcher   string
	}
	type instance struct {
		idx       int
		fam, name string
	}
	groups := map[key][]Record{}
	bestLower := map[instance]float64{}
	var order []key
	for _, r := range recs {
		k := key{r.Family, r.Rows, r.Cols, r.Dim, r.Searcher}
		if _, ok := groups[k]; !ok {
			order = append(order, k)
		}
		groups[k] = append(groups[k], r)
		if r.Error == "" && !math.IsNaN(r.Lower) {
			in := instance{r.Index, r.Family, r.Instance}
			if b, ok := bestLower[in]; !ok || r.Lower > b {
				bestLower[in] = r.Lower
			}
		}
	}
	sort.SliceStable(order, func(i, j int) bool {
		a, b := order[i], order[j]
		switch {
		case a.fam != b.fam:
			return a.fam < b.fam
		case a.rows != b.rows:
			return a.rows < b.rows
		case a.cols != b.cols:
			return a.cols < b.cols
		case a.dim != b.dim:
			return a.dim < b.dim
		}
		return a.searcher < b.searcher
	})
	var out []SummaryRow
	for _, k := range order {
		g := groups[k]
		var ok int
		times, gaps := make([]float64, len(g)), make([]float64, len(g))
		var pts, excess []float64
		for i, r := range g {
			if r.Points >= 0 {
				pts = append(pts, float64(r.Points))
			}
			if r.Success {
				ok++
			}
			times[i] = r.Seconds
			gaps[i] = diffUp(r.Upper, r.Lower) // a width: never understated
			if b, found := bestLower[instance{r.Index, r.Family, r.Instance}]; found && r.Error == "" {
				excess = append(excess, diffUp(r.Upper, b))
			}
		}
		row := SummaryRow{Family: k.fam, Size: fmt.Sprintf("%dx%d k%d", k.rows, k.cols, k.dim), Searcher: k.searcher,
			Rows: k.rows, Cols: k.cols, Dim: k.dim, Runs: len(g),
			SuccessRate: float64(ok) / float64(len(g)), MedianSeconds: quantile(times, 0.5),
			P90Seconds: quantile(times, 0.9), MedianGap: quantile(gaps, 0.5), ExcessRuns: len(excess), MedianPoints: -1}
		if len(excess) > 0 {
			row.MedianExcess = quantile(excess, 0.5)
		}
		if len(pts) > 0 {
			row.MedianPoints = quantile(pts, 0.5)
		}
		out = append(out, row)
	}
	return out
}

// diffUp returns an upper bound on the exact difference a − b: the rounded
// difference when TwoSum shows it is not below the exact one, else the next
// float above it. A NaN operand gives +Inf, the only safe upper bound.
func diffUp(a, b float64) float64 {
	s, e := accurate.TwoSum(a, -b)
	switch {
	case math.IsNaN(s):
		return math.Inf(1)
	case e > 0:
		return accurate.Up(s)
	}
	return s
}

func quantile(v []float64, q float64) float64 {
	s := append([]float64(nil), v...)
	sort.Float64s(s)
	if len(s) == 0 {
		return math.NaN()
	}
	i := int(math.Ceil(q*float64(len(s)))) - 1
	return s[max(0, min(i, len(s)-1))]
}

// WriteSummary writes the summary as an aligned text table. The certified
// columns are rounded outward at the digits shown: "med. gap" (MedianGap) and
// "excess" (MedianExcess, "-" when ExcessRuns is 0) are upper ends, printed
// rounded up.
func WriteSummary(w io.Writer, rows []SummaryRow) error {
	bw := bufio.NewWriter(w)
	fmt.Fprintf(bw, "%-26s %-14s %-18s %5s %8s %9s %9s %10s %10s %6s\n", "family", "size", "searcher", "runs", "success",
		"median s", "p90 s", "med. gap", "excess", "points")
	for _, r := range rows {
		pts := "-"
		if r.MedianPoints >= 0 {
			pts = strconv.FormatFloat(r.MedianPoints, 'g', 4, 64)
		}
		excess := "-"
		if r.ExcessRuns > 0 {
			excess = accurate.FormatUp(r.MedianExcess, 3)
		}
		fmt.Fprintf(bw, "%-26s %-14s %-18s %5d %7.0f%% %9.4f %9.4f %10s %10s %6s\n", r.Family, r.Size, r.Searcher, r.Runs,
			100*r.SuccessRate, r.MedianSeconds, r.P90Seconds, accurate.FormatUp(r.MedianGap, 3), excess, pts)
	}
	fmt.Fprintln(bw, "med. gap: median of upper − lower; excess: median of upper − (best lower of any searcher on the same instance), a certified bound on upper − d*")
	return bw.Flush()
}

// Profile returns performance-profile data (Dolan & Moré, "Benchmarking
// optimization software with performance profiles", Math. Program. 91,
// 2002): for each searcher and each τ in taus, the fraction of instances it
// solved (Success) in time ≤ τ × the best time of any successful searcher on
// that instance.
func Profile(recs []Record, taus []float64) map[string][]float64 {
	best := map[int]float64{}
	names := map[string]bool{}
	instances := map[int]bool{}
	for _, r := range recs {
		names[r.Searcher] = true
		instances[r.Index] = true
		if r.Success {
			t := math.Max(r.Seconds, 1e-9)
			if b, ok := best[r.Index]; !ok || t < b {
				best[r.Index] = t
			}
		}
	}
	out := map[string][]float64{}
	for name := range names {
		fr := make([]float64, len(taus))
		for _, r := range recs {
			if r.Searcher != name || !r.Success {
				continue
			}
			ratio := math.Max(r.Seconds, 1e-9) / best[r.Index]
			for i, tau := range taus {
				if ratio <= tau {
					fr[i]++
				}
			}
		}
		for i := range fr {
			fr[i] /= float64(len(instances))
		}
		out[name] = fr
	}
	return out
}
