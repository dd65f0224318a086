package sos

import (
	"bytes"
	"context"
	"errors"
	"math"
	"math/cmplx"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strconv"
	"testing"

	"gonum.org/v1/gonum/mat"

	"github.com/segre-lab/segre/internal/eigen"
	"github.com/segre-lab/segre/internal/sdp"
	"github.com/segre-lab/segre/net"
	"github.com/segre-lab/segre/rankone"
	"github.com/segre-lab/segre/rankone/suite"
	"github.com/segre-lab/segre/subspace"
)

// randomComplex is the span of k complex Gaussian m×n matrices (demo data).
func randomComplex(m, n, k int, seed uint64) suite.ComplexInstance {
	rng := rand.New(rand.NewPCG(seed, 77))
	d := make([]complex128, k*m*n)
	for i := range d {
		d[i] = complex(rng.NormFloat64(), rng.NormFloat64())
	}
	return suite.ComplexInstance{Family: "complex-random", Name: "complex-random/" + strconv.Itoa(m) + "x" + strconv.Itoa(n) + "/k" + strconv.Itoa(k),
		Basis: subspace.ComplexBasis{Count: k, Rows: m, Cols: n, Data: d}, Optimum: math.NaN()}
}

// complexValueLower returns a proven lower bound on h* over C from the
// best witness of a many-start search: 1 − Upper² with Upper the certified
// complex distance at the witness.
func complexValueLower(t *testing.T, w *subspace.Subspace) float64 {
	t.Helper()
	ms, err := (&rankone.MultiStart{Starts: 16}).Search(context.Background(), w)
	if err != nil {
		t.Fatal(err)
	}
	return rankone.ValueLower(rankone.ComplexUpperAt(w, ms.X, ms.Y, ms.Upper))
}

// On 2×2 and 2×3 the PPT relaxation is exact (Horodecki, Horodecki,
// Horodecki, Phys. Lett. A 223, 1996: PPT = separable there), so the
// verified certificate's bound meets the value at the best witness, to the
// solver's accuracy (1e-9 relative gap; 1e-7 allowed). Independently,
// branch-and-bound over C (net) brackets the same h*.
func TestComplexPPTExactSmall(t *testing.T) {
	ctx := context.Background()
	for _, c := range []struct{ m, n, k int }{{2, 2, 1}, {2, 2, 2}, {2, 2, 3}, {2, 3, 2}, {2, 3, 3}, {3, 2, 4}} {
		for seed := uint64(1); seed <= 2; seed++ {
			in := randomComplex(c.m, c.n, c.k, seed)
			w := suite.MustNewComplex(t, in)
			rel, err := LevelOneComplex(w)
			if err != nil {
				t.Fatal(err)
			}
			sol, err := sdp.Solve(ctx, rel.Problem, sdp.Settings{})
			// Exact relaxations are degenerate (no strict complementarity),
			// and the solver may stop at its attainable accuracy
			// (IterationLimit after a few iterations); the verified bound
			// is what is tested.
			if err != nil || sol == nil {
				t.Fatalf("%s: solver %v", in.Name, err)
			}
			hb, err := VerifyComplex(w, rel.Certificate(sol.Y))
			if err != nil {
				t.Fatal(err)
			}
			hl := complexValueLower(t, w)
			if hb < hl {
				t.Fatalf("%s: certified bound %.15f below a witness's value %.15f", in.Name, hb, hl)
			}
			if hb-hl > 1e-7 {
				t.Errorf("%s: PPT bound %.12f, witness %.12f: not exact", in.Name, hb, hl)
			}
			bb, err := (&net.BranchBound{Gap: 1e-5}).Search(ctx, w)
			if err != nil {
				t.Fatal(err)
			}
			// Branch-and-bound's interval is on d” of W”: h = 2h” = 2(1 − d”²).
			bbUpperH := 2 * (1 - bb.Lower*bb.Lower)
			if hb > bbUpperH+1e-9 {
				t.Errorf("%s: PPT bound %.12f above branch-and-bound's %.12f", in.Name, hb, bbUpperH)
			}
			if bbLowerH := 2 * (1 - bb.Upper*bb.Upper); hb < bbLowerH-1e-9 {
				t.Errorf("%s: PPT bound %.12f below branch-and-bound's witness %.12f", in.Name, hb, bbLowerH)
			}
		}
	}
}

// span{I, J} (J the rotation by 90°) holds (I − iJ)/2 = x yᵀ with
// x = (1, −i)/√2, y = (1, i)/√2 (derived: I − iJ = [[1, i], [−i, 1]]), so
// h* = 1 over C; over R, h* = 1/2 (d* = 1/√2, derived in the suite). The
// certified complex bound must not fall below 1, and the real certificate
// (K with K^Γ = −K, valid over R) does not bound h over C: at the complex
// point, z*(P + K)z exceeds λmax(P + K). This is why the complex
// certificate is a Z ⪰ 0 and not a Γ-antisymmetric K (see complex.go).
func TestComplexSpanIJ(t *testing.T) {
	ctx := context.Background()
	w := suite.MustNewComplex(t, suite.PencilIJ())
	r, err := (&Bound{}).Search(ctx, w)
	if err != nil {
		t.Fatal(err)
	}
	if rankone.ComplexLower(r.Lower) != 0 {
		t.Fatalf("complex Lower %v for a subspace containing a rank-one matrix", rankone.ComplexLower(r.Lower))
	}
	if u := rankone.ComplexUpperAt(w, r.X, r.Y, r.Upper); u > 1e-7 {
		t.Errorf("complex Upper %v, d* = 0", u)
	}
	// The real relaxation of the real span{I, J}.
	wr, err := subspace.New(ctx, subspace.Basis{Count: 2, Rows: 2, Cols: 2, Data: []float64{1, 0, 0, 1, 0, -1, 1, 0}}, subspace.Options{})
	if err != nil {
		t.Fatal(err)
	}
	rel, err := LevelOne(wr)
	if err != nil {
		t.Fatal(err)
	}
	sol, err := sdp.Solve(ctx, rel.Problem, sdp.Settings{})
	if err != nil {
		t.Fatal(err)
	}
	k := rel.Certificate(sol.Y)
	hbR, err := Verify(wr, k)
	if err != nil || math.Abs(hbR-0.5) > 1e-7 {
		t.Fatalf("real bound %v (%v), want 1/2", hbR, err)
	}
	// z = x⊗y for the complex point; P = (I⊗I + J⊗J-vec)… computed directly.
	s2 := complex(1/math.Sqrt2, 0)
	x := []complex128{s2, -1i * s2}
	y := []complex128{s2, 1i * s2}
	z := make([]complex128, 4)
	for i := range x {
		for j := range y {
			z[i*2+j] = x[i] * y[j]
		}
	}
	p, _ := ProjectorBound(wr)
	var hz, kz complex128
	for a := 0; a < 4; a++ {
		for b := 0; b < 4; b++ {
			hz += cmplx.Conj(z[a]) * complex(p.At(a, b), 0) * z[b]
			kz += cmplx.Conj(z[a]) * complex(k.K[a*4+b], 0) * z[b]
		}
	}
	// h = z*Pz = 1 at the complex point, above the real bound, because
	// z*Kz does not vanish there (it does at every real product point).
	if math.Abs(real(hz)-1) > 1e-12 || real(hz) <= hbR {
		t.Errorf("z*Pz = %v at the complex point, want 1 > the real bound %v", hz, hbR)
	}
	if math.Abs(real(kz)) < 0.1 {
		t.Errorf("z*Kz = %v: expected it not to vanish at a complex product", kz)
	}
}

// The exported complex relaxation, solved by CSDP (Debian coinor-csdp, a
// general-purpose reference solver), has our solver's optimum.
func TestComplexAgainstCSDP(t *testing.T) {
	ctx := context.Background()
	dir := t.TempDir()
	for i, in := range []suite.ComplexInstance{randomComplex(2, 3, 3, 1), randomComplex(3, 3, 4, 2), suite.ComplexPlanted(3, 3, 3, 3)} {
		w := suite.MustNewComplex(t, in)
		rel, err := LevelOneComplex(w)
		if err != nil {
			t.Fatal(err)
		}
		var buf bytes.Buffer
		if err := rel.WriteSDPA(&buf); err != nil {
			t.Fatal(err)
		}
		path := filepath.Join(dir, "c"+strconv.Itoa(i)+".dat-s")
		if err := os.WriteFile(path, buf.Bytes(), 0o644); err != nil {
			t.Fatal(err)
		}
		ref := csdpObjective(t, path)
		sol, err := sdp.Solve(ctx, rel.Problem, sdp.Settings{})
		if err != nil {
			t.Fatal(err)
		}
		if math.Abs(sol.Primal-ref) > 1e-6 {
			t.Errorf("%s: ours %.10f, CSDP %.10f", in.Name, sol.Primal, ref)
		}
		hb, err := VerifyComplex(w, rel.Certificate(sol.Y))
		if err != nil {
			t.Fatal(err)
		}
		if hb < ref-1e-6 || hb > ref+1e-6 {
			t.Errorf("%s: verified bound %.10f, CSDP optimum %.10f", in.Name, hb, ref)
		}
	}
}

// Never lies: any Hermitian Z, however poor, gives a bound at least the
// value of the best witness (h ≤ λmax(P + Z^Γ) − λmin(Z), derived in
// complex.go), including indefinite and zero Z.
func TestVerifyComplexNeverBelowWitness(t *testing.T) {
	for seed := uint64(1); seed <= 4; seed++ {
		in := randomComplex(2, 3, 3, seed)
		w := suite.MustNewComplex(t, in)
		hl := complexValueLower(t, w)
		rng := rand.New(rand.NewPCG(seed, 5))
		L := 6
		for trial := 0; trial < 20; trial++ {
			z := make([]complex128, L*L)
			scale := []float64{0, 1e-3, 0.3, 3}[trial%4]
			for a := 0; a < L; a++ {
				z[a*L+a] = complex(scale*rng.NormFloat64(), 0)
				for b := a + 1; b < L; b++ {
					v := complex(scale*rng.NormFloat64(), scale*rng.NormFloat64())
					z[a*L+b], z[b*L+a] = v, cmplx.Conj(v)
				}
			}
			hb, err := VerifyComplex(w, ComplexCertificate{M: 2, N: 3, Z: z})
			if err != nil {
				t.Fatal(err)
			}
			if hb < hl {
				t.Fatalf("%s trial %d: bound %v below a witness's value %v", in.Name, trial, hb, hl)
			}
		}
	}
}

// Malformed certificates are refused with ErrCertificate, never a panic.
func TestVerifyComplexRefuses(t *testing.T) {
	w := suite.MustNewComplex(t, randomComplex(2, 2, 2, 1))
	good := make([]complex128, 16)
	cases := map[string]ComplexCertificate{
		"shape":         {M: 2, N: 3, Z: good},
		"length":        {M: 2, N: 2, Z: good[:15]},
		"not Hermitian": {M: 2, N: 2, Z: func() []complex128 { z := append([]complex128(nil), good...); z[1] = 1i; return z }()},
		"complex diag":  {M: 2, N: 2, Z: func() []complex128 { z := append([]complex128(nil), good...); z[5] = 1i; return z }()},
		"NaN":           {M: 2, N: 2, Z: func() []complex128 { z := append([]complex128(nil), good...); z[0] = complex(math.NaN(), 0); return z }()},
	}
	for name, c := range cases {
		if _, err := VerifyComplex(w, c); !errors.Is(err, ErrCertificate) {
			t.Errorf("%s: err %v", name, err)
		}
	}
	wr := mustNew(t, suite.Random(2, 2, 2, 1))
	if _, err := VerifyComplex(wr, ComplexCertificate{M: 2, N: 2, Z: good}); !errors.Is(err, ErrCertificate) {
		t.Errorf("real subspace: err %v", err)
	}
	if _, err := LevelOneComplex(wr); err == nil {
		t.Error("LevelOneComplex of a real subspace accepted")
	}
	if _, err := LevelOneComplex(suite.MustNewComplex(t, randomComplex(7, 6, 3, 1))); !errors.Is(err, ErrTooLarge) {
		t.Errorf("7×6: err %v", err)
	}
}

// Bound on complex subspaces: planted points are found (d* = 0, derived in
// the suite), Lower stays below Upper, and the kept certificate re-verifies
// to the bound that gave Lower. A real subspace treated over C has a
// complex h* at least its real one (real points are complex points), so
// the complex certificate's bound is at least the real witness's value.
func TestBoundComplex(t *testing.T) {
	ctx := context.Background()
	in := suite.ComplexPlanted(3, 3, 4, 7)
	w := suite.MustNewComplex(t, in)
	var keep ComplexCertificate
	r, err := (&Bound{KeepComplex: &keep}).Search(ctx, w)
	if err != nil {
		t.Fatal(err)
	}
	if r.Lower > r.Upper {
		t.Fatalf("Lower %v > Upper %v", r.Lower, r.Upper)
	}
	if u := rankone.ComplexUpperAt(w, r.X, r.Y, r.Upper); u > 1e-6 {
		t.Errorf("planted: complex Upper %v", u)
	}
	rin := suite.Random(3, 3, 3, 4)
	wr := mustNew(t, rin)
	wc, err := subspace.NewComplex(ctx, subspace.ComplexFromReal(rin.Basis), subspace.Options{})
	if err != nil {
		t.Fatal(err)
	}
	ms, _ := (&rankone.MultiStart{Starts: 16}).Search(ctx, wr)
	hReal := rankone.ValueLower(ms.Upper)
	rc, err := (&Bound{KeepComplex: &keep}).Search(ctx, wc)
	if err != nil {
		t.Fatal(err)
	}
	if rc.Lower == 0 {
		t.Fatal("no Lower on a random 3×3 of dimension 3 over C")
	}
	hb, err := VerifyComplex(wc, keep)
	if err != nil {
		t.Fatal(err)
	}
	if hb < hReal {
		t.Errorf("complex bound %v below the real witness's value %v", hb, hReal)
	}
	if got := rankone.DistanceLower(hb / 2); got != rc.Lower {
		t.Errorf("kept certificate gives Lower %v, the search reported %v", got, rc.Lower)
	}
}

// The moment block of the relaxation of a planted instance is (nearly)
// rank one in the sense of the realification (rank ≤ 2: v and Jv), and
// rounding recovers the planted point.
func TestRoundComplex(t *testing.T) {
	in := suite.ComplexPlanted(2, 3, 2, 3)
	w := suite.MustNewComplex(t, in)
	rel, err := LevelOneComplex(w)
	if err != nil {
		t.Fatal(err)
	}
	sol, err := sdp.Solve(context.Background(), rel.Problem, sdp.Settings{})
	if err != nil {
		t.Fatal(err)
	}
	x, y, ok := roundComplex(sol.X[0], 2, 3)
	if !ok {
		t.Fatal("rounding failed")
	}
	u, err := rankone.VerifyComplex(w, x, y)
	if err != nil {
		t.Fatal(err)
	}
	if u > 1e-3 {
		t.Errorf("rounded point at complex distance %v (planted d* = 0)", u)
	}
	blk := mat.NewSymDense(12, nil)
	for a := 0; a < 12; a++ {
		for b := a; b < 12; b++ {
			blk.SetSym(a, b, sol.X[0].At(a, b))
		}
	}
	if v, _, ok := eigen.Sym(blk, false); ok && v[len(v)-3] > 1e-5 {
		t.Errorf("third eigenvalue of X_ρ %v", v[len(v)-3])
	}
}
