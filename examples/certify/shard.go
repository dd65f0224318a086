package main

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os"
	"time"

	"github.com/segre-lab/segre/net"
	"github.com/segre-lab/segre/proof"
	"github.com/segre-lab/segre/rankone"
	"github.com/segre-lab/segre/subspace"
)

// maxShards bounds N in -shard i/N (far more parts than initial cells only
// adds empty parts).
const maxShards = 1 << 16

// runShard is certify -shard i/N: orthonormalise the input exactly as a
// whole run does (same settings, so every part stores the same basis), run
// branch-and-bound on part i of N of its initial cells (net.Shard) within
// -time if given, and write the part proof to -proof. A part that runs out
// of its budget still writes its proof (its cells are then the leaves and
// the waiting cells; valid, with a weaker claim); an interrupted part writes
// nothing.
func runShard(ctx context.Context, c config, in subspace.Input, source string, stdout, stderr io.Writer) int {
	if in.Field == subspace.Complex {
		fmt.Fprintf(stderr, "certify: -shard: complex data: proofs of complex subspaces are not supported yet\n")
		return exitBadInput
	}
	begin := time.Now()
	w, err := subspace.New(ctx, in.Real, subspace.Options{RankTol: c.tol, MaxBytes: c.maxBytes})
	if err != nil {
		fmt.Fprintf(stderr, "certify: %s\n", oneLine(err))
		if ctx.Err() != nil {
			return exitInterrupted
		}
		return exitBadInput
	}
	var cover net.Cover
	bb := &net.BranchBound{Gap: c.gap, Record: &cover, Shard: net.Shard{Index: c.shard[0], Count: c.shard[1]}}
	if c.timeSet {
		bb.Budget = c.budget
	}
	var line *shardLine
	if !c.quiet && (!c.asJSON || c.progress) {
		line = &shardLine{out: stderr, part: c.shard, begin: begin}
		bb.Progress = line.show
	}
	res, err := bb.Search(ctx, w)
	line.end()
	if err != nil {
		fmt.Fprintf(stderr, "certify: %s\n", oneLine(err))
		switch {
		case ctx.Err() != nil:
			return exitInterrupted
		case errors.Is(err, net.ErrTooLarge) || errors.Is(err, rankone.ErrOption):
			return exitBadInput
		}
		return exitInternal
	}
	ev := proof.Evidence{W: w, X: res.X, Y: res.Y, Cover: &cover}
	if c.file != "" {
		data, err := os.ReadFile(c.file)
		if err != nil {
			fmt.Fprintf(stderr, "certify: %s\n", oneLine(err))
			return exitBadInput
		}
		ev.InputSHA256 = proof.SHA256(data)
	}
	p, err := proof.Build(ctx, ev)
	if err == nil {
		err = proof.WriteFile(c.proof, p)
	}
	if err != nil {
		fmt.Fprintf(stderr, "certify: proof: %s\n", oneLine(err))
		if ctx.Err() != nil {
			return exitInterrupted
		}
		return exitInternal
	}
	pc := p.File.Part
	out := shardOut{Source: source, Part: pc.Index, Parts: pc.Count, InitialCells: len(pc.InitialCells),
		AllInitialCells: cover.Part.InitialCells(cover.D), Cells: len(cover.Cells), PartLower: number(pc.Lower),
		Upper: number(p.File.Upper), Status: res.Status.String(), Seconds: number(time.Since(begin).Seconds()), Proof: c.proof}
	if res.Status == rankone.LimitReached {
		out.Status += " (" + res.Limit.String() + ")"
	}
	if c.asJSON {
		enc := json.NewEncoder(stdout)
		enc.SetIndent("", "  ")
		if err := enc.Encode(out); err != nil {
			fmt.Fprintf(stderr, "certify: %v\n", err)
			return exitInternal
		}
	} else {
		fmt.Fprintf(stdout, "input      %s\n", source)
		fmt.Fprintf(stdout, "part       %d of %d: %d of the %d initial cells, %d cells in its proof\n",
			out.Part, out.Parts, out.InitialCells, out.AllInitialCells, out.Cells)
		fmt.Fprintf(stdout, "distance   d* ≥ %s unless the minimum is reached in another part (this part's claim)\n", down(pc.Lower, 10))
		fmt.Fprintf(stdout, "           d* ≤ %s at the witness (certified)\n", up(p.File.Upper, 10))
		fmt.Fprintf(stdout, "proof      %s (join all %d parts: go run ./examples/recheck merge -out WHOLE PART...)\n", c.proof, pc.Count)
		fmt.Fprintf(stdout, "stopped    %s after %.3gs\n", out.Status, time.Since(begin).Seconds())
	}
	if res.Status == rankone.LimitReached {
		return exitBudget
	}
	return exitCertified
}

// shardOut is the JSON object certify -shard -json prints.
type shardOut struct {
	Source          string `json:"source"`
	Part            int    `json:"part"`
	Parts           int    `json:"parts"`
	InitialCells    int    `json:"initial_cells"`
	AllInitialCells int    `json:"all_initial_cells"`
	Cells           int    `json:"cells"`
	PartLower       number `json:"part_lower"`
	Upper           number `json:"upper"`
	Status          string `json:"status"`
	Seconds         number `json:"seconds"`
	Proof           string `json:"proof"`
}

// shardLine shows a part's progress on one line of stderr rewritten in
// place: cells evaluated and waiting, and the certified Upper (a part has
// no Lower of its own while it runs).
type shardLine struct {
	out     io.Writer
	part    [2]int
	begin   time.Time
	printed bool
}

func (s *shardLine) show(p rankone.Progress) {
	el := time.Since(s.begin)
	if el < time.Second {
		return
	}
	fmt.Fprintf(s.out, "\r%-90s", fmt.Sprintf("%6.1fs  part %d of %d: %d cells, %d waiting, d* ≤ %s",
		el.Seconds(), s.part[0], s.part[1], p.Nodes, p.Frontier, up(p.Upper, 6)))
	s.printed = true
}

func (s *shardLine) end() {
	if s != nil && s.printed {
		fmt.Fprintln(s.out)
	}
}
