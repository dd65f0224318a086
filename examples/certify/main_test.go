package main

import (
	"bytes"
	"context"
	"encoding/json"
	"math"
	"math/big"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"github.com/segre-lab/segre/proof"
	"github.com/segre-lab/segre/subspace"
)

func runCmd(args ...string) (int, string, string) {
	var out, errb bytes.Buffer
	code := run(args, &out, &errb)
	return code, out.String(), errb.String()
}

func TestDemoJSON(t *testing.T) {
	code, out, errs := runCmd("-json", "-time", "500ms", "-starts", "4")
	if code != 0 {
		t.Fatalf("exit %d, stderr %q", code, errs)
	}
	if errs != "" {
		t.Errorf("-json should be quiet on stderr, got %q", errs)
	}
	var v map[string]any
	if err := json.Unmarshal([]byte(out), &v); err != nil {
		t.Fatalf("not one JSON object: %v", err)
	}
	for _, k := range []string{"rows", "cols", "dim", "lower", "upper", "x", "y", "status", "searchers"} {
		if _, ok := v[k]; !ok {
			t.Errorf("missing key %q", k)
		}
	}
	if v["rows"].(float64) != 4 || v["cols"].(float64) != 7 {
		t.Errorf("demo shape %v×%v, want 4×7", v["rows"], v["cols"])
	}
	lo, up := v["lower"].(float64), v["upper"].(float64)
	if !(lo >= 0 && lo <= up && up <= 1) {
		t.Errorf("interval [%v, %v] malformed", lo, up)
	}
	for _, s := range v["searchers"].([]any) {
		e := s.(map[string]any)
		for _, k := range []string{"name", "lower", "upper", "seconds"} {
			if _, ok := e[k]; !ok {
				t.Errorf("searcher entry missing %q", k)
			}
		}
	}
}

func TestFileAndText(t *testing.T) {
	dir := t.TempDir()
	p := filepath.Join(dir, "b.txt")
	// The antisymmetric 3×3 subspace: d* = √(1/2) (derived in suite.Antisymmetric).
	txt := "# antisymmetric 3x3\n3 3 3\n0 1 0 -1 0 0 0 0 0\n0 0 1 0 0 0 -1 0 0\n0 0 0 0 0 1 0 -1 0\n"
	os.WriteFile(p, []byte(txt), 0o644)
	code, out, errs := runCmd("-time", "500ms", "-starts", "2", "-quiet", p)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	if !strings.Contains(out, "numerical dimension 3") || !strings.Contains(out, "0.7071067") {
		t.Errorf("unexpected summary:\n%s", out)
	}
	np := filepath.Join(dir, "b.npy")
	f, _ := os.Create(np)
	subspace.WriteNPY(f, subspace.Basis{Count: 1, Rows: 2, Cols: 2, Data: []float64{1, 0, 0, 1}})
	f.Close()
	// One matrix I/√2: d* = √(1 − 1/2) by Eckart–Young.
	if code, out, _ := runCmd("-json", "-time", "300ms", "-starts", "2", np); code != 0 || !strings.Contains(out, "\"dim\": 1") {
		t.Errorf("npy run: exit %d, %s", code, out)
	}
}

func TestBadInputExitTwo(t *testing.T) {
	dir := t.TempDir()
	bad := filepath.Join(dir, "bad.txt")
	os.WriteFile(bad, []byte("2 2 2\n1 2 3\n"), 0o644)
	nan := filepath.Join(dir, "nan.txt")
	os.WriteFile(nan, []byte("1 1 2\nNaN 1\n"), 0o644)
	write := func(name string, b []byte) string {
		p := filepath.Join(dir, name)
		os.WriteFile(p, b, 0o644)
		return p
	}
	var npy bytes.Buffer
	subspace.WriteNPY(&npy, subspace.Basis{Count: 2, Rows: 3, Cols: 3, Data: make([]float64, 18)})
	whole := npy.Bytes()
	var good bytes.Buffer
	eye := make([]float64, 64)
	for i := 0; i < 8; i++ {
		eye[i*8+i] = 1
	}
	subspace.WriteNPY(&good, subspace.Basis{Count: 1, Rows: 8, Cols: 8, Data: eye})
	goodData := good.Bytes()
	cases := [][]string{
		{"-nosuchflag"},
		{"-time", "-1s"},
		{"-time", "soon"},
		{"-starts", "0"},
		{"-starts", "2000000"},
		{"-tol", "2"},
		{"-tol", "NaN"},
		{"-gap", "0"},
		{"-gap", "1"},
		{"-seed", "-1"},
		{"-maxbytes", "-5"},
		{"a", "b"},
		{filepath.Join(dir, "missing.npy")},
		{bad},
		{nan},
		{dir},
		{write("empty.txt", nil)},
		{write("zeros.npy", whole)}, // all-zero basis
		{write("trunc.npy", whole[:len(whole)-5])},                   // data cut short
		{write("header.npy", whole[:20])},                            // header cut short
		{write("magic.npy", append([]byte("NUMPX"), whole[6:]...))}, // wrong magic: read as text, which fails
		{write("huge.npy", npyHeader("(100000, 100000, 100000)"))},   // declared size beyond any limit
		{"-maxbytes", "100", write("big.npy", goodData)},             // the size guard, settable
		{write("inf.txt", []byte("1 1 2\n1 +Inf\n"))},
		{write("short.txt", []byte("1 2 2\n1 2 3\n"))},
		{write("shape.txt", []byte("1 0 2\n"))},
		{"-shard", "0/2"}, // no -proof
		{"-shard", "2/2", "-proof", filepath.Join(dir, "p")},
		{"-shard", "-1/2", "-proof", filepath.Join(dir, "p")},
		{"-shard", "0/0", "-proof", filepath.Join(dir, "p")},
		{"-shard", "1/2x", "-proof", filepath.Join(dir, "p")},
		{"-shard", "half", "-proof", filepath.Join(dir, "p")},
		{"-shard", "0/2", "-proof", filepath.Join(dir, "p"), "-field", "complex"},
		{"-shard", "0/2", "-proof", filepath.Join(dir, "p"), write("c.txt", []byte("1 2 2 complex\n1 1i\n0 1\n"))},
	}
	if _, err := os.Stat("/proc/self/mem"); err == nil {
		cases = append(cases, []string{"/proc/self/mem"}) // opens, but reading fails (EIO)
	}
	if os.Geteuid() != 0 { // root reads files whatever their mode
		locked := write("locked.txt", []byte("1 1 1\n1\n"))
		os.Chmod(locked, 0)
		cases = append(cases, []string{locked}) // permission denied
	}
	for _, args := range cases {
		code, out, errs := runCmd(args...)
		if code != 2 {
			t.Errorf("%v: exit %d, want 2", args, code)
		}
		if out != "" {
			t.Errorf("%v: stdout %q, want nothing", args, out)
		}
		if strings.Count(strings.TrimSpace(errs), "\n") != 0 || !strings.HasPrefix(errs, "certify: ") {
			t.Errorf("%v: stderr %q, want one line", args, errs)
		}
		t.Logf("%v: %s", args[len(args)-1], strings.TrimSpace(errs))
	}
}

// npyHeader returns a version-1 .npy header of little-endian float64 with
// the given shape and no data.
func npyHeader(shape string) []byte {
	h := "{'descr': '<f8', 'fortran_order': False, 'shape': " + shape + ", }"
	for (10+len(h)+1)%64 != 0 {
		h += " "
	}
	h += "\n"
	return append([]byte{0x93, 'N', 'U', 'M', 'P', 'Y', 1, 0, byte(len(h)), byte(len(h) >> 8)}, h...)
}

// Inputs at the ends of the exponent range give a valid JSON report (JSON
// has no NaN or Inf: a non-finite number is written as null) and a useful
// interval: diag(1e-310, 5e-324) has d* = 2^-1074/fl(1e-310) ≈ 4.94e-14
// (Eckart–Young, derived; the stored basis is exact after the exponent
// shift), so the reported Upper is within a few ulps of it.
func TestExtremeMagnitudesJSON(t *testing.T) {
	dir := t.TempDir()
	p := filepath.Join(dir, "tiny.txt")
	os.WriteFile(p, []byte("1 2 2\n1e-310 0 0 5e-324\n"), 0o644)
	code, out, errs := runCmd("-json", "-time", "300ms", "-quiet", p)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	var v map[string]any
	if err := json.Unmarshal([]byte(out), &v); err != nil {
		t.Fatalf("not JSON: %v\n%s", err, out)
	}
	tiny, small := 5e-324, 1e-310 // float64 values (2^-1074 and a subnormal), not exact constants
	want := tiny / small
	if up, ok := v["upper"].(float64); !ok || up < want*(1-1e-12) || up > want*(1+1e-9) {
		t.Errorf("upper %v, want ≈ %v", v["upper"], want)
	}
	for _, c := range []struct {
		v    number
		want string
	}{{number(math.NaN()), "null"}, {number(math.Inf(1)), "null"}, {number(math.Inf(-1)), "null"}, {number(0.5), "0.5"}} {
		if b, err := json.Marshal(c.v); err != nil || string(b) != c.want {
			t.Errorf("%v encodes as %s (%v), want %s", float64(c.v), b, err, c.want)
		}
	}
}

// printedInterval returns the two ends printed on the "distance" and
// "value" lines, as exact rationals, and the per-strategy table's ends.
func printedEnds(t *testing.T, out string) (dist, val [2]*big.Rat, table [][2]*big.Rat) {
	t.Helper()
	parse := func(s string) *big.Rat {
		r, ok := new(big.Rat).SetString(s)
		if !ok {
			t.Fatalf("unparsable number %q in\n%s", s, out)
		}
		return r
	}
	inTable := false
	for _, line := range strings.Split(out, "\n") {
		f := strings.Fields(line)
		switch {
		case strings.HasPrefix(line, "distance") || strings.HasPrefix(line, "value"):
			i := strings.Index(line, "[")
			j := strings.Index(line, "]")
			ends := strings.Split(line[i+1:j], ", ")
			pair := [2]*big.Rat{parse(ends[0]), parse(ends[1])}
			if f[0] == "distance" {
				dist = pair
			} else {
				val = pair
			}
		case len(f) > 0 && f[0] == "strategy":
			inTable = true
		case line == "":
			inTable = false // the table ends at the blank line before the notes on failed or skipped members
		case inTable && len(line) > 58:
			// Columns: name %-28s, then lower and upper %14s each (with
			// the separating spaces).
			table = append(table, [2]*big.Rat{parse(strings.TrimSpace(line[28:43])), parse(strings.TrimSpace(line[43:58]))})
		}
	}
	if dist[0] == nil || val[0] == nil || len(table) == 0 {
		t.Fatalf("no interval found in\n%s", out)
	}
	return dist, val, table
}

// Every printed certified end must hold as printed: the lower ends at or
// below d* (h* for the value line) and the upper ends at or above, checked
// exactly in rational arithmetic on squares. These two cases printed a
// false interval with %.10g (issue 11):
//   - span{I₂}: d*² = 1/2 (Eckart–Young for one matrix: h* = σ₁²/‖A‖² = 1/2,
//     common practice), so %.10g's 0.7071067812 > 1/√2 was a false lower end;
//   - span{diag(1, t)}: h* = 1/(1+t²), d*² = t²/(1+t²) (the same theorem).
func TestPrintedIntervalsHold(t *testing.T) {
	dir := t.TempDir()
	tv := 0.3
	cases := []struct {
		name string
		body string
		d2   *big.Rat // d*² exactly
	}{
		{"identity", "1 2 2\n1 0\n0 1\n", big.NewRat(1, 2)},
		{"diag", "1 2 2\n1 0\n0 " + strconv.FormatFloat(tv, 'g', -1, 64) + "\n", func() *big.Rat {
			t2 := new(big.Rat).SetFloat64(tv)
			t2.Mul(t2, t2)
			den := new(big.Rat).Add(big.NewRat(1, 1), t2)
			return t2.Quo(t2, den)
		}()},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			p := filepath.Join(dir, c.name+".txt")
			os.WriteFile(p, []byte(c.body), 0o644)
			code, out, errs := runCmd("-quiet", "-time", "1s", "-starts", "2", p)
			if code != 0 {
				t.Fatalf("exit %d: %s", code, errs)
			}
			dist, val, table := printedEnds(t, out)
			h := new(big.Rat).Sub(big.NewRat(1, 1), c.d2)
			sq := func(r *big.Rat) *big.Rat { return new(big.Rat).Mul(r, r) }
			if sq(dist[0]).Cmp(c.d2) > 0 || sq(dist[1]).Cmp(c.d2) < 0 {
				t.Errorf("printed distance interval excludes d*:\n%s", out)
			}
			if val[0].Cmp(h) > 0 || val[1].Cmp(h) < 0 {
				t.Errorf("printed value interval excludes h*:\n%s", out)
			}
			for _, e := range table {
				if sq(e[0]).Cmp(c.d2) > 0 || sq(e[1]).Cmp(c.d2) < 0 {
					t.Errorf("a strategy's printed interval [%s, %s] excludes d*:\n%s", e[0].FloatString(12), e[1].FloatString(12), out)
				}
			}
		})
	}
}

// On an ill-conditioned input (two 2×4 matrices A and A + εC, condition
// about 1e14) the stored basis spans a subspace measurably different from
// the input's span, so the interval for the stored basis may exclude the
// input span's d* (issue 11). The "input span" interval, widened by the
// proven distance θ, must contain it. Reference: the input span's d*,
// computed here from a 400-bit orthonormal basis of {A, A+εC} (Gram–Schmidt
// twice in big.Float) and, for m = 2, h(x) = λmax of the 2×2 Gram matrix of
// a_t = U_tᵀx maximised over x = (cos φ, sin φ) by a grid of 20000 angles and
// golden-section refinement (derived here: h(x, ·) is maximised by the top
// eigenvector of Σ_t a_t a_tᵀ, whose nonzero spectrum is the Gram matrix's).
func TestInputSpanInterval(t *testing.T) {
	rng := rand.New(rand.NewPCG(61, 62))
	a, c := make([]float64, 8), make([]float64, 8)
	for i := range a {
		a[i], c[i] = rng.NormFloat64(), rng.NormFloat64()
	}
	b2 := make([]float64, 8)
	for i := range b2 {
		b2[i] = a[i] + 3e-14*c[i]
	}
	var sb strings.Builder
	sb.WriteString("2 2 4\n")
	for _, v := range append(append([]float64(nil), a...), b2...) {
		sb.WriteString(strconv.FormatFloat(v, 'g', -1, 64) + "\n")
	}
	p := filepath.Join(t.TempDir(), "ill.txt")
	os.WriteFile(p, []byte(sb.String()), 0o644)
	code, out, errs := runCmd("-json", "-time", "2s", "-starts", "4", p)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	var v map[string]any
	if err := json.Unmarshal([]byte(out), &v); err != nil {
		t.Fatal(err)
	}
	il, ok1 := v["input_lower"].(float64)
	iu, ok2 := v["input_upper"].(float64)
	if !ok1 || !ok2 {
		t.Fatalf("no input-span interval: %v", v["input_note"])
	}
	ref := twoRowSpanDistance(a, b2)
	if !(il <= ref && ref <= iu) {
		t.Errorf("input-span interval [%v, %v] excludes the input span's d* = %v", il, iu, ref)
	}
	t.Logf("stored basis [%v, %v], input span [%v, %v], θ = %v, input span's d* = %v",
		v["lower"], v["upper"], il, iu, v["input_distance"], ref)
}

// twoRowSpanDistance returns d* of span{A, B} for 2×4 matrices A and B
// (row-major), as described in TestInputSpanInterval.
func twoRowSpanDistance(a, b []float64) float64 {
	const prec = 400
	toBig := func(x []float64) []*big.Float {
		v := make([]*big.Float, len(x))
		for i, e := range x {
			v[i] = new(big.Float).SetPrec(prec).SetFloat64(e)
		}
		return v
	}
	dot := func(x, y []*big.Float) *big.Float {
		s := new(big.Float).SetPrec(prec)
		for i := range x {
			s.Add(s, new(big.Float).SetPrec(prec).Mul(x[i], y[i]))
		}
		return s
	}
	var basis [][]float64
	var done [][]*big.Float
	for _, r := range [][]float64{a, b} {
		v := toBig(r)
		for pass := 0; pass < 2; pass++ {
			for _, q := range done {
				d := dot(q, v)
				for i := range v {
					v[i].Sub(v[i], new(big.Float).SetPrec(prec).Mul(d, q[i]))
				}
			}
		}
		nrm := new(big.Float).SetPrec(prec).Sqrt(dot(v, v))
		f := make([]float64, len(v))
		for i := range v {
			v[i].Quo(v[i], nrm)
			f[i], _ = v[i].Float64()
		}
		done = append(done, v)
		basis = append(basis, f)
	}
	h := func(phi float64) float64 {
		x := [2]float64{math.Cos(phi), math.Sin(phi)}
		var at [2][4]float64
		for t := 0; t < 2; t++ {
			for j := 0; j < 4; j++ {
				at[t][j] = x[0]*basis[t][j] + x[1]*basis[t][4+j]
			}
		}
		var p, q, r float64
		for j := 0; j < 4; j++ {
			p += at[0][j] * at[0][j]
			q += at[1][j] * at[1][j]
			r += at[0][j] * at[1][j]
		}
		return (p+q)/2 + math.Sqrt((p-q)*(p-q)/4+r*r)
	}
	const grid = 20000
	best, bestPhi := -1.0, 0.0
	for i := 0; i < grid; i++ {
		phi := math.Pi * float64(i) / grid
		if v := h(phi); v > best {
			best, bestPhi = v, phi
		}
	}
	lo, hi := bestPhi-math.Pi/grid, bestPhi+math.Pi/grid
	g := (math.Sqrt(5) - 1) / 2
	for it := 0; it < 100; it++ {
		m1, m2 := hi-g*(hi-lo), lo+g*(hi-lo)
		if h(m1) > h(m2) {
			hi = m2
		} else {
			lo = m1
		}
	}
	return math.Sqrt(1 - h((lo+hi)/2))
}

// Complex input end to end: span{I, J} over C contains the rank-one
// (I − iJ)/2 (d* = 0, derived in suite.PencilIJ), over R it does not
// (d* = 1/√2); the field comes from the data or -field; JSON gives the
// witness as [re, im] pairs; -dims reads r vectors of length m·n; bad
// combinations exit 2.
func TestComplexCommand(t *testing.T) {
	dir := t.TempDir()
	cfile := filepath.Join(dir, "ij.txt")
	os.WriteFile(cfile, []byte("2 2 2 complex\n1 0\n0 1\n0 -1\n1 0\n"), 0o644)
	rfile := filepath.Join(dir, "ijr.txt")
	os.WriteFile(rfile, []byte("2 2 2\n1 0\n0 1\n0 -1\n1 0\n"), 0o644)
	for _, c := range []struct {
		args    []string
		complex bool
		zero    bool
	}{
		{[]string{cfile}, true, true},
		{[]string{"-field", "complex", rfile}, true, true},
		{[]string{rfile}, false, false},
	} {
		code, out, errs := runCmd(append([]string{"-json", "-time", "2s"}, c.args...)...)
		if code != 0 {
			t.Fatalf("%v: exit %d: %s", c.args, code, errs)
		}
		var v map[string]any
		if err := json.Unmarshal([]byte(out), &v); err != nil {
			t.Fatal(err)
		}
		if (v["field"] == "complex") != c.complex {
			t.Errorf("%v: field %v", c.args, v["field"])
		}
		up, lo := v["upper"].(float64), v["lower"].(float64)
		if c.zero && up > 1e-12 || !c.zero && lo < 0.7071 {
			t.Errorf("%v: [%v, %v]", c.args, lo, up)
		}
		x := v["x"].([]any)
		if _, pair := x[0].([]any); pair != c.complex {
			t.Errorf("%v: witness entries as pairs: %v", c.args, pair)
		}
	}
	// -dims: two state vectors of length 4 = 2·2 as one 2×4 array.
	vfile := filepath.Join(dir, "states.txt")
	os.WriteFile(vfile, []byte("1 2 4 complex\n1 0 0 1\n0 -1 1 0\n"), 0o644)
	if code, out, errs := runCmd("-json", "-dims", "2,2", vfile); code != 0 || !strings.Contains(out, `"field": "complex"`) {
		t.Errorf("-dims: exit %d %s %s", code, out, errs)
	}
	for _, args := range [][]string{{"-field", "real", cfile}, {"-field", "quaternion", rfile}, {"-dims", "3,3", vfile}, {"-dims", "2", vfile}, {"-dims", "2,2"}} {
		if code, out, errs := runCmd(args...); code != 2 || out != "" || strings.Count(strings.TrimSpace(errs), "\n") != 0 {
			t.Errorf("%v: exit %d, stdout %q, stderr %q; want 2 and one line", args, code, out, errs)
		}
	}
}

// -proof writes a readable proof file atomically (no temporary file left),
// and a complex input, for which proofs are not supported yet, is said so
// with exit 1 and no proof written.
func TestProofFlag(t *testing.T) {
	dir := t.TempDir()
	p := filepath.Join(dir, "b.txt")
	os.WriteFile(p, []byte("2 2 3\n1 0 0 0 2 0\n0 1 0 3 0 1\n"), 0o644)
	pf := filepath.Join(dir, "b.proof")
	if code, _, errs := runCmd("-quiet", "-proof", pf, p); code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	f, err := os.Open(pf)
	if err != nil {
		t.Fatal(err)
	}
	st, _ := f.Stat()
	if _, err := proof.Read(f, st.Size()); err != nil {
		t.Errorf("proof not readable: %v", err)
	}
	f.Close()
	entries, _ := os.ReadDir(dir)
	if len(entries) != 2 {
		t.Errorf("files left: %v", entries)
	}
	c := filepath.Join(dir, "c.txt")
	os.WriteFile(c, []byte("1 2 2 complex\n1 1i\n0 1\n"), 0o644)
	// Complex subspaces have proofs too (about the complex distance).
	if code, _, errs := runCmd("-quiet", "-proof", filepath.Join(dir, "c.proof"), c); code != 0 && code != 3 {
		t.Errorf("complex proof: exit %d, %s", code, errs)
	}
	if p, err := proof.ReadFile(filepath.Join(dir, "c.proof")); err != nil || p.File.Field != "complex" {
		t.Errorf("complex proof file: %v", err)
	}
}

// certify -shard i/N writes part proofs that merge into a proof of the whole
// interval which re-checks with the input file (proof.Merge and proof.Check,
// what recheck merge and recheck -proof run; the recheck command's own
// round trip is in its tests); the text and JSON reports name the part; a
// part whose budget runs out exits 3 and still writes a part proof, which
// checks. Nothing but the proofs is left in the folder.
func TestShardFlag(t *testing.T) {
	dir := t.TempDir()
	rng := rand.New(rand.NewPCG(4, 5))
	var b strings.Builder
	b.WriteString("9 3 6\n")
	for i := 0; i < 9*3*6; i++ {
		b.WriteString(strconv.FormatFloat(rng.NormFloat64(), 'g', -1, 64) + " ")
	}
	basis := filepath.Join(dir, "b.txt")
	os.WriteFile(basis, []byte(b.String()), 0o644)
	var parts []*proof.Proof
	var names []string
	for i := 0; i < 3; i++ {
		name := filepath.Join(dir, "part-"+strconv.Itoa(i))
		args := []string{"-quiet", "-shard", strconv.Itoa(i) + "/3", "-proof", name, basis}
		if i == 2 {
			args = append(args, "-json")
		}
		code, out, errs := runCmd(args...)
		if code != 0 {
			t.Fatalf("part %d: exit %d, %s", i, code, errs)
		}
		if i < 2 && !strings.Contains(out, "part       "+strconv.Itoa(i)+" of 3") {
			t.Errorf("part %d: report %q", i, out)
		}
		if i == 2 {
			var v map[string]any
			if err := json.Unmarshal([]byte(out), &v); err != nil || v["part"] != 2.0 || v["parts"] != 3.0 || v["part_lower"] == nil {
				t.Errorf("part 2: JSON %q (%v)", out, err)
			}
		}
		p, err := proof.ReadFile(name)
		if err != nil {
			t.Fatal(err)
		}
		parts, names = append(parts, p), append(names, name)
	}
	whole, err := proof.Merge(context.Background(), parts, names)
	if err != nil {
		t.Fatal(err)
	}
	data, _ := os.ReadFile(basis)
	in, err := subspace.ParseInput(data, 0)
	if err != nil {
		t.Fatal(err)
	}
	c, err := proof.Check(context.Background(), whole, &in.Real, data)
	if err != nil || !c.HashChecked || !(c.Lower > 0) {
		t.Errorf("merged proof: %+v, %v", c, err)
	}
	// A part out of time: exit 3, a valid part proof all the same.
	late := filepath.Join(dir, "late")
	if code, _, errs := runCmd("-quiet", "-shard", "1/3", "-proof", late, "-time", "1ns", "-gap", "1e-12", basis); code != 3 {
		t.Errorf("part out of time: exit %d, %s", code, errs)
	}
	if p, err := proof.ReadFile(late); err != nil {
		t.Errorf("part out of time: %v", err)
	} else if _, err := proof.Check(context.Background(), p, &in.Real, data); err != nil {
		t.Errorf("part out of time: %v", err)
	}
	entries, _ := os.ReadDir(dir)
	if len(entries) != 5 {
		t.Errorf("files left: %v", entries)
	}
}
