package proof

import (
	"context"
	"fmt"
	"math"
	"slices"
	"strings"

	"github.com/segre-lab/segre/internal/accurate"
	"github.com/segre-lab/segre/net"
	"github.com/segre-lab/segre/rankone"
	"github.com/segre-lab/segre/subspace"
)

// Merge checks the part proofs of one sharded branch-and-bound run and joins
// them into one proof of the whole interval (lower argument
// "branch-and-bound", the parts' cells together), which Check confirms like
// any other. names, if not nil, labels the parts in messages (file names;
// same length as parts). The parts are not modified.
//
// What it checks: every proof is a part proof; all are about the same input
// (SHA-256), the same stored basis (bit for bit: the same subspace, which
// every part orthonormalised on its own) and the same partition (side,
// number of parts, level of the initial cells); every part index appears
// exactly once and the parts' initial cells partition all of them
// (net.JoinParts); and each part's own claims hold (Check: its Upper at its
// witness and its part claim, recomputed by net.CheckPart).
//
// Why the whole holds (derived on net.Shard and net.CheckCover): each part i
// proves that d* ≥ L_i unless the minimum distance is reached only in other
// parts; the parts' initial cells tile the faces, so the minimum is reached
// in some part j, and d* ≥ L_j ≥ min_i L_i. So Lower = min_i L_i, the
// smallest confirmed part claim, with no further evaluation of the cells;
// Upper is the smallest confirmed part Upper, with its witness. If the
// flattening bound (recomputed) proves a better Lower, Merge keeps it, as
// Build would. The joined cover re-checks (net.CheckCover) to the level of
// the largest part up to a few ulps, well inside the Margin by which the
// part claims were weakened, so Check confirms the merged Lower.
//
// Cost: one evaluation per cell of the parts (their checks), as one Check
// of the whole proof.
//
// It returns an error wrapping ErrParts for parts that do not make a whole,
// ErrClaim (naming the part) for a part whose claim fails, and ctx.Err()
// when ctx is done.
func Merge(ctx context.Context, parts []*Proof, names []string) (*Proof, error) {
	if len(parts) == 0 {
		return nil, fmt.Errorf("%w: no parts given", ErrParts)
	}
	name := func(i int) string {
		if names != nil && i < len(names) {
			return names[i]
		}
		return fmt.Sprintf("proof %d", i+1)
	}
	p0 := parts[0]
	for i, p := range parts {
		f := p.File
		if f.LowerArgument != ArgBranchPart || f.Part == nil || p.Cover == nil {
			return nil, fmt.Errorf("%w: %s is not a part proof (its argument is %q)", ErrParts, name(i), f.LowerArgument)
		}
		if f.Field != "real" {
			return nil, fmt.Errorf("%w: %s is a %q part: sharded proofs are real only", ErrParts, name(i), f.Field)
		}
		if i == 0 {
			continue
		}
		g := p0.File
		switch {
		case f.Format != g.Format || f.Version != g.Version || f.Field != g.Field:
			return nil, fmt.Errorf("%w: %s and %s are of different formats", ErrParts, name(0), name(i))
		case f.InputSHA256 != g.InputSHA256:
			return nil, fmt.Errorf("%w: %s and %s are about different inputs (SHA-256 %s and %s)", ErrParts, name(0), name(i), shortHash(g.InputSHA256), shortHash(f.InputSHA256))
		case f.Rows != g.Rows || f.Cols != g.Cols || f.StoredCount != g.StoredCount || f.StoresComplement != g.StoresComplement || !sameFloats(p.Stored, p0.Stored):
			return nil, fmt.Errorf("%w: %s and %s have different stored bases (every part must orthonormalise the same input with the same settings, binary and architecture)", ErrParts, name(0), name(i))
		}
	}
	covers := make([]*net.Cover, len(parts))
	for i, p := range parts {
		covers[i] = p.Cover
	}
	whole, err := net.JoinParts(covers)
	if err != nil {
		return nil, fmt.Errorf("%w: %s", ErrParts, strings.TrimPrefix(err.Error(), net.ErrCover.Error()+": "))
	}
	// Each part's own claims.
	lower, upper, best := math.Inf(1), math.Inf(1), 0
	for i, p := range parts {
		if _, err := Check(ctx, p, nil, nil); err != nil {
			if ctx.Err() != nil {
				return nil, ctx.Err()
			}
			return nil, fmt.Errorf("%s (part %d of %d): %w", name(i), p.File.Part.Index, p.File.Part.Count, err)
		}
		lower = math.Min(lower, p.File.Part.Lower)
		if p.File.Upper < upper {
			upper, best = p.File.Upper, i
		}
	}
	f, b := p0.File, parts[best].File
	out := &Proof{File: File{Format: f.Format, Version: f.Version, InputSHA256: f.InputSHA256, Field: f.Field,
		Rows: f.Rows, Cols: f.Cols, StoredCount: f.StoredCount, StoresComplement: f.StoresComplement,
		X: slices.Clone(b.X), Y: slices.Clone(b.Y), Upper: b.Upper, Lower: lower, LowerArgument: ArgBranch,
		CoverD: whole.D, CoverOnX: whole.OnX}, Stored: p0.Stored, Cover: whole}
	// The flattening, as Build would weigh it.
	w, err := subspace.FromStored(ctx, p0.Stored, f.StoredCount, f.Rows, f.Cols, f.StoresComplement, subspace.Options{})
	if err != nil {
		return nil, fmt.Errorf("%w: stored basis: %v", ErrClaim, err)
	}
	if _, flo := rankone.FlatteningBound(ctx, w); accurate.Down(flo*(1-Margin)) > lower {
		out.File.Lower, out.File.LowerArgument = math.Max(0, accurate.Down(flo*(1-Margin))), ArgFlattening
		out.Cover, out.File.CoverD, out.File.CoverOnX = nil, 0, false
	}
	if ctx.Err() != nil {
		return nil, ctx.Err()
	}
	if !(out.File.Lower <= out.File.Upper) {
		// Both are confirmed bounds on d*: this cannot happen.
		return nil, fmt.Errorf("%w: the parts prove d* ≥ %v, above their best Upper %v", ErrClaim, out.File.Lower, out.File.Upper)
	}
	return out, nil
}

// sameFloats reports whether a and b hold the same float64 values bit for
// bit.
func sameFloats(a, b []float64) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if math.Float64bits(a[i]) != math.Float64bits(b[i]) {
			return false
		}
	}
	return true
}

// shortHash shortens a hex SHA-256 for messages ("none" when empty).
func shortHash(h string) string {
	switch {
	case h == "":
		return "none"
	case len(h) > 12:
		return h[:12] + "…"
	}
	return h
}
