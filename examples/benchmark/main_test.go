package main

import (
	"bytes"
	"os"
	"path/filepath"
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
