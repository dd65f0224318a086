package main

import (
	"bytes"
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/segre-lab/segre"
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
