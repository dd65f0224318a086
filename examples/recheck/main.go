// Command recheck re-verifies a proof file written by certify -proof,
// searching nothing: the stored basis, Upper at the witness, Lower from its
// argument, and, when BASIS is given, that the proof is about that file and
// how far its span is from the stored subspace.
//
//	go run ./examples/recheck -proof FILE [BASIS]
//	go run ./examples/recheck merge -out WHOLE PART...
//
// The second form checks the part proofs of a sharded branch-and-bound run
// (certify -shard i/N) and joins them into one proof of the whole interval,
// written to WHOLE, which the first form then re-checks like any other.
//
// Exit status: 0 every claim confirmed (or the parts merged), 1 a claim
// fails or the parts do not make a whole (the line says which), 2 bad flags
// or unreadable files, 130 interrupted.
package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"os/signal"
	"strings"

	"github.com/segre-lab/segre/internal/cli"
	"github.com/segre-lab/segre/proof"
	"github.com/segre-lab/segre/rankone"
	"github.com/segre-lab/segre/subspace"
)

func main() {
	os.Exit(run(os.Args[1:], os.Stdout, os.Stderr))
}

const usage = `usage: recheck -proof FILE [BASIS]
       recheck merge -out WHOLE PART...
Re-verifies every claim of a proof file (certify -proof) without searching.
With BASIS (the input file the proof is about), also checks its SHA-256 and
proves the distance from its span to the stored basis.
merge checks the part proofs of certify -shard i/N (all N of them, each
once, same input and stored basis, each part's claims) and writes one proof
of the whole interval to WHOLE.
Exit status: 0 confirmed (merged), 1 a claim fails (the parts do not make a
whole), 2 bad input, 130 interrupted.
Flags:`

func run(args []string, stdout, stderr io.Writer) int {
	if len(args) > 0 && args[0] == "merge" {
		return runMerge(args[1:], stdout, stderr)
	}
	fs := flag.NewFlagSet("recheck", flag.ContinueOnError)
	fs.SetOutput(io.Discard)
	path := fs.String("proof", "", "the proof file")
	bad := badFunc(stderr, "recheck")
	rest, code, ok := parse(fs, args, stderr, bad)
	if !ok {
		return code
	}
	if *path == "" {
		return bad("-proof FILE is required")
	}
	if len(rest) > 1 {
		return bad("at most one BASIS file, got %d", len(rest))
	}
	p, err := proof.ReadFile(*path)
	if err != nil {
		return bad("%s: %s", *path, oneLine(err))
	}
	var input *subspace.Input
	var inputBytes []byte
	if len(rest) == 1 {
		// Read the bytes once: hash them and parse the same bytes.
		if inputBytes, err = os.ReadFile(rest[0]); err != nil {
			return bad("%v", err)
		}
		in, err := subspace.ParseInput(inputBytes, 0)
		if err != nil {
			return bad("%s: %s", rest[0], oneLine(err))
		}
		// A file of state vectors (certify -dims m,n): one r×(m·n) array.
		m, n := p.File.Rows, p.File.Cols
		if p.File.Field == "complex" {
			m, n = m/2, n/2
		}
		if b := &in.Real; in.Field == subspace.Real && b.Count == 1 && b.Cols == m*n && b.Cols != n {
			b.Count, b.Rows, b.Cols = b.Rows, m, n
		}
		if b := &in.Complex; in.Field == subspace.Complex && b.Count == 1 && b.Cols == m*n && b.Cols != n {
			b.Count, b.Rows, b.Cols = b.Rows, m, n
		}
		input = &in
	}
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt)
	defer stop()
	c, err := proof.CheckInput(ctx, p, input, inputBytes)
	if err != nil {
		if ctx.Err() != nil {
			fmt.Fprintln(stderr, "recheck: interrupted")
			return 130
		}
		if errors.Is(err, proof.ErrInput) {
			return bad("%s: %s", rest[0], oneLine(err))
		}
		if errors.Is(err, proof.ErrClaim) {
			fmt.Fprintf(stdout, "REFUSED  %s\n", oneLine(err))
			return 1
		}
		return bad("%s", oneLine(err))
	}
	fp := p.File
	if c.Part != nil {
		printPart(stdout, p, c)
		return 0
	}
	if fp.Field == "complex" {
		fmt.Fprintf(stdout, "CONFIRMED  d* over C in [%s, %s]   (for the stored basis: %d real vectors of %d×%d spanning the realified subspace of %d×%d complex matrices)\n",
			rankone.FormatLower(c.Lower, 10), rankone.FormatUpper(c.Upper, 10), fp.StoredCount, fp.Rows, fp.Cols, fp.Rows/2, fp.Cols/2)
	} else {
		fmt.Fprintf(stdout, "CONFIRMED  d* in [%s, %s]   (for the stored basis of %d vectors of %d×%d%s)\n",
			rankone.FormatLower(c.Lower, 10), rankone.FormatUpper(c.Upper, 10), fp.StoredCount, fp.Rows, fp.Cols,
			map[bool]string{true: ", spanning W⊥", false: ""}[fp.StoresComplement])
	}
	fmt.Fprintf(stdout, "  upper    Verify at the witness: ≤ %s\n", rankone.FormatUpper(c.RecomputedUpper, 10))
	fmt.Fprintf(stdout, "  lower    %s argument: ≥ %s\n", c.Argument, rankone.FormatLower(c.RecomputedLower, 10))
	fmt.Fprintf(stdout, "  basis    proven orthogonality defect %s\n", rankone.FormatUpper(c.OrthogonalityBound, 3))
	switch {
	case !c.InputChecked:
		fmt.Fprintln(stdout, "  input    not given: the interval holds for the stored basis")
	case c.InputNote != "":
		fmt.Fprintf(stdout, "  input    %s; %s: the interval holds for the stored basis only\n", hashWord(c.HashChecked), c.InputNote)
	default:
		fmt.Fprintf(stdout, "  input    %s; its span is within %s of the stored subspace: d* in [%s, %s] for the input as given\n",
			hashWord(c.HashChecked), rankone.FormatUpper(c.InputDistance, 3), rankone.FormatLower(c.InputLower, 10), rankone.FormatUpper(c.InputUpper, 10))
	}
	return 0
}

func oneLine(err error) string { return strings.ReplaceAll(err.Error(), "\n", " ") }

func hashWord(checked bool) string {
	if checked {
		return "SHA-256 matches"
	}
	return "the proof records no SHA-256 (not checked)"
}

// printPart prints what the check of a part proof confirmed.
func printPart(stdout io.Writer, p *proof.Proof, c proof.Confirmed) {
	pc := c.Part
	fmt.Fprintf(stdout, "CONFIRMED  part %d of %d: d* ≥ %s unless the minimum is reached in another part; d* ≤ %s\n",
		pc.Index, pc.Count, rankone.FormatLower(pc.Lower, 10), rankone.FormatUpper(c.Upper, 10))
	fmt.Fprintf(stdout, "  part     %d of the %d initial cells (level %d), %d cells: they prove ≥ %s\n",
		len(pc.InitialCells), p.Cover.Part.InitialCells(p.Cover.D), pc.Level, len(p.Cover.Cells), rankone.FormatLower(c.RecomputedPartLower, 10))
	fmt.Fprintf(stdout, "  upper    Verify at the witness: ≤ %s\n", rankone.FormatUpper(c.RecomputedUpper, 10))
	fmt.Fprintln(stdout, "  whole    a part proves no Lower alone: join all parts with recheck merge")
}

// badFunc returns the reporter of bad usage or input: one line on stderr
// prefixed with the command's name, exit code 2.
func badFunc(stderr io.Writer, name string) func(string, ...any) int {
	return func(format string, a ...any) int {
		fmt.Fprintf(stderr, name+": "+format+"\n", a...)
		return 2
	}
}

// parse parses the flags (after the positional arguments too, cli.Parse);
// on -h it prints the usage and returns exit code 0, on an error bad's
// code, with ok false either way.
func parse(fs *flag.FlagSet, args []string, stderr io.Writer, bad func(string, ...any) int) (rest []string, code int, ok bool) {
	rest, err := cli.Parse(fs, args)
	if err != nil {
		if errors.Is(err, flag.ErrHelp) {
			fmt.Fprintln(stderr, usage)
			fs.SetOutput(stderr)
			fs.PrintDefaults()
			return nil, 0, false
		}
		return nil, bad("%v", err), false
	}
	return rest, 0, true
}

// runMerge is recheck merge -out WHOLE PART...: read every part, let
// proof.Merge check that they make a whole, write the whole proof.
func runMerge(args []string, stdout, stderr io.Writer) int {
	fs := flag.NewFlagSet("recheck merge", flag.ContinueOnError)
	fs.SetOutput(io.Discard)
	out := fs.String("out", "", "the whole proof to write")
	bad := badFunc(stderr, "recheck merge")
	files, code, ok := parse(fs, args, stderr, bad)
	if !ok {
		return code
	}
	if *out == "" {
		return bad("-out WHOLE is required")
	}
	if len(files) == 0 {
		return bad("no part proofs given")
	}
	parts := make([]*proof.Proof, len(files))
	for i, name := range files {
		var err error
		if parts[i], err = proof.ReadFile(name); err != nil {
			return bad("%s: %s", name, oneLine(err))
		}
	}
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt)
	defer stop()
	whole, err := proof.Merge(ctx, parts, files)
	if err != nil {
		if ctx.Err() != nil {
			fmt.Fprintln(stderr, "recheck merge: interrupted")
			return 130
		}
		if errors.Is(err, proof.ErrParts) || errors.Is(err, proof.ErrClaim) {
			fmt.Fprintf(stdout, "REFUSED  %s\n", oneLine(err))
			return 1
		}
		return bad("%s", oneLine(err))
	}
	if err := proof.WriteFile(*out, whole); err != nil {
		return bad("%s: %s", *out, oneLine(err))
	}
	f := whole.File
	cells := 0
	if whole.Cover != nil {
		cells = len(whole.Cover.Cells)
	}
	fmt.Fprintf(stdout, "MERGED  %d parts: d* in [%s, %s]   (%s argument, %d cells) written to %s\n",
		len(parts), rankone.FormatLower(f.Lower, 10), rankone.FormatUpper(f.Upper, 10), f.LowerArgument, cells, *out)
	fmt.Fprintf(stdout, "  check it with: go run ./examples/recheck -proof %s BASIS\n", *out)
	return 0
}
