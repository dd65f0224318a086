package proof

import (
	"bytes"
	"context"
	"errors"
	"testing"

	"github.com/segre-lab/segre/net"
	"github.com/segre-lab/segre/rankone"
	"github.com/segre-lab/segre/rankone/suite"
	"github.com/segre-lab/segre/sos"
	"github.com/segre-lab/segre/subspace"
)

// roundTrip builds a proof from the evidence, writes and reads it, and
// checks it with the input basis; it returns the proof read back.
func roundTrip(t *testing.T, in suite.Instance, ev Evidence) (*Proof, Confirmed) {
	t.Helper()
	ev.InputSHA256 = SHA256(inputBytes(t, in))
	p, err := Build(context.Background(), ev)
	if err != nil {
		t.Fatal(err)
	}
	var buf bytes.Buffer
	if err := Write(&buf, p); err != nil {
		t.Fatal(err)
	}
	q, err := Read(bytes.NewReader(buf.Bytes()), int64(buf.Len()))
	if err != nil {
		t.Fatal(err)
	}
	c, err := Check(context.Background(), q, &in.Basis, inputBytes(t, in))
	if err != nil {
		t.Fatalf("%s: %v", in.Name, err)
	}
	return q, c
}

// inputBytes is the instance's basis as the bytes of an .npy file.
func inputBytes(t *testing.T, in suite.Instance) []byte {
	var b bytes.Buffer
	if err := subspace.WriteNPY(&b, in.Basis); err != nil {
		t.Fatal(err)
	}
	return b.Bytes()
}

func witness(t *testing.T, w *subspace.Subspace) ([]float64, []float64) {
	r, err := (&rankone.MultiStart{Method: &rankone.ALS{}, Starts: 8}).Search(context.Background(), w)
	if err != nil {
		t.Fatal(err)
	}
	return r.X, r.Y
}

// Round trips of every proof kind: the confirmed interval contains the
// known d* (suite optima: Eckart–Young for one matrix; the level-one
// relaxation is exact on the antisymmetric subspace, derived in the sos
// tests) and its Lower is within the writer's margin of the argument's
// own bound.
func TestRoundTrips(t *testing.T) {
	ctx := context.Background()
	// Flattening: exact for one matrix.
	in := suite.OneMatrix(3, 5, 1)
	w := suite.MustNew(t, in)
	x, y := witness(t, w)
	p, c := roundTrip(t, in, Evidence{W: w, X: x, Y: y})
	if p.File.LowerArgument != ArgFlattening || c.Lower > in.Optimum || c.Upper < in.Optimum || c.Lower < in.Optimum*(1-1e-8) {
		t.Errorf("flattening: %s [%v, %v], d* = %v", p.File.LowerArgument, c.Lower, c.Upper, in.Optimum)
	}
	if !c.InputChecked || c.InputDistance > 1e-12 {
		t.Errorf("input not checked: %+v", c)
	}
	// Level one.
	in = suite.Antisymmetric(3)
	w = suite.MustNew(t, in)
	var cert sos.Certificate
	if _, err := (&sos.Bound{Keep: &cert}).Search(ctx, w); err != nil {
		t.Fatal(err)
	}
	x, y = witness(t, w)
	p, c = roundTrip(t, in, Evidence{W: w, X: x, Y: y, Certificate: &cert})
	if p.File.LowerArgument != ArgSOS1 || c.Lower > in.Optimum || c.Lower < in.Optimum*(1-1e-6) {
		t.Errorf("sos: %s [%v, %v], d* = %v", p.File.LowerArgument, c.Lower, c.Upper, in.Optimum)
	}
	// Level two: on a Gaussian 3×3 subspace its bound beats the flattening
	// bound (both proven; the test fails if the proof does not pick it).
	in = suite.Random(3, 3, 4, 1)
	w = suite.MustNew(t, in)
	var cert2 sos.LevelTwoCertificate
	r2, err := (&sos.LevelTwo{Keep: &cert2}).Search(ctx, w)
	if err != nil {
		t.Fatal(err)
	}
	x, y = witness(t, w)
	p, c = roundTrip(t, in, Evidence{W: w, X: x, Y: y, LevelTwo: &cert2})
	if p.File.LowerArgument != ArgSOS2 || c.Lower > r2.Lower || c.Lower < r2.Lower*(1-1e-6) || c.Lower > c.Upper {
		t.Errorf("sos level 2: %s [%v, %v], search Lower %v", p.File.LowerArgument, c.Lower, c.Upper, r2.Lower)
	}
	// Level two tampered: one number of K changed (symmetry broken), the
	// number t lowered (the claim no longer follows), the file truncated
	// of its certificate.
	for name, tamper := range map[string]func(q *Proof){
		"K entry":  func(q *Proof) { q.Certificate[1] += 1e-3 },
		"t":        func(q *Proof) { q.File.CertificateT -= 0.05 },
		"K sign":   func(q *Proof) { q.Certificate[0] = -q.Certificate[0] - 1 },
		"no K":     func(q *Proof) { q.Certificate = nil },
		"as level": func(q *Proof) { q.File.LowerArgument = ArgSOS1 },
	} {
		var buf bytes.Buffer
		if err := Write(&buf, p); err != nil {
			t.Fatal(err)
		}
		q, err := Read(bytes.NewReader(buf.Bytes()), int64(buf.Len()))
		if err != nil {
			t.Fatal(err)
		}
		tamper(q)
		if _, err := Check(ctx, q, &in.Basis, inputBytes(t, in)); err == nil {
			t.Errorf("level two, %s tampered: accepted", name)
		}
	}
	// Branch-and-bound.
	in = suite.Random(2, 6, 3, 1)
	w = suite.MustNew(t, in)
	var cover net.Cover
	res, err := (&net.BranchBound{Record: &cover}).Search(ctx, w)
	if err != nil {
		t.Fatal(err)
	}
	p, c = roundTrip(t, in, Evidence{W: w, X: res.X, Y: res.Y, Cover: &cover})
	if p.File.LowerArgument != ArgBranch || c.Lower > res.Upper || c.Lower < res.Lower*(1-1e-6) {
		t.Errorf("branch-and-bound: %s [%v, %v], search [%v, %v]", p.File.LowerArgument, c.Lower, c.Upper, res.Lower, res.Upper)
	}
}

// Tampered proofs are refused: one changed number in any part, a cell
// removed, a claim raised, another basis file.
func TestTampering(t *testing.T) {
	ctx := context.Background()
	in := suite.Random(2, 6, 3, 1)
	w := suite.MustNew(t, in)
	var cover net.Cover
	res, err := (&net.BranchBound{Record: &cover}).Search(ctx, w)
	if err != nil {
		t.Fatal(err)
	}
	good, _ := roundTrip(t, in, Evidence{W: w, X: res.X, Y: res.Y, Cover: &cover})
	clone := func() *Proof {
		var buf bytes.Buffer
		Write(&buf, good)
		q, _ := Read(bytes.NewReader(buf.Bytes()), int64(buf.Len()))
		return q
	}
	cases := map[string]func(p *Proof){
		"stored entry":   func(p *Proof) { p.Stored[3] *= 1.001 },
		"witness":        func(p *Proof) { p.File.X[0] += 0.01 },
		"upper claim":    func(p *Proof) { p.File.Upper *= 0.999 },
		"lower claim":    func(p *Proof) { p.File.Lower *= 1.001 },
		"cell removed":   func(p *Proof) { p.Cover.Cells = p.Cover.Cells[1:] },
		"cell moved":     func(p *Proof) { p.Cover.Cells[0].Lo[0] += 1.0 / 1024 },
		"stored dropped": func(p *Proof) { p.Stored = p.Stored[:len(p.Stored)-p.File.Rows*p.File.Cols]; p.File.StoredCount-- },
	}
	for name, tamper := range cases {
		p := clone()
		tamper(p)
		if _, err := Check(ctx, p, &in.Basis, inputBytes(t, in)); err == nil {
			t.Errorf("%s: accepted", name)
		} else if !errors.Is(err, ErrClaim) && !errors.Is(err, ErrFormat) {
			t.Errorf("%s: error %v not a refusal", name, err)
		}
	}
	// Another basis file: the hash differs.
	other := suite.Random(2, 6, 3, 2)
	if _, err := Check(ctx, clone(), &other.Basis, inputBytes(t, other)); !errors.Is(err, ErrClaim) {
		t.Errorf("another basis: %v", err)
	}
	// A truncated archive.
	var buf bytes.Buffer
	Write(&buf, good)
	if _, err := Read(bytes.NewReader(buf.Bytes()[:buf.Len()/2]), int64(buf.Len()/2)); !errors.Is(err, ErrFormat) {
		t.Errorf("truncated archive: %v", err)
	}
}

// A proof without a recorded SHA-256 (built from memory, not a file) is
// checked against a given basis by the proven input distance alone, and
// says the hash was not checked; a basis of another shape is an input
// error, not a refused claim.
func TestNoHashAndOtherShape(t *testing.T) {
	ctx := context.Background()
	in := suite.OneMatrix(3, 5, 1)
	w := suite.MustNew(t, in)
	x, y := witness(t, w)
	p, err := Build(ctx, Evidence{W: w, X: x, Y: y})
	if err != nil {
		t.Fatal(err)
	}
	c, err := Check(ctx, p, &in.Basis, inputBytes(t, in))
	if err != nil || c.HashChecked || !c.InputChecked || c.InputDistance > 1e-12 {
		t.Errorf("no hash: %+v, %v", c, err)
	}
	other := suite.OneMatrix(5, 3, 1)
	if _, err := Check(ctx, p, &other.Basis, nil); !errors.Is(err, ErrInput) || errors.Is(err, ErrClaim) {
		t.Errorf("other shape: %v", err)
	}
}
