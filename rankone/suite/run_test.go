package suite

import (
	"bytes"
	"context"
	"math"
	"reflect"
	"testing"

	"github.com/segre-lab/segre/rankone"
	"github.com/segre-lab/segre/subspace"
)

func tiny() []Instance {
	return []Instance{OneMatrix(3, 4, 1), Antisymmetric(3), Planted(4, 4, 4, 1), Random(3, 3, 4, 1), RankOneSpan(4, 5, 3, 2)}
}

func searchers() []Named {
	return []Named{
		{"als", &rankone.ALS{}},
		{"multistart", &rankone.MultiStart{Starts: 4, Workers: 1}},
	}
}

func collect(t *testing.T, set Settings) []Record {
	var recs []Record
	err := Run(context.Background(), searchers(), tiny(), set, func(r Record) error {
		recs = append(recs, r)
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	return recs
}

func zeroTimes(recs []Record) []Record {
	out := append([]Record(nil), recs...)
	for i := range out {
		out[i].Seconds = 0
	}
	return out
}

// Sharded-and-merged records (and hence reports) equal the unsharded ones,
// run times aside (they are measured, not computed).
func TestShardMergeEqualsSingle(t *testing.T) {
	single := Merge(collect(t, Settings{}))
	var parts [][]Record
	for s := 0; s < 3; s++ {
		recs := collect(t, Settings{Shard: s, Shards: 3})
		var buf bytes.Buffer
		if err := WriteJSONL(&buf, recs); err != nil {
			t.Fatal(err)
		}
		back, err := ReadJSONL(&buf)
		if err != nil {
			t.Fatal(err)
		}
		parts = append(parts, back)
	}
	merged := Merge(parts...)
	a, b := zeroTimes(single), zeroTimes(merged)
	if !reflect.DeepEqual(a, b) {
		t.Fatalf("merged records differ from the single run")
	}
	if !reflect.DeepEqual(Summary(a), Summary(b)) {
		t.Fatalf("summaries differ")
	}
	taus := []float64{1, 2, 4}
	if len(Profile(a, taus)) != 2 {
		t.Errorf("profile should have one curve per searcher")
	}
	var csvBuf bytes.Buffer
	if err := WriteCSV(&csvBuf, a); err != nil || bytes.Count(csvBuf.Bytes(), []byte("\n")) != len(a)+1 {
		t.Errorf("CSV: %v", err)
	}
}

// Records name the known optimum; success follows it (Eckart–Young and the
// antisymmetric closed form, from the families' doc comments).
func TestRecordsAndSuccess(t *testing.T) {
	recs := collect(t, Settings{})
	for _, r := range recs {
		if r.Family == "one-matrix" || r.Family == "antisymmetric" || r.Family == "planted" {
			if r.Optimum == nil || !r.Success {
				t.Errorf("%s/%s: optimum %v success %v (upper %v)", r.Instance, r.Searcher, r.Optimum, r.Success, r.Upper)
			}
		}
		if r.Family == "random" && r.Optimum != nil {
			t.Errorf("random instance with a known optimum")
		}
	}
	if _, err := ReadJSONL(bytes.NewReader([]byte("{\"index\": 1}\nnot json\n"))); err == nil {
		t.Error("malformed JSON line accepted")
	}
}

// Each family's stated optimum is checked independently on small sizes:
// rank-one spans by their planted points (d = 0 to rounding), the noisy
// planted bound by the planted point's distance, the critical-dimension
// claim d* = 0 for odd degree by many-start local search.
func TestFamilyClaims(t *testing.T) {
	in := RankOneSpan(4, 6, 3, 1)
	w, _ := subspace.New(context.Background(), in.Basis, subspace.Options{})
	if d := math.Sqrt(w.Residual(in.X0, in.Y0)); d > 1e-13 {
		t.Errorf("rank-one span: planted point at distance %v", d)
	}
	pn := PlantedNoisy(5, 5, 6, 1e-3, 1)
	w, _ = subspace.New(context.Background(), pn.Basis, subspace.Options{})
	if d := math.Sqrt(w.Residual(pn.X0, pn.Y0)); d > pn.Bound*(1+1e-9) {
		t.Errorf("noisy planted: d(x₀, y₀) = %v > bound %v", d, pn.Bound)
	}
	b := Boundary(3, 3, 1) // degree C(4, 2) = 6: even, no claim
	if b.Degree != 6 || !math.IsNaN(b.Optimum) {
		t.Errorf("boundary 3×3: degree %d optimum %v", b.Degree, b.Optimum)
	}
	b = Boundary(2, 3, 2) // degree C(3, 1) = 3: odd, so a real point exists
	if b.Degree != 3 || b.Optimum != 0 {
		t.Fatalf("boundary 2×3: degree %d optimum %v", b.Degree, b.Optimum)
	}
	w, _ = subspace.New(context.Background(), b.Basis, subspace.Options{})
	r, _ := (&rankone.MultiStart{Starts: 32}).Search(context.Background(), w)
	if r.Upper > 1e-8 {
		t.Errorf("boundary 2×3 (odd degree): best Upper %v, want a real point", r.Upper)
	}
}
