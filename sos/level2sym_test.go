package sos

import (
	"context"
	"math"
	"testing"

	"github.com/segre-lab/segre/internal/sdp"
	"github.com/segre-lab/segre/rankone"
	"github.com/segre-lab/segre/rankone/suite"
)

// entryForm is the level-two SDP in the form LevelTwo solved before the
// moment form (level2sdp.go): one block of order dim, constraint 0 is
// ⟨D, ρ⟩ = 1 and every other says ρ_u = ρ_r for an entry u and the first
// entry r of its orbit. It is the reference the moment form is tested
// against: the same relaxation, written without the orbit variables and
// without the sign symmetries.
func entryForm(e *extension) (sdp.Problem, [][2]int) {
	dim := e.dim
	p := sdp.Problem{Blocks: []int{dim}}
	for a := 0; a < dim; a++ {
		for b := a; b < dim; b++ {
			if v := e.chat[a*dim+b]; v != 0 {
				p.C = append(p.C, sdp.Entry{I: a, J: b, V: v})
			}
		}
	}
	d := make([]sdp.Entry, dim)
	for a := 0; a < dim; a++ {
		d[a] = sdp.Entry{I: a, J: a, V: e.dval(a)}
	}
	p.A = append(p.A, d)
	p.B = append(p.B, 1)
	pairs := [][2]int{{0, 0}}
	first := make([]int, e.norbits)
	for i := range first {
		first[i] = -1
	}
	half := func(a, b int) float64 {
		if a == b {
			return 1
		}
		return 0.5
	}
	for a := 0; a < dim; a++ {
		for b := a; b < dim; b++ {
			o := e.orbit[a*dim+b]
			if first[o] < 0 {
				first[o] = a*dim + b
				continue
			}
			r := first[o]
			ra, rb := r/dim, r%dim
			p.A = append(p.A, []sdp.Entry{{I: a, J: b, V: half(a, b)}, {I: ra, J: rb, V: -half(ra, rb)}})
			p.B = append(p.B, 0)
			pairs = append(pairs, [2]int{a*dim + b, r})
		}
	}
	return p, pairs
}

// entryFormBound solves the entry form and proves its bound as LevelTwo
// did: K = −Σ_{j≥1} y_j A_j (exactly zero orbit sums up to rounding),
// t = the dual objective.
func entryFormBound(t *testing.T, e *extension) float64 {
	t.Helper()
	p, pairs := entryForm(e)
	sol, err := sdp.Solve(context.Background(), p, sdp.Settings{})
	if err != nil || sol.Status != sdp.Optimal {
		t.Fatalf("entry form: %v, status %v", err, sol.Status)
	}
	dim := e.dim
	k := make([]float64, dim*dim)
	for j := 1; j < len(pairs); j++ {
		u, r := pairs[j][0], pairs[j][1]
		for _, q := range []struct {
			idx  int
			sign float64
		}{{u, -1}, {r, 1}} {
			a, b := q.idx/dim, q.idx%dim
			v := q.sign * sol.Y[j]
			if a != b {
				v /= 2
			}
			k[a*dim+b] += v
			if a != b {
				k[b*dim+a] += v
			}
		}
	}
	tt := float64(sol.Dual*(1+1e-12)) + 1e-15
	return e.bound(tt, k, nil)
}

// The moment form, block diagonal under the sign symmetries, proves the
// bound of the entry form (the same relaxation: derived on momentForm and
// signGroup) to 1e-6: both are certified upper bounds on h* within the
// interior-point method's tolerance 1e-9 (relative) of the relaxation's
// value, plus their rounding slack. The instances: Gaussian 2×2 (k = 1),
// 2×3 and 3×2 (k = 2) and 3×3 (k = 4), dimensions at which a generic W
// holds no rank-one matrix (the rank-one matrices of m×n form a variety of
// codimension (m−1)(n−1), derived here: a generic subspace of smaller
// dimension misses it), so d* > 0 and a certificate is kept; the UPB complement 3×3 (Bennett et al. 1999), where level one
// proves nothing and level two does; the UPB complement embedded in 4×3
// and the antisymmetric matrices, where the sign group splits the moment
// matrix (checked: more than one block).
func TestLevelTwoMomentFormAgainstEntryForm(t *testing.T) {
	ctx := context.Background()
	cases := []struct {
		in    suite.Instance
		split bool
	}{
		{suite.Random(2, 2, 1, 1), false}, {suite.Random(2, 3, 2, 2), false}, {suite.Random(3, 2, 2, 3), false},
		{suite.Random(3, 3, 4, 1), false}, {suite.UPBComplement(), false},
		{suite.Embed(suite.UPBComplement(), 4, 3), true}, {suite.Antisymmetric(3), true},
	}
	for _, c := range cases {
		t.Run(c.in.Name, func(t *testing.T) {
			w := mustNew(t, c.in)
			e, err := newExtension(w, 400)
			if err != nil {
				t.Fatal(err)
			}
			f := newMomentForm(e, signGroup(e.ph, w.Rows(), w.Cols()))
			if got := len(f.rows) > 1; got != c.split {
				t.Errorf("%d blocks, split expected %v", len(f.rows), c.split)
			}
			want := entryFormBound(t, e)
			var keep LevelTwoCertificate
			r, err := (&LevelTwo{Keep: &keep}).Search(ctx, w)
			if err != nil {
				t.Fatal(err)
			}
			got, err := VerifyLevelTwo(w, keep)
			if err != nil {
				t.Fatalf("kept certificate: %v", err)
			}
			if math.Abs(got-math.Min(want, 1)) > 1e-6 {
				t.Errorf("moment form %.10f, entry form %.10f", got, want)
			}
			if r.Lower > r.Upper {
				t.Errorf("Lower %v > Upper %v", r.Lower, r.Upper)
			}
			t.Logf("%d blocks (largest %d of %d), %d variables; bound %.10f vs %.10f", len(f.rows), maxLen(f.rows), e.dim, len(f.kept)-1, got, want)
		})
	}
}

func maxLen(rs [][]int) int {
	m := 0
	for _, r := range rs {
		m = max(m, len(r))
	}
	return m
}

// signGroup finds exactly the sign symmetries of P̂: by exhaustion over
// all 2^(m+n) sign patterns on small instances, a pattern leaves P̂
// unchanged (checked entry by entry, derived on signGroup) if and only if
// it lies in the span of the returned basis, and the basis is
// independent (the group has 2^len elements).
func TestSignGroupExhaustive(t *testing.T) {
	for _, in := range []suite.Instance{suite.Random(3, 3, 4, 1), suite.Embed(suite.UPBComplement(), 4, 3),
		suite.Antisymmetric(3), suite.OneMatrix(3, 4, 2), suite.Embed(suite.Random(2, 2, 2, 5), 3, 4)} {
		t.Run(in.Name, func(t *testing.T) {
			w := mustNew(t, in)
			m, n := w.Rows(), w.Cols()
			p, _ := ProjectorBound(w)
			basis := signGroup(p, m, n)
			L := m * n
			invariant := func(g uint64) bool {
				sign := func(k int) float64 {
					if g>>k&1 == 1 {
						return -1
					}
					return 1
				}
				for a := 0; a < L; a++ {
					for b := 0; b < L; b++ {
						s := sign(a/n) * sign(b/n) * sign(m+a%n) * sign(m+b%n)
						if v := p.At(a, b); v != 0 && s < 0 {
							return false
						}
					}
				}
				return true
			}
			// The span of the basis (bits as uint64: m+n ≤ 64 here).
			span := map[uint64]bool{0: true}
			for _, v := range basis {
				g := v[0]
				next := map[uint64]bool{}
				for x := range span {
					next[x], next[x^g] = true, true
				}
				span = next
			}
			if len(span) != 1<<len(basis) {
				t.Fatalf("basis of %d elements spans %d patterns: not independent", len(basis), len(span))
			}
			count := 0
			for g := uint64(0); g < 1<<(m+n); g++ {
				inv := invariant(g)
				if inv {
					count++
				}
				if inv != span[g] {
					t.Fatalf("pattern %b: invariant %v, in the span %v", g, inv, span[g])
				}
			}
			t.Logf("%d symmetries", count)
		})
	}
}

// Level two never lies on inputs built to mislead its reductions: exact
// zeros that make sign symmetries (embedded instances, some with rows and
// columns permuted, so the symmetric coordinates are not the last ones),
// the same with tiny nonzero entries where the zeros were (P̂ then has no
// symmetry and the full problem is solved), entries of magnitude 1e-150
// and 1e+150, and a one-dimensional W. The check (derived: a certified
// Lower on d* can never exceed a certified Upper of a witness, found here
// by multi-start local search): Lower ≤ Upper of the local search, and
// every kept certificate re-verifies to the same Lower. The moment form
// and its blocks must not change the bound by more than the solver's
// tolerance where both sides exist, so the embedded instance's bound is
// also compared with the 3×3 original's (derived on suite.Embed: the same
// d*, and the relaxation of the embedding has the same value, as the
// extra coordinates carry no part of W).
func TestLevelTwoNeverLies(t *testing.T) {
	ctx := context.Background()
	upb := suite.UPBComplement()
	emb := suite.Embed(upb, 4, 4)
	perm := permuted(emb, []int{3, 0, 2, 1}, []int{1, 3, 0, 2})
	tiny := perturbZeros(perm, 1e-13)
	huge, small := scaled(suite.Random(3, 3, 4, 2), 1e150), scaled(suite.Random(3, 3, 4, 2), 1e-150)
	one := suite.OneMatrix(3, 3, 1)
	var h3 float64
	for i, in := range []suite.Instance{upb, emb, perm, tiny, huge, small, one} {
		w := mustNew(t, in)
		var keep LevelTwoCertificate
		r, err := (&LevelTwo{Keep: &keep}).Search(ctx, w)
		if err != nil {
			t.Fatalf("%s: %v", in.Name, err)
		}
		ms, _ := (&rankone.MultiStart{Starts: 16}).Search(ctx, w)
		if r.Lower > ms.Upper {
			t.Errorf("%s: Lower %v > local search's Upper %v", in.Name, r.Lower, ms.Upper)
		}
		if r.Lower > 0 {
			hb, err := VerifyLevelTwo(w, keep)
			if err != nil || rankone.DistanceLower(hb) != r.Lower {
				t.Errorf("%s: re-verified %v (%v), Lower %v", in.Name, hb, err, r.Lower)
			}
		}
		h := 1 - r.Lower*r.Lower
		switch i {
		case 0:
			h3 = h
		case 1, 2:
			if math.Abs(h-h3) > 1e-6 {
				t.Errorf("%s: bound on h %.10f, the 3×3 original's %.10f", in.Name, h, h3)
			}
		}
	}
}

// permuted returns in with its rows and columns permuted (row i of the
// result is row pr[i] of the input).
func permuted(in suite.Instance, pr, pc []int) suite.Instance {
	b := in.Basis
	d := make([]float64, len(b.Data))
	L := b.Rows * b.Cols
	for t := 0; t < b.Count; t++ {
		for i := 0; i < b.Rows; i++ {
			for j := 0; j < b.Cols; j++ {
				d[t*L+i*b.Cols+j] = b.Data[t*L+pr[i]*b.Cols+pc[j]]
			}
		}
	}
	out := in
	out.Name += "/permuted"
	out.Basis.Data = d
	out.X0, out.Y0 = nil, nil
	return out
}

// perturbZeros returns in with every zero entry of its matrices replaced
// by eps times a fixed pattern of signs.
func perturbZeros(in suite.Instance, eps float64) suite.Instance {
	d := append([]float64(nil), in.Basis.Data...)
	for i, v := range d {
		if v == 0 {
			d[i] = eps * float64(1-2*(i%2))
		}
	}
	out := in
	out.Name += "/perturbed"
	out.Basis.Data = d
	out.X0, out.Y0 = nil, nil
	return out
}

// scaled returns in with its matrices multiplied by s (the same subspace).
func scaled(in suite.Instance, s float64) suite.Instance {
	d := append([]float64(nil), in.Basis.Data...)
	for i := range d {
		d[i] *= s
	}
	out := in
	out.Name += "/scaled"
	out.Basis.Data = d
	return out
}

// The first-order level two proves the interior-point level two's bound to
// 1e-6 (the same relaxation; the interior-point one is checked against the
// entry form above), with its certificate verified by VerifyLevelTwo, on
// small instances with and without sign symmetries.
func TestLevelTwoFirstOrderAgainstInteriorPoint(t *testing.T) {
	ctx := context.Background()
	for _, in := range []suite.Instance{suite.Random(2, 3, 2, 2), suite.Random(3, 3, 4, 1), suite.UPBComplement(),
		suite.Embed(suite.UPBComplement(), 4, 3), suite.Antisymmetric(3)} {
		t.Run(in.Name, func(t *testing.T) {
			w := mustNew(t, in)
			var k2 LevelTwoCertificate
			if _, err := (&LevelTwo{Keep: &k2}).Search(ctx, w); err != nil {
				t.Fatal(err)
			}
			want, err := VerifyLevelTwo(w, k2)
			if err != nil {
				t.Fatal(err)
			}
			var keep LevelTwoCertificate
			r, err := (&LevelTwoFirstOrder{Keep: &keep}).Search(ctx, w)
			if err != nil {
				t.Fatal(err)
			}
			got, err := VerifyLevelTwo(w, keep)
			if err != nil {
				t.Fatalf("kept certificate: %v", err)
			}
			if math.Abs(got-want) > 1e-6 {
				t.Errorf("first-order %.10f, interior point %.10f (%d iterations)", got, want, r.Iterations)
			}
			if r.Lower > r.Upper {
				t.Errorf("Lower %v > Upper %v", r.Lower, r.Upper)
			}
			t.Logf("%d iterations, %.10f vs %.10f", r.Iterations, got, want)
		})
	}
}
