package sos

import (
	"bytes"
	"context"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strconv"
	"testing"

	"github.com/segre-lab/segre/internal/sdp"
	"github.com/segre-lab/segre/rankone/suite"
)

// csdpObjective solves an SDPA file with CSDP (Debian package coinor-csdp,
// a general-purpose reference solver) and returns its primal objective.
func csdpObjective(t *testing.T, path string) float64 {
	t.Helper()
	bin, err := exec.LookPath("csdp")
	if err != nil {
		if os.Getenv("CI") != "" {
			t.Fatal("csdp not found: .ci/run must install coinor-csdp")
		}
		t.Skip("csdp not installed (apt-get install coinor-csdp); CI installs it")
	}
	out, _ := exec.Command(bin, path).CombinedOutput() // exit codes 1–4 are warnings
	m := regexp.MustCompile(`Primal objective value:\s*([-+0-9.eE]+)`).FindSubmatch(out)
	if m == nil {
		t.Fatalf("csdp output not understood:\n%s", out)
	}
	v, err := strconv.ParseFloat(string(m[1]), 64)
	if err != nil {
		t.Fatal(err)
	}
	return v
}

// The exported relaxations, solved by CSDP, agree with our solver, and the
// SDPA file is the problem we solve.
func TestAgainstCSDP(t *testing.T) {
	dir := t.TempDir()
	for i, in := range []suite.Instance{suite.Random(3, 3, 4, 1), suite.Random(3, 4, 6, 2), suite.Antisymmetric(3), suite.Random(4, 4, 8, 3)} {
		w := mustNew(t, in)
		rel, err := LevelOne(w)
		if err != nil {
			t.Fatal(err)
		}
		var buf bytes.Buffer
		if err := rel.WriteSDPA(&buf); err != nil {
			t.Fatal(err)
		}
		path := filepath.Join(dir, "p"+strconv.Itoa(i)+".dat-s")
		os.WriteFile(path, buf.Bytes(), 0o644)
		ref := csdpObjective(t, path)
		sol, err := sdp.Solve(context.Background(), rel.Problem, sdp.Settings{})
		if err != nil {
			t.Fatal(err)
		}
		// Both solvers stop near 1e-8 relative accuracy (CSDP's default
		// tolerances are 1e-8, common practice).
		if math.Abs(sol.Primal-ref) > 1e-6*(1+math.Abs(ref)) {
			t.Errorf("%s: ours %.12f, CSDP %.12f", in.Name, sol.Primal, ref)
		}
	}
}
