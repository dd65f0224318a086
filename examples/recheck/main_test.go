package main

import (
	"bytes"
	"context"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"github.com/segre-lab/segre"
	"github.com/segre-lab/segre/net"
	"github.com/segre-lab/segre/proof"
	"github.com/segre-lab/segre/rankone/suite"
	"github.com/segre-lab/segre/subspace"
)

func runCmd(args ...string) (int, string, string) {
	var out, errb bytes.Buffer
	code := run(args, &out, &errb)
	return code, out.String(), errb.String()
}

// The command as a user meets it: a proof written by segre.CertifyFile is
// confirmed (exit 0) with and without its basis; another basis, a tampered
// claim, a truncated or foreign file and bad flags are refused with exit 1
// (a claim fails) or 2 (unreadable input), one line each.
func TestRecheckCommand(t *testing.T) {
	dir := t.TempDir()
	in := suite.Random(2, 5, 3, 1)
	basis := filepath.Join(dir, "b.npy")
	var bb bytes.Buffer
	subspace.WriteNPY(&bb, in.Basis)
	os.WriteFile(basis, bb.Bytes(), 0o644)
	_, rep, err := segre.CertifyFile(context.Background(), basis, segre.Options{Proof: true})
	if err != nil || rep.Proof == nil {
		t.Fatalf("certify: %v %v", err, rep.ProofError)
	}
	write := func(name string, p *proof.Proof) string {
		var buf bytes.Buffer
		if err := proof.Write(&buf, p); err != nil {
			t.Fatal(err)
		}
		path := filepath.Join(dir, name)
		os.WriteFile(path, buf.Bytes(), 0o644)
		return path
	}
	good := write("good.proof", rep.Proof)
	if code, out, errs := runCmd("-proof", good, basis); code != 0 || !strings.HasPrefix(out, "CONFIRMED") || !strings.Contains(out, "SHA-256 matches") {
		t.Errorf("good proof with basis: exit %d\n%s%s", code, out, errs)
	}
	if code, out, _ := runCmd("-proof", good); code != 0 || !strings.Contains(out, "not given") {
		t.Errorf("good proof alone: exit %d\n%s", code, out)
	}
	other := filepath.Join(dir, "other.txt")
	os.WriteFile(other, []byte("1 2 5\n1 2 3 4 5\n6 7 8 9 1\n"), 0o644)
	if code, out, _ := runCmd("-proof", good, other); code != 1 || !strings.HasPrefix(out, "REFUSED") {
		t.Errorf("another basis: exit %d\n%s", code, out)
	}
	bad := *rep.Proof
	bad.File.Lower = rep.Proof.File.Lower*1.01 + 1e-3
	if code, out, _ := runCmd("-proof", write("bad.proof", &bad), basis); code != 1 || !strings.Contains(out, "Lower") {
		t.Errorf("raised Lower: exit %d\n%s", code, out)
	}
	data, _ := os.ReadFile(good)
	trunc := filepath.Join(dir, "trunc.proof")
	os.WriteFile(trunc, data[:len(data)/2], 0o644)
	for _, args := range [][]string{{"-proof", trunc}, {"-proof", basis}, {basis}, {"-proof", good, basis, basis}, {"-nosuch"}, {"-proof", filepath.Join(dir, "missing")}} {
		if code, out, errs := runCmd(args...); code != 2 || out != "" || strings.Count(strings.TrimSpace(errs), "\n") != 0 {
			t.Errorf("%v: exit %d, stdout %q, stderr %q", args, code, out, errs)
		}
	}
}

// merge as a user meets it: the part proofs of a sharded run (built here as
// certify -shard builds them: net.BranchBound with Shard, proof.Build with
// the file's SHA-256, proof.WriteFile) merge into a proof that recheck
// -proof confirms with the basis (exit 0); a part alone is confirmed as a
// part; a missing or repeated part, a part of another input and a tampered
// part are refused (exit 1, one line on stdout naming the problem); bad
// flags and unreadable files exit 2 with one line on stderr.
func TestMergeCommand(t *testing.T) {
	dir := t.TempDir()
	writeBasis := func(name string, in suite.Instance) (string, []byte) {
		var bb bytes.Buffer
		subspace.WriteNPY(&bb, in.Basis)
		path := filepath.Join(dir, name)
		os.WriteFile(path, bb.Bytes(), 0o644)
		return path, bb.Bytes()
	}
	parts := func(prefix string, in suite.Instance, data []byte, n int) []string {
		w := suite.MustNew(t, in)
		var out []string
		for i := 0; i < n; i++ {
			var cv net.Cover
			res, err := (&net.BranchBound{Gap: 1e-6, Record: &cv, Shard: net.Shard{Index: i, Count: n}}).Search(context.Background(), w)
			if err != nil {
				t.Fatal(err)
			}
			p, err := proof.Build(context.Background(), proof.Evidence{W: w, X: res.X, Y: res.Y, Cover: &cv, InputSHA256: proof.SHA256(data)})
			if err != nil {
				t.Fatal(err)
			}
			name := filepath.Join(dir, prefix+"-"+strconv.Itoa(i))
			if err := proof.WriteFile(name, p); err != nil {
				t.Fatal(err)
			}
			out = append(out, name)
		}
		return out
	}
	basis, data := writeBasis("b.npy", suite.Random(3, 6, 9, 1))
	_, otherData := writeBasis("o.npy", suite.Random(3, 6, 9, 2))
	p := parts("part", suite.Random(3, 6, 9, 1), data, 3)
	o := parts("other", suite.Random(3, 6, 9, 2), otherData, 3)
	whole := filepath.Join(dir, "whole")
	if code, out, errs := runCmd("merge", "-out", whole, p[0], p[1], p[2]); code != 0 || !strings.HasPrefix(out, "MERGED  3 parts") {
		t.Fatalf("merge: exit %d\n%s%s", code, out, errs)
	}
	if code, out, errs := runCmd("-proof", whole, basis); code != 0 || !strings.HasPrefix(out, "CONFIRMED  d* in") || !strings.Contains(out, "SHA-256 matches") || !strings.Contains(out, "branch-and-bound argument") {
		t.Errorf("whole: exit %d\n%s%s", code, out, errs)
	}
	if code, out, errs := runCmd("-proof", p[1], basis); code != 0 || !strings.HasPrefix(out, "CONFIRMED  part 1 of 3") {
		t.Errorf("a part: exit %d\n%s%s", code, out, errs)
	}
	// A tampered part: its claim raised.
	tp, err := proof.ReadFile(p[2])
	if err != nil {
		t.Fatal(err)
	}
	tp.File.Part.Lower = tp.File.Part.Lower*1.01 + 1e-3
	tampered := filepath.Join(dir, "tampered")
	proof.WriteFile(tampered, tp)
	refused := filepath.Join(dir, "refused")
	for _, tc := range []struct {
		name  string
		files []string
		says  string
	}{
		{"missing part", []string{p[0], p[2]}, "part 1 of 3 missing"},
		{"duplicated part", []string{p[0], p[1], p[1], p[2]}, "part 1 of 3 is given twice"},
		{"another input", []string{p[0], o[1], p[2]}, "different inputs"},
		{"tampered part", []string{p[0], p[1], tampered}, "as claimed"},
		{"a whole proof", []string{p[0], whole, p[2]}, "not a part proof"},
	} {
		code, out, _ := runCmd(append([]string{"merge", "-out", refused}, tc.files...)...)
		if code != 1 || !strings.HasPrefix(out, "REFUSED") || !strings.Contains(out, tc.says) || strings.Count(strings.TrimSpace(out), "\n") != 0 {
			t.Errorf("%s: exit %d, %q", tc.name, code, out)
		}
	}
	if _, err := os.Stat(refused); err == nil {
		t.Errorf("a refused merge wrote %s", refused)
	}
	for _, args := range [][]string{
		{"merge", p[0], p[1], p[2]},           // no -out
		{"merge", "-out", whole},              // no parts
		{"merge", "-out", whole, basis, p[1]}, // not a proof file
		{"merge", "-out", whole, p[0], dir},   // a folder
		{"merge", "-nosuch", "-out", whole, p[0]},
		{"merge", "-out", filepath.Join(dir, "no", "such", "dir"), p[0], p[1], p[2]}, // cannot write
	} {
		if code, out, errs := runCmd(args...); code != 2 || out != "" || strings.Count(strings.TrimSpace(errs), "\n") != 0 {
			t.Errorf("%v: exit %d, stdout %q, stderr %q", args, code, out, errs)
		}
	}
}

// A complex subspace's proof (written by segre.CertifyFile on a complex
// text file) is confirmed with its complex basis, over C; another complex
// basis is refused.
func TestRecheckComplex(t *testing.T) {
	dir := t.TempDir()
	basis := filepath.Join(dir, "c.txt")
	os.WriteFile(basis, []byte("2 2 3 complex\n1 2i 0\n1-1i 3 0.5\n0 1 1i\n2 -1 1+1i\n"), 0o644)
	_, rep, err := segre.CertifyFile(context.Background(), basis, segre.Options{Proof: true})
	if err != nil || rep.Proof == nil {
		t.Fatalf("certify: %v %v", err, rep.ProofError)
	}
	var buf bytes.Buffer
	if err := proof.Write(&buf, rep.Proof); err != nil {
		t.Fatal(err)
	}
	path := filepath.Join(dir, "c.proof")
	os.WriteFile(path, buf.Bytes(), 0o644)
	code, out, errs := runCmd("-proof", path, basis)
	if code != 0 || !strings.HasPrefix(out, "CONFIRMED  d* over C") || !strings.Contains(out, "SHA-256 matches") {
		t.Errorf("complex proof: exit %d\n%s%s", code, out, errs)
	}
	other := filepath.Join(dir, "o.txt")
	os.WriteFile(other, []byte("2 2 3 complex\n1 2i 0\n1-1i 3 0.5\n0 1 1i\n2 -1 1+2i\n"), 0o644)
	if code, out, _ := runCmd("-proof", path, other); code != 1 || !strings.HasPrefix(out, "REFUSED") {
		t.Errorf("another complex basis: exit %d\n%s", code, out)
	}
}
