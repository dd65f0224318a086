package main

import (
	"bytes"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"gonum.org/v1/gonum/mat"

	"github.com/segre-lab/segre/rankone/cpd"
	"github.com/segre-lab/segre/subspace"
)

// Without FILE the invented demo runs, exact and noisy.
func TestDemo(t *testing.T) {
	for _, args := range [][]string{nil, {"-noise", "0"}, {"-noise", "1e-3", "-seed", "2"}} {
		var out, errb bytes.Buffer
		if code := run(args, &out, &errb); code != 0 || errb.Len() != 0 {
			t.Fatalf("%v: exit %d: %s", args, code, errb.String())
		}
		for _, want := range []string{"demo ", "Kruskal's condition holds", "cos(notes)"} {
			if !strings.Contains(out.String(), want) {
				t.Errorf("%v: output lacks %q:\n%s", args, want, out.String())
			}
		}
	}
}

// -h prints the usage with every flag on stderr, nothing on stdout, exit 0.
func TestHelp(t *testing.T) {
	for _, args := range [][]string{{"-h"}, {"-help"}, {"some.npy", "-h"}} {
		var out, errb bytes.Buffer
		if code := run(args, &out, &errb); code != 0 || out.Len() != 0 {
			t.Errorf("%v: exit %d, stdout %q; want 0 and nothing", args, code, out.String())
		}
		for _, want := range []string{"usage: unmix", "FILE", "(p, m, n)", "Exit status", "-rank", "-seed", "-maxiter", "-maxbytes", "-noise"} {
			if !strings.Contains(errb.String(), want) {
				t.Errorf("%v: usage lacks %q:\n%s", args, want, errb.String())
			}
		}
	}
}

// planted returns Gaussian factors A (4×2), B (3×2), C (5×2) from a seeded
// generator and T = Σ_s a_s⊗b_s⊗c_s.
func planted(seed uint64) (a, b, c *mat.Dense, t cpd.Tensor) {
	rng := rand.New(rand.NewPCG(seed, 99))
	a, b, c = mat.NewDense(4, 2, nil), mat.NewDense(3, 2, nil), mat.NewDense(5, 2, nil)
	for _, f := range []*mat.Dense{a, b, c} {
		raw := f.RawMatrix().Data
		for i := range raw {
			raw[i] = rng.NormFloat64()
		}
	}
	return a, b, c, cpd.Compose(a, b, c)
}

// slices writes t as the file layout: slice k (entry (i, j) = T[i][j][k])
// at Data[(k·m + i)·n + j]. Written here independently of tensorOf.
func slices(t cpd.Tensor) subspace.Basis {
	b := subspace.Basis{Count: t.P, Rows: t.M, Cols: t.N, Data: make([]float64, len(t.Data))}
	for i := 0; i < t.M; i++ {
		for j := 0; j < t.N; j++ {
			for k := 0; k < t.P; k++ {
				b.Data[(k*t.M+i)*t.N+j] = t.Data[(i*t.N+j)*t.P+k]
			}
		}
	}
	return b
}

// tensorOf inverts the file layout exactly (a permutation of entries).
func TestTensorOf(t *testing.T) {
	_, _, _, want := planted(1)
	got := tensorOf(slices(want))
	if got.M != want.M || got.N != want.N || got.P != want.P {
		t.Fatalf("shape %d×%d×%d, want %d×%d×%d", got.M, got.N, got.P, want.M, want.N, want.P)
	}
	for i := range want.Data {
		if got.Data[i] != want.Data[i] {
			t.Fatalf("entry %d is %v, want %v", i, got.Data[i], want.Data[i])
		}
	}
}

func writeFile(t *testing.T, path string, write func(*os.File) error) {
	t.Helper()
	f, err := os.Create(path)
	if err != nil {
		t.Fatal(err)
	}
	if err := write(f); err != nil {
		t.Fatal(err)
	}
	if err := f.Close(); err != nil {
		t.Fatal(err)
	}
}

// parsed is what the tests read back from the printed decomposition.
type parsed struct {
	relError float64
	weights  []float64
	vectors  map[string][][]float64 // "a", "b", "c": one per term, in order
}

func parseOutput(t *testing.T, out string) parsed {
	t.Helper()
	p := parsed{relError: math.NaN(), vectors: map[string][][]float64{}}
	for _, line := range strings.Split(out, "\n") {
		f := strings.Fields(line)
		switch {
		case len(f) >= 4 && f[0] == "fit" && f[1] == "relative" && f[2] == "error":
			p.relError, _ = strconv.ParseFloat(f[3], 64)
		case len(f) >= 4 && f[0] == "term" && f[2] == "weight":
			w, _ := strconv.ParseFloat(strings.TrimSuffix(f[3], ","), 64)
			p.weights = append(p.weights, w)
		case len(f) >= 2 && (f[0] == "a" || f[0] == "b" || f[0] == "c"):
			var v []float64
			for _, s := range f[1:] {
				x, err := strconv.ParseFloat(s, 64)
				if err != nil {
					t.Fatalf("bad number %q in %q", s, line)
				}
				v = append(v, x)
			}
			p.vectors[f[0]] = append(p.vectors[f[0]], v)
		}
	}
	return p
}

// unmix FILE decomposes the user's array: a planted rank-2 4×3×5 array,
// written as .npy of shape (5, 4, 3) and as plain text, with the rank taken
// from the slice span (exact data).
//
// Expected values, derived here. The data are exact, so the fit error comes
// only from rounding in the algebraic step (orthonormalisation, a small
// eigenproblem, least squares for C), all backward stable: relative error of
// order κ·u with u = 2^-53 ≈ 1.1e-16 and κ the conditioning of the factors,
// checked below to be under 100 for these Gaussian factors. The tolerance
// 1e-10 ≈ 1e4·κ·u leaves room for the size-dependent constants of those
// steps (a few hundred at most for these sizes). The printed unit factors
// must match the planted columns normalised (up to sign and order): each is
// printed with 6 decimals, an error of at most 5e-7 per entry, so at most
// √5·5e-7 ≈ 1.2e-6 in norm and |cos| ≥ 1 − 1e-5 is a safe bound; the
// weights w_s = ‖a_s‖‖b_s‖‖c_s‖ (6 significant digits) within 1e-5
// relative.
func TestPlantedFile(t *testing.T) {
	a, b, c, tens := planted(5)
	for name, f := range map[string]*mat.Dense{"A": a, "B": b, "C": c} {
		if k := mat.Cond(f, 2); k > 100 {
			t.Fatalf("planted factor %s has condition number %.3g: the tolerance below assumes < 100", name, k)
		}
	}
	dir := t.TempDir()
	npy := filepath.Join(dir, "planted.npy")
	txt := filepath.Join(dir, "planted.txt")
	writeFile(t, npy, func(f *os.File) error { return subspace.WriteNPY(f, slices(tens)) })
	writeFile(t, txt, func(f *os.File) error { return subspace.WriteText(f, slices(tens)) })
	before, _ := os.ReadFile(npy)
	for _, args := range [][]string{{npy}, {txt, "-seed", "3"}, {"-rank", "2", npy}} {
		var out, errb bytes.Buffer
		if code := run(args, &out, &errb); code != 0 || errb.Len() != 0 {
			t.Fatalf("%v: exit %d: %s", args, code, errb.String())
		}
		p := parseOutput(t, out.String())
		if !(p.relError <= 1e-10) {
			t.Errorf("%v: relative fit error %v, want ≤ 1e-10\n%s", args, p.relError, out.String())
		}
		if len(p.weights) != 2 || len(p.vectors["a"]) != 2 || len(p.vectors["b"]) != 2 || len(p.vectors["c"]) != 2 {
			t.Fatalf("%v: want two terms with a, b and c:\n%s", args, out.String())
		}
		for s := 0; s < 2; s++ {
			pa, pb, pc := mat.Col(nil, s, a), mat.Col(nil, s, b), mat.Col(nil, s, c)
			w := mat.Norm(a.ColView(s), 2) * mat.Norm(b.ColView(s), 2) * mat.Norm(c.ColView(s), 2)
			// The printed term matching planted term s: the one whose a
			// is most nearly parallel.
			best, bi := -1.0, -1
			for u, va := range p.vectors["a"] {
				if cs := absCos(pa, va); cs > best {
					best, bi = cs, u
				}
			}
			for name, pair := range map[string][2][]float64{"a": {pa, p.vectors["a"][bi]}, "b": {pb, p.vectors["b"][bi]}, "c": {pc, p.vectors["c"][bi]}} {
				if cs := absCos(pair[0], pair[1]); !(cs >= 1-1e-5) {
					t.Errorf("%v: term %d, %s: |cos| = %v with the planted factor, want ≥ 1 − 1e-5", args, s, name, cs)
				}
			}
			if got := p.weights[bi]; !(math.Abs(got-w) <= 1e-5*w) {
				t.Errorf("%v: term %d: weight %v, want %v", args, s, got, w)
			}
		}
	}
	if after, _ := os.ReadFile(npy); !bytes.Equal(before, after) {
		t.Error("the input file was changed")
	}
}

func absCos(x, y []float64) float64 {
	if len(x) != len(y) {
		return math.NaN()
	}
	var xy, xx, yy float64
	for i := range x {
		xy += x[i] * y[i]
		xx += x[i] * x[i]
		yy += y[i] * y[i]
	}
	return math.Abs(xy) / math.Sqrt(xx*yy)
}

// A refinement stopped by -maxiter says so. With noisy data and a given
// rank the algebraic fit errs by far more than 1e-12, so the refinement
// runs; its first iteration compares with an infinite previous error and
// cannot stop on its own (cpd's als), so -maxiter 1 is always reached.
// Without the cap it converges on these data (measured: 17 iterations).
func TestIterationCap(t *testing.T) {
	_, _, _, tens := planted(5)
	rng := rand.New(rand.NewPCG(8, 8))
	for i := range tens.Data {
		tens.Data[i] += 1e-3 * rng.NormFloat64()
	}
	file := filepath.Join(t.TempDir(), "noisy.npy")
	writeFile(t, file, func(f *os.File) error { return subspace.WriteNPY(f, slices(tens)) })
	var out, errb bytes.Buffer
	if code := run([]string{"-rank", "2", "-maxiter", "1", file}, &out, &errb); code != 0 {
		t.Fatalf("exit %d: %s", code, errb.String())
	}
	if !strings.Contains(out.String(), "STOPPED AT THE ITERATION CAP") {
		t.Errorf("a capped refinement is not reported:\n%s", out.String())
	}
	out.Reset()
	if code := run([]string{"-rank", "2", file}, &out, &errb); code != 0 {
		t.Fatalf("exit %d: %s", code, errb.String())
	}
	if !strings.Contains(out.String(), "refinement  converged after") {
		t.Errorf("a converged refinement is not reported as such:\n%s", out.String())
	}
	// Noisy data without -rank: no decomposition (exit 1), one line with
	// the hint to give the rank.
	out.Reset()
	errb.Reset()
	code := run([]string{file}, &out, &errb)
	if msg := errb.String(); code != 1 || out.Len() != 0 || strings.Count(strings.TrimSpace(msg), "\n") != 0 ||
		!strings.HasPrefix(msg, "unmix: ") || !strings.Contains(msg, "-rank") {
		t.Errorf("noisy data without -rank: exit %d, stdout %q, stderr %q", code, out.String(), msg)
	}
}

// Bad flags and bad files: exit 2, one line on stderr starting with
// "unmix: ", nothing on stdout.
func TestBadInput(t *testing.T) {
	dir := t.TempDir()
	_, _, _, tens := planted(5)
	good := filepath.Join(dir, "good.npy")
	writeFile(t, good, func(f *os.File) error { return subspace.WriteNPY(f, slices(tens)) })
	raw, _ := os.ReadFile(good)
	files := map[string]string{
		"trunc.npy":  string(raw[:len(raw)-7]),
		"header.txt": "2 3\n",
		"short.txt":  "2 2 2\n1 2 3 4 5 6 7\n",
		"nan.txt":    "1 2 2\n1 nan 3 4\n",
		"zero.txt":   "2 1 2\n0 0 0 0\n",
		"words.txt":  "three by four\n",
		"empty.txt":  "",
	}
	cases := [][]string{
		{"-nosuchflag"},
		{"-rank", "-1"},
		{"-rank", "two"},
		{"-maxiter", "0"},
		{"-noise", "2"},
		{"-maxbytes", "-5", good},
		{"-maxbytes", "1000"},
		{"-noise", "0.1", good},
		{"-rank", "4", good}, // min(m, n, p) = min(4, 3, 5) = 3
		{"-rank", "8"},       // the demo's min(9, 7, 12) = 7
		{good, good},
		{filepath.Join(dir, "missing.npy")},
		{dir},
		{"-maxbytes", "100", good},
	}
	for name, content := range files {
		p := filepath.Join(dir, name)
		if err := os.WriteFile(p, []byte(content), 0o644); err != nil {
			t.Fatal(err)
		}
		cases = append(cases, []string{p})
	}
	for _, args := range cases {
		var out, errb bytes.Buffer
		code := run(args, &out, &errb)
		msg := errb.String()
		if code != 2 || out.Len() != 0 || strings.Count(strings.TrimSpace(msg), "\n") != 0 || !strings.HasPrefix(msg, "unmix: ") {
			t.Errorf("%v: exit %d, stdout %q, stderr %q; want 2, nothing, one line", args, code, out.String(), msg)
		}
	}
}
