package main

import (
	"bytes"
	"errors"
	"io"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// The example runs on a tiny sweep (sharded and merged, and the planted
// sweep) and writes valid PNG and SVG files.
func TestTinySweepWritesPlots(t *testing.T) {
	dir := t.TempDir()
	var out, errb bytes.Buffer
	for _, s := range []string{"0/2", "1/2"} {
		if code := run([]string{"-sweep", "planted", "-short", "-budget", "200ms", "-quiet", "-shard", s, "-out", dir}, &out, &errb); code != 0 {
			t.Fatalf("shard %s: exit %d: %s", s, code, errb.String())
		}
	}
	if code := run([]string{"merge", "-planted", "-out", dir, filepath.Join(dir, "records-0-of-2.jsonl"), filepath.Join(dir, "records-1-of-2.jsonl")}, &out, &errb); code != 0 {
		t.Fatalf("merge: exit %d: %s", code, errb.String())
	}
	for _, f := range []string{"profile.png", "success.png"} {
		b, err := os.ReadFile(filepath.Join(dir, f))
		if err != nil || !bytes.HasPrefix(b, []byte("\x89PNG\r\n\x1a\n")) {
			t.Errorf("%s is not a PNG: %v", f, err)
		}
	}
	for _, f := range []string{"profile.svg", "success.svg"} {
		b, err := os.ReadFile(filepath.Join(dir, f))
		if err != nil || !bytes.Contains(b, []byte("<svg")) {
			t.Errorf("%s is not an SVG: %v", f, err)
		}
	}
	for _, f := range []string{"records.jsonl", "records.csv", "summary.txt"} {
		if st, err := os.Stat(filepath.Join(dir, f)); err != nil || st.Size() == 0 {
			t.Errorf("%s missing or empty", f)
		}
	}
	if code := run([]string{"-shard", "3/2"}, &out, &errb); code != 2 {
		t.Errorf("bad shard: exit %d", code)
	}
	if code := run([]string{"merge", filepath.Join(dir, "none.jsonl")}, &out, &errb); code != 2 {
		t.Errorf("missing file: exit %d", code)
	}
}

// Every bad invocation gives exit status 2, one line on stderr starting with
// the command's name, and nothing on stdout.
func TestBadInvocations(t *testing.T) {
	dir := t.TempDir()
	good := filepath.Join(dir, "good.jsonl")
	if code := run([]string{"-sweep", "small", "-short", "-budget", "50ms", "-quiet", "-shard", "0/50", "-out", dir}, io.Discard, io.Discard); code != 0 {
		t.Fatal("could not make a record file")
	}
	recs, _ := os.ReadFile(filepath.Join(dir, "records-0-of-50.jsonl"))
	os.WriteFile(good, recs, 0o644)
	trunc := filepath.Join(dir, "trunc.jsonl")
	os.WriteFile(trunc, recs[:len(recs)/2+1], 0o644) // cut inside a record
	junk := filepath.Join(dir, "junk.jsonl")
	os.WriteFile(junk, []byte("{\"family\": 3}\nnot json\n"), 0o644)
	aFile := filepath.Join(dir, "plain")
	os.WriteFile(aFile, []byte("x"), 0o644)
	cases := [][]string{
		{"-nosuchflag"},
		{"-budget", "0s"},
		{"-budget", "soon"},
		{"-sweep", "huge"},
		{"-shard", "2/2"},
		{"-shard", "-1/2"},
		{"-shard", "a/b"},
		{"stray-argument"},
		{"-out", filepath.Join(aFile, "sub"), "-sweep", "small", "-short"},
		{"merge"},
		{"merge", "-nosuchflag", good},
		{"merge", filepath.Join(dir, "missing.jsonl")},
		{"merge", trunc},
		{"merge", junk},
		{"merge", dir},
	}
	if _, err := os.Stat("/proc/self/mem"); err == nil {
		cases = append(cases, []string{"merge", "/proc/self/mem"}) // opens, but reading fails (EIO)
	}
	for _, args := range cases {
		var out, errb bytes.Buffer
		code := run(args, &out, &errb)
		msg := errb.String()
		if code != 2 || out.Len() != 0 || strings.Count(strings.TrimSpace(msg), "\n") != 0 || !strings.HasPrefix(msg, "benchmark") {
			t.Errorf("%v: exit %d, stdout %q, stderr %q; want 2, nothing, one line", args, code, out.String(), msg)
		}
	}
}

// writeAtomic leaves the old file untouched and no temporary file behind
// when writing fails, and replaces the file whole when it succeeds.
func TestWriteAtomic(t *testing.T) {
	dir := t.TempDir()
	p := filepath.Join(dir, "report.txt")
	os.WriteFile(p, []byte("old"), 0o644)
	err := writeAtomic(p, func(w io.Writer) error {
		io.WriteString(w, "half of the new")
		return errors.New("interrupted")
	})
	if err == nil {
		t.Fatal("failure not reported")
	}
	if b, _ := os.ReadFile(p); string(b) != "old" {
		t.Errorf("old file changed to %q", b)
	}
	if err := writeAtomic(p, func(w io.Writer) error { _, err := io.WriteString(w, "new"); return err }); err != nil {
		t.Fatal(err)
	}
	if b, _ := os.ReadFile(p); string(b) != "new" {
		t.Errorf("file is %q, want new", b)
	}
	if st, _ := os.Stat(p); st.Mode().Perm() != 0o644 {
		t.Errorf("mode %v, want 0644", st.Mode().Perm())
	}
	ents, _ := os.ReadDir(dir)
	if len(ents) != 1 {
		t.Errorf("directory holds %d entries, want only the report", len(ents))
	}
}
