package segre

import (
	"go/build"
	"io/fs"
	"path/filepath"
	"slices"
	"strings"
	"testing"
)

// The layering of ../shared/DESIGN.md: each package imports only the
// module packages listed for it (non-test imports; "internal/" allows every
// internal package). Nothing imports upward.
var layers = map[string][]string{
	"":                   {"proof", "net", "sos", "rankone", "subspace", "internal/"},
	"proof":              {"net", "sos", "rankone", "subspace", "internal/"},
	"net":                {"rankone", "subspace", "internal/"},
	"sos":                {"rankone", "subspace", "internal/"},
	"rankone":            {"subspace", "internal/"},
	"rankone/suite":      {"rankone", "subspace", "internal/"},
	"rankone/searchtest": {"rankone", "rankone/suite", "subspace", "internal/"},
	"rankone/cpd":        {"rankone", "subspace", "internal/"},
	"subspace":           {"internal/"},
	"internal/":          {"internal/"},
	"examples/":          nil, // commands: anything
}

func TestLayering(t *testing.T) {
	const mod = "github.com/segre-lab/segre"
	err := filepath.WalkDir(".", func(path string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		if !d.IsDir() {
			return nil
		}
		if name := d.Name(); path != "." && (strings.HasPrefix(name, ".") || name == "testdata") {
			return filepath.SkipDir
		}
		pkg, err := build.ImportDir(path, 0)
		if err != nil {
			return nil // no Go files here
		}
		rel := filepath.ToSlash(path)
		if rel == "." {
			rel = ""
		}
		allowed, ok := layers[rel]
		if !ok {
			for k, v := range layers {
				if strings.HasSuffix(k, "/") && strings.HasPrefix(rel+"/", k) {
					allowed, ok = v, true
				}
			}
		}
		if !ok {
			t.Errorf("package %q has no layer in DESIGN's table: add it to layering_test.go", rel)
			return nil
		}
		if strings.HasPrefix(rel, "examples/") {
			return nil
		}
		for _, imp := range pkg.Imports {
			if imp != mod && !strings.HasPrefix(imp, mod+"/") {
				continue
			}
			target := strings.TrimPrefix(strings.TrimPrefix(imp, mod), "/")
			if slices.Contains(allowed, target) || strings.HasPrefix(target, "internal/") && slices.Contains(allowed, "internal/") {
				continue
			}
			t.Errorf("%q imports %q: not allowed by the layering (allowed: %v)", rel, target, allowed)
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
}
