// Command recheck re-verifies a proof file written by certify -proof,
// searching nothing: the stored basis, Upper at the witness, Lower from its
// argument, and, when BASIS is given, that the proof is about that file and
// how far its span is from the stored subspace.
//
//	go run ./examples/recheck -proof FILE [BASIS]
//
// Exit status: 0 every claim confirmed, 1 a claim fails (the line says
// which), 2 bad flags or unreadable files, 130 interrupted.
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
Re-verifies every claim of a proof file (certify -proof) without searching.
With BASIS (the input file the proof is about), also checks its SHA-256 and
proves the distance from its span to the stored basis.
Exit status: 0 confirmed, 1 a claim fails, 2 bad input, 130 interrupted.
Flags:`

func run(args []string, stdout, stderr io.Writer) int {
	fs := flag.NewFlagSet("recheck", flag.ContinueOnError)
	fs.SetOutput(io.Discard)
	path := fs.String("proof", "", "the proof file")
	bad := func(format string, a ...any) int {
		fmt.Fprintf(stderr, "recheck: "+format+"\n", a...)
		return 2
	}
	rest, err := cli.Parse(fs, args)
	if err != nil {
		if errors.Is(err, flag.ErrHelp) {
			fmt.Fprintln(stderr, usage)
			fs.SetOutput(stderr)
			fs.PrintDefaults()
			return 0
		}
		return bad("%v", err)
	}
	if *path == "" {
		return bad("-proof FILE is required")
	}
	if len(rest) > 1 {
		return bad("at most one BASIS file, got %d", len(rest))
	}
	f, err := os.Open(*path)
	if err != nil {
		return bad("%v", err)
	}
	defer f.Close()
	st, err := f.Stat()
	if err != nil || !st.Mode().IsRegular() {
		return bad("%s: not a regular file", *path)
	}
	p, err := proof.Read(f, st.Size())
	if err != nil {
		return bad("%s: %s", *path, oneLine(err))
	}
	var input *subspace.Basis
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
		if in.Field != subspace.Real {
			return bad("%s: complex data: proofs of complex subspaces are not supported yet", rest[0])
		}
		b := in.Real
		// A file of state vectors (certify -dims m,n): one r×(m·n) array.
		if b.Count == 1 && b.Cols == p.File.Rows*p.File.Cols && b.Cols != p.File.Cols {
			b.Count, b.Rows, b.Cols = b.Rows, p.File.Rows, p.File.Cols
		}
		input = &b
	}
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt)
	defer stop()
	c, err := proof.Check(ctx, p, input, inputBytes)
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
	fmt.Fprintf(stdout, "CONFIRMED  d* in [%s, %s]   (for the stored basis of %d vectors of %d×%d%s)\n",
		rankone.FormatLower(c.Lower, 10), rankone.FormatUpper(c.Upper, 10), fp.StoredCount, fp.Rows, fp.Cols,
		map[bool]string{true: ", spanning W⊥", false: ""}[fp.StoresComplement])
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
