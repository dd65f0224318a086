package main

import (
	"bytes"
	"errors"
	"image/png"
	"io"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"gonum.org/v1/plot/vg/vgimg"

	"github.com/segre-lab/segre/rankone/suite"
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
	empty := filepath.Join(dir, "empty.jsonl")
	os.WriteFile(empty, nil, 0o644)
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
		{"plot"},
		{"plot", "-nosuchflag", good},
		{"plot", filepath.Join(dir, "missing.jsonl")},
		{"plot", trunc},
		{"plot", junk},
		{"plot", dir},
		{"plot", empty},
		{"plot", "-out", filepath.Join(aFile, "sub"), good},
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

// -h, alone or after merge or plot, prints the usage with every flag on
// stderr and exits 0 with nothing on stdout.
func TestHelp(t *testing.T) {
	for _, args := range [][]string{{"-h"}, {"-help"}, {"merge", "-h"}, {"plot", "-h"}, {"plot", "some.jsonl", "-h"}} {
		var out, errb bytes.Buffer
		if code := run(args, &out, &errb); code != 0 || out.Len() != 0 {
			t.Errorf("%v: exit %d, stdout %q; want 0 and nothing", args, code, out.String())
		}
		msg := errb.String()
		for _, want := range []string{"usage: benchmark", "benchmark merge", "benchmark plot", "Exit status",
			"-sweep", "-short", "-budget", "-shard", "-out", "-quiet", "-planted"} {
			if !strings.Contains(msg, want) {
				t.Errorf("%v: usage lacks %q:\n%s", args, want, msg)
			}
		}
	}
}

// handRecords are records of a user's own searcher ("mine") and another,
// made by hand as suite.Run would emit them, on planted 6×6 instances of
// dimensions 3 and 10.
func handRecords() []suite.Record {
	var recs []suite.Record
	for i, k := range []int{3, 10} {
		for _, s := range []string{"mine", "theirs"} {
			ok := s == "mine" || k == 3
			upper := 0.25
			if ok {
				upper = 0
			}
			recs = append(recs, suite.Record{Index: i, Family: "planted", Instance: "planted/6x6", Rows: 6, Cols: 6, Dim: k,
				Optimum: &suite.Number{}, Searcher: s, Upper: upper, Status: "converged", Seconds: 0.01 * float64(i+1),
				Success: ok, Points: -1})
		}
	}
	return recs
}

// "benchmark plot" draws the plots of any record file, with flags before or
// after the files, leaves the record file as it was, and writes nothing but
// the plots. Each PNG is wider than the axes (plotWidth) and has ink in the
// strip to their right: the legend's own column, where it covers no line.
func TestPlotCommand(t *testing.T) {
	dir := t.TempDir()
	in := filepath.Join(dir, "mine.jsonl")
	var buf bytes.Buffer
	if err := suite.WriteJSONL(&buf, handRecords()); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(in, buf.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	for i, args := range [][]string{
		{"plot", "-planted", "-out", filepath.Join(dir, "a"), in},
		{"plot", in, "-out", filepath.Join(dir, "b"), "-planted"},
	} {
		var out, errb bytes.Buffer
		if code := run(args, &out, &errb); code != 0 || errb.Len() != 0 || out.Len() != 0 {
			t.Fatalf("%v: exit %d, stdout %q, stderr %q", args, code, out.String(), errb.String())
		}
		outDir := filepath.Join(dir, []string{"a", "b"}[i])
		ents, _ := os.ReadDir(outDir)
		var names []string
		for _, e := range ents {
			names = append(names, e.Name())
		}
		if got := strings.Join(names, " "); got != "profile.png profile.svg success.png success.svg" {
			t.Errorf("%v wrote %q, want the four plots only", args, got)
		}
		for _, base := range []string{"profile", "success"} {
			checkLegendBeside(t, filepath.Join(outDir, base+".png"))
			b, err := os.ReadFile(filepath.Join(outDir, base+".svg"))
			if err != nil || !bytes.Contains(b, []byte("<svg")) || !bytes.Contains(b, []byte("mine")) {
				t.Errorf("%s.svg is not an SVG naming the searcher: %v", base, err)
			}
		}
	}
	if b, _ := os.ReadFile(in); !bytes.Equal(b, buf.Bytes()) {
		t.Error("the record file was changed")
	}
}

// checkLegendBeside decodes a PNG and checks that it extends past the axes'
// width (plotWidth at vgimg's default resolution, the one the PNG canvas
// uses) and that the extra strip holds dark pixels (the legend's text).
func checkLegendBeside(t *testing.T, path string) {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	img, err := png.Decode(f)
	if err != nil {
		t.Fatalf("%s: %v", path, err)
	}
	axes := int(plotWidth.Dots(vgimg.DefaultDPI))
	b := img.Bounds()
	if b.Dx() <= axes+10 {
		t.Fatalf("%s is %d pixels wide: no room beside the %d-pixel axes for the legend", path, b.Dx(), axes)
	}
	dark := 0
	for y := b.Min.Y; y < b.Max.Y; y++ {
		for x := b.Min.X + axes; x < b.Max.X; x++ {
			if r, g, bl, _ := img.At(x, y).RGBA(); r+g+bl < 3*0x8000 {
				dark++
			}
		}
	}
	if dark == 0 {
		t.Errorf("%s: nothing drawn beside the axes; the legend is not in its own column", path)
	}
}
