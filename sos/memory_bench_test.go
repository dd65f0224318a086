package sos

import (
	"context"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"syscall"
	"testing"

	"github.com/segre-lab/segre/internal/sdp"
	"github.com/segre-lab/segre/rankone/suite"
	"github.com/segre-lab/segre/subspace"
)

// memChildEnv names the environment variable that makes
// TestLevelOneMemoryChild solve one level-one relaxation (of the size it
// holds) and exit: BenchmarkLevelOneMemory runs it as a process of its own
// so that its peak resident memory is measured alone.
const memChildEnv = "SEGRE_SOS_MEMORY_CHILD"

// levelOneGaussian is the benchmark instance of BenchmarkLevelOne: a
// Gaussian n×n subspace of dimension n²/2.
func levelOneGaussian(n int) (*Relaxation, error) {
	w, err := subspace.New(context.Background(), suite.Random(n, n, n*n/2, 1).Basis, subspace.Options{})
	if err != nil {
		return nil, err
	}
	return LevelOne(w)
}

// TestLevelOneMemoryChild is BenchmarkLevelOneMemory's child process; it
// does nothing unless memChildEnv is set.
func TestLevelOneMemoryChild(t *testing.T) {
	v := os.Getenv(memChildEnv)
	if v == "" {
		t.Skip("run by BenchmarkLevelOneMemory only")
	}
	n, err := strconv.Atoi(v)
	if err != nil {
		t.Fatal(err)
	}
	rel, err := levelOneGaussian(n)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := sdp.Solve(context.Background(), rel.Problem, sdp.Settings{}); err != nil {
		t.Fatal(err)
	}
}

// BenchmarkLevelOneMemory reports the peak resident memory (the kernel's
// maxrss of each process, in MB) of our level-one solve and of CSDP on the
// file our WriteSDPA exported, for BenchmarkLevelOne's instances at
// m = n = 8 and 10 (issue 16: the solver's peak memory beside CSDP's). Ours
// runs in a process of its own (this test binary, TestLevelOneMemoryChild),
// so the figure includes the Go runtime and building the relaxation (a few
// MB); both run on one thread.
func BenchmarkLevelOneMemory(b *testing.B) {
	bin, err := exec.LookPath("csdp")
	if err != nil {
		b.Skip("csdp not installed")
	}
	self, err := os.Executable()
	if err != nil {
		b.Fatal(err)
	}
	maxrss := func(cmd *exec.Cmd) float64 {
		if out, err := cmd.CombinedOutput(); err != nil {
			b.Fatalf("%v: %v\n%s", cmd.Args, err, out)
		}
		ru, ok := cmd.ProcessState.SysUsage().(*syscall.Rusage)
		if !ok {
			b.Skip("no resource usage on this system")
		}
		return float64(ru.Maxrss) / 1024 // Linux reports KB
	}
	for _, n := range []int{8, 10} {
		rel, err := levelOneGaussian(n)
		if err != nil {
			b.Fatal(err)
		}
		path := filepath.Join(b.TempDir(), "p.dat-s")
		f, err := os.Create(path)
		if err != nil {
			b.Fatal(err)
		}
		if err := rel.WriteSDPA(f); err != nil {
			b.Fatal(err)
		}
		f.Close()
		b.Run(fmt.Sprintf("n%d", n), func(b *testing.B) {
			var ours, theirs float64
			for b.Loop() {
				cmd := exec.Command(self, "-test.run=^TestLevelOneMemoryChild$", "-test.count=1")
				cmd.Env = append(os.Environ(), memChildEnv+"="+strconv.Itoa(n), "GOMAXPROCS=1")
				ours = maxrss(cmd)
				cmd = exec.Command(bin, path)
				cmd.Env = append(os.Environ(), "OMP_NUM_THREADS=1")
				theirs = maxrss(cmd)
			}
			b.ReportMetric(ours, "ours-MB")
			b.ReportMetric(theirs, "csdp-MB")
			b.ReportMetric(ours/theirs, "ratio")
		})
	}
}
