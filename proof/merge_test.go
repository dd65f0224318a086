package proof

import (
	"bytes"
	"context"
	"errors"
	"math"
	"slices"
	"strings"
	"testing"

	"github.com/segre-lab/segre/net"
	"github.com/segre-lab/segre/rankone"
	"github.com/segre-lab/segre/rankone/suite"
)

const partGap = 1e-6

// partProofs runs all n parts of a sharded branch-and-bound on the
// instance, builds each part proof (with the input's SHA-256) and returns
// them after a write–read round trip.
func partProofs(t *testing.T, in suite.Instance, n int) []*Proof {
	t.Helper()
	ctx := context.Background()
	w := suite.MustNew(t, in)
	out := make([]*Proof, n)
	for i := range out {
		var cv net.Cover
		res, err := (&net.BranchBound{Gap: partGap, Workers: 2, Record: &cv, Shard: net.Shard{Index: i, Count: n}}).Search(ctx, w)
		if err != nil {
			t.Fatal(err)
		}
		p, err := Build(ctx, Evidence{W: w, X: res.X, Y: res.Y, Cover: &cv, InputSHA256: SHA256(inputBytes(t, in))})
		if err != nil {
			t.Fatal(err)
		}
		out[i] = reread(t, p)
	}
	return out
}

// reread writes p and reads it back.
func reread(t *testing.T, p *Proof) *Proof {
	t.Helper()
	var buf bytes.Buffer
	if err := Write(&buf, p); err != nil {
		t.Fatal(err)
	}
	q, err := Read(bytes.NewReader(buf.Bytes()), int64(buf.Len()))
	if err != nil {
		t.Fatal(err)
	}
	return q
}

// The merge of the N parts of a sharded run (N = 1, 2, 3) is a proof Check
// confirms, with the input, and its Lower is the single-machine proof's to
// the digits the gap allows. Derived here: both Lowers are √(1 − U) for
// levels U that are proven bounds on h* and lie in [h̲, h̲(1 + 2·Gap)/(1 −
// Gap)], h̲ the best certified incumbent value (the argument on net's
// TestShardedMatchesWhole), each weakened by the relative Margin; so
// |d_merged² − d_single²| ≤ h̲·3·Gap/(1 − Gap) + 2·Margin·d², checked on d².
// Each part alone proves no Lower (0) and its own claim re-checks; the
// merged Lower is the smallest part claim.
func TestMergeMatchesSingle(t *testing.T) {
	ctx := context.Background()
	in := suite.Random(3, 6, 9, 1)
	w := suite.MustNew(t, in)
	var cv net.Cover
	res, err := (&net.BranchBound{Gap: partGap, Workers: 2, Record: &cv}).Search(ctx, w)
	if err != nil {
		t.Fatal(err)
	}
	single, _ := roundTrip(t, in, Evidence{W: w, X: res.X, Y: res.Y, Cover: &cv})
	if single.File.LowerArgument != ArgBranch {
		t.Fatalf("single-machine proof argues by %s", single.File.LowerArgument)
	}
	for _, n := range []int{1, 2, 3} {
		parts := partProofs(t, in, n)
		upper := single.File.Upper
		minClaim := math.Inf(1)
		for i, p := range parts {
			c, err := Check(ctx, p, &in.Basis, inputBytes(t, in))
			if err != nil {
				t.Fatalf("N = %d, part %d: %v", n, i, err)
			}
			if p.File.Lower != 0 || c.Part == nil || c.RecomputedPartLower < c.Part.Lower {
				t.Errorf("N = %d, part %d: Lower %v, confirmed %+v", n, i, p.File.Lower, c)
			}
			upper = math.Min(upper, p.File.Upper)
			minClaim = math.Min(minClaim, p.File.Part.Lower)
		}
		whole, err := Merge(ctx, parts, nil)
		if err != nil {
			t.Fatalf("N = %d: %v", n, err)
		}
		whole = reread(t, whole)
		c, err := Check(ctx, whole, &in.Basis, inputBytes(t, in))
		if err != nil {
			t.Fatalf("N = %d: merged proof: %v", n, err)
		}
		if whole.File.LowerArgument != ArgBranch || whole.File.Lower != minClaim || !c.HashChecked {
			t.Errorf("N = %d: merged %s Lower %v, smallest part claim %v, hash checked %v", n, whole.File.LowerArgument, whole.File.Lower, minClaim, c.HashChecked)
		}
		ds, dm := single.File.Lower, whole.File.Lower
		hLow := rankone.ValueLower(upper)
		tol := hLow*3*partGap/(1-partGap) + 2*Margin*math.Max(ds*ds, dm*dm)
		if math.Abs(dm*dm-ds*ds) > tol {
			t.Errorf("N = %d: merged Lower %v, single-machine %v: d² differ by %v > %v", n, dm, ds, math.Abs(dm*dm-ds*ds), tol)
		}
		t.Logf("N = %d: merged [%v, %v], single [%v, %v]", n, dm, whole.File.Upper, ds, single.File.Upper)
	}
}

// Parts that do not make a whole, and tampered parts, are refused: a
// missing or duplicated part, a part of another input, a part whose stored
// basis, cells, claim or witness was changed, a proof that is not a part.
func TestMergeRefusals(t *testing.T) {
	ctx := context.Background()
	in := suite.Random(3, 6, 9, 1)
	parts := partProofs(t, in, 3)
	if _, err := Merge(ctx, parts, nil); err != nil {
		t.Fatalf("honest parts: %v", err)
	}
	otherIn := suite.Random(3, 6, 9, 2)
	other := partProofs(t, otherIn, 3)
	clone := func(i int) *Proof { return reread(t, parts[i]) }
	w := suite.MustNew(t, in)
	x, y := witness(t, w)
	whole, err := Build(ctx, Evidence{W: w, X: x, Y: y})
	if err != nil {
		t.Fatal(err)
	}
	for _, tc := range []struct {
		name  string
		parts func() []*Proof
		want  error
		says  string
	}{
		{"missing part", func() []*Proof { return []*Proof{parts[0], parts[2]} }, ErrParts, "part 1 of 3 missing"},
		{"duplicated part", func() []*Proof { return []*Proof{parts[0], parts[1], parts[2], parts[1]} }, ErrParts, "given twice"},
		{"no parts", func() []*Proof { return nil }, ErrParts, "no parts"},
		{"another input", func() []*Proof { return []*Proof{parts[0], other[1], parts[2]} }, ErrParts, "different inputs"},
		{"another stored basis", func() []*Proof {
			p := clone(1)
			p.Stored[2] *= 1 + 1e-12
			return []*Proof{parts[0], p, parts[2]}
		}, ErrParts, "different stored bases"},
		{"not a part", func() []*Proof { return []*Proof{parts[0], whole, parts[2]} }, ErrParts, "not a part proof"},
		{"cell removed", func() []*Proof {
			p := clone(1)
			p.Cover.Cells = p.Cover.Cells[1:]
			return []*Proof{parts[0], p, parts[2]}
		}, ErrClaim, "gap"},
		{"part claim raised", func() []*Proof {
			p := clone(2)
			p.File.Part.Lower = p.File.Part.Lower*1.001 + 1e-6
			return []*Proof{parts[0], parts[1], p}
		}, ErrClaim, "as claimed"},
		{"Lower claimed by a part", func() []*Proof {
			p := clone(0)
			p.File.Lower = p.File.Part.Lower / 2
			return []*Proof{p, parts[1], parts[2]}
		}, ErrClaim, "Lower"},
		{"witness moved", func() []*Proof {
			p := clone(0)
			p.File.X[0] += 0.01
			return []*Proof{p, parts[1], parts[2]}
		}, ErrClaim, "Upper"},
	} {
		_, err := Merge(ctx, tc.parts(), nil)
		if !errors.Is(err, tc.want) || !strings.Contains(err.Error(), tc.says) {
			t.Errorf("%s: err %v, want %v saying %q", tc.name, err, tc.want, tc.says)
		} else {
			t.Logf("%s: %v", tc.name, err)
		}
	}
	// Names label the parts in messages.
	_, err = Merge(ctx, []*Proof{parts[0], other[1], parts[2]}, []string{"a.proof", "b.proof", "c.proof"})
	if err == nil || !strings.Contains(err.Error(), "a.proof and b.proof") {
		t.Errorf("named parts: %v", err)
	}
}

// Read refuses part objects where they do not belong and parts without
// them; an empty part (more parts than initial cells) has no cells member
// and round-trips.
func TestPartFormat(t *testing.T) {
	ctx := context.Background()
	in := suite.Random(2, 5, 4, 1) // d = 2: 8 initial cells
	parts := partProofs(t, in, 9)
	empty := 0
	for _, p := range parts {
		if len(p.Cover.Cells) == 0 {
			empty++
			if _, err := Check(ctx, p, nil, nil); err != nil {
				t.Errorf("empty part %d: %v", p.File.Part.Index, err)
			}
		}
	}
	if empty == 0 {
		t.Fatal("no empty part among 9")
	}
	if _, err := Merge(ctx, parts, nil); err != nil {
		t.Errorf("merge with empty parts: %v", err)
	}
	p := reread(t, parts[0])
	p.File.LowerArgument = ArgBranch
	if _, err := Read(bytesOf(t, p)); !errors.Is(err, ErrFormat) {
		t.Errorf("part object in a whole proof: %v", err)
	}
	p = reread(t, parts[0])
	p.File.Part = nil
	if _, err := Read(bytesOf(t, p)); !errors.Is(err, ErrFormat) {
		t.Errorf("part proof without its part: %v", err)
	}
	p = reread(t, parts[0])
	p.File.CoverD = 1 << 20
	if _, err := Read(bytesOf(t, p)); !errors.Is(err, ErrFormat) {
		t.Errorf("huge cover dimension: %v", err)
	}
	// The cover's part description is the file's.
	q := reread(t, parts[3])
	if !slices.Equal(q.Cover.Part.Roots, q.File.Part.InitialCells) || q.Cover.Part.Index != 3 || q.Cover.Part.Count != 9 {
		t.Errorf("cover part %+v, file part %+v", q.Cover.Part, q.File.Part)
	}
}

func bytesOf(t *testing.T, p *Proof) (*bytes.Reader, int64) {
	t.Helper()
	var buf bytes.Buffer
	if err := Write(&buf, p); err != nil {
		t.Fatal(err)
	}
	return bytes.NewReader(buf.Bytes()), int64(buf.Len())
}
