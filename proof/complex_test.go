package proof

import (
	"bytes"
	"context"
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/segre-lab/segre/net"
	"github.com/segre-lab/segre/rankone"
	"github.com/segre-lab/segre/rankone/suite"
	"github.com/segre-lab/segre/sos"
	"github.com/segre-lab/segre/subspace"
)

// complexGaussian is the span of k complex Gaussian m×n matrices (demo data).
func complexGaussian(m, n, k int, seed uint64) subspace.ComplexBasis {
	rng := rand.New(rand.NewPCG(seed, 9))
	d := make([]complex128, k*m*n)
	for i := range d {
		d[i] = complex(rng.NormFloat64(), rng.NormFloat64())
	}
	return subspace.ComplexBasis{Count: k, Rows: m, Cols: n, Data: d}
}

// complexRoundTrip builds, writes, reads and checks a complex proof
// against its complex input (hash and proven input distance).
func complexRoundTrip(t *testing.T, cb subspace.ComplexBasis, ev Evidence) (*Proof, Confirmed) {
	t.Helper()
	var in bytes.Buffer
	if err := subspace.WriteComplexNPY(&in, cb); err != nil {
		t.Fatal(err)
	}
	ev.InputSHA256 = SHA256(in.Bytes())
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
	c, err := CheckInput(context.Background(), q, &subspace.Input{Field: subspace.Complex, Complex: cb}, in.Bytes())
	if err != nil {
		t.Fatal(err)
	}
	if !c.HashChecked || !c.InputChecked || c.InputNote != "" || c.InputDistance > 1e-12 {
		t.Errorf("input not checked: %+v", c)
	}
	return q, c
}

// Complex proofs: the PPT certificate (exact on 2×3 over C: Horodecki,
// Horodecki, Horodecki 1996, so Lower meets the witness's Upper to the
// solver's accuracy) and branch-and-bound's phase-reduced cover, each
// re-checked with the complex input; the confirmed interval is about the
// complex distance and contains the witness's certified complex distance.
func TestComplexRoundTrips(t *testing.T) {
	ctx := context.Background()
	cb := complexGaussian(2, 3, 2, 1)
	w, err := subspace.NewComplex(ctx, cb, subspace.Options{})
	if err != nil {
		t.Fatal(err)
	}
	var z sos.ComplexCertificate
	r, err := (&sos.Bound{KeepComplex: &z}).Search(ctx, w)
	if err != nil {
		t.Fatal(err)
	}
	up := rankone.ComplexUpperAt(w, r.X, r.Y, r.Upper)
	p, c := complexRoundTrip(t, cb, Evidence{W: w, X: r.X, Y: r.Y, ComplexCertificate: &z})
	if p.File.Field != "complex" || p.File.LowerArgument != ArgSOS1Complex {
		t.Fatalf("field %q, argument %q", p.File.Field, p.File.LowerArgument)
	}
	if c.Lower > c.Upper || c.Upper < up*(1-1e-6) || up-c.Lower > 1e-6 {
		t.Errorf("PPT proof [%v, %v], witness's complex Upper %v", c.Lower, c.Upper, up)
	}
	// Branch-and-bound over C.
	var cover net.Cover
	res, err := (&net.BranchBound{Record: &cover, Gap: 1e-5}).Search(ctx, w)
	if err != nil {
		t.Fatal(err)
	}
	p, c = complexRoundTrip(t, cb, Evidence{W: w, X: res.X, Y: res.Y, Cover: &cover})
	if p.File.LowerArgument != ArgBranch || c.Lower > c.Upper || c.Lower < rankone.ComplexLower(res.Lower)*(1-1e-6) {
		t.Errorf("branch-and-bound proof %q [%v, %v], search's complex Lower %v", p.File.LowerArgument, c.Lower, c.Upper, rankone.ComplexLower(res.Lower))
	}
	// Flattening only (one complex matrix: its Lower is what the
	// realified flattening proves, translated; the interval must contain
	// the Eckart–Young d* of the suite).
	oin := suite.ComplexOneMatrix(2, 3, 2)
	wo := suite.MustNewComplex(t, oin)
	ms, _ := (&rankone.MultiStart{Starts: 8}).Search(ctx, wo)
	p, c = complexRoundTrip(t, oin.Basis, Evidence{W: wo, X: ms.X, Y: ms.Y})
	if c.Lower > oin.Optimum+1e-9 || c.Upper < oin.Optimum-1e-9 {
		t.Errorf("one matrix: %q [%v, %v], d* = %v", p.File.LowerArgument, c.Lower, c.Upper, oin.Optimum)
	}
}

// Tampered complex proofs are refused: a certificate entry (no longer
// Hermitian), a stored entry (no longer of the form [[a, b], [b, −a]]),
// the Lower claim raised, the field flipped to real (the real reading's
// claims differ), another complex input (hash).
func TestComplexTampering(t *testing.T) {
	ctx := context.Background()
	cb := complexGaussian(2, 3, 2, 1)
	w, err := subspace.NewComplex(ctx, cb, subspace.Options{})
	if err != nil {
		t.Fatal(err)
	}
	var z sos.ComplexCertificate
	r, err := (&sos.Bound{KeepComplex: &z}).Search(ctx, w)
	if err != nil {
		t.Fatal(err)
	}
	good, _ := complexRoundTrip(t, cb, Evidence{W: w, X: r.X, Y: r.Y, ComplexCertificate: &z})
	var in bytes.Buffer
	subspace.WriteComplexNPY(&in, cb)
	clone := func() *Proof {
		var buf bytes.Buffer
		Write(&buf, good)
		q, err := Read(bytes.NewReader(buf.Bytes()), int64(buf.Len()))
		if err != nil {
			t.Fatal(err)
		}
		return q
	}
	cases := map[string]func(p *Proof){
		"certificate entry": func(p *Proof) { p.ComplexCertificate[1] += 1e-3i },
		"stored entry":      func(p *Proof) { p.Stored[0] *= 1.001 },
		"lower claim":       func(p *Proof) { p.File.Lower = math.Nextafter(p.File.Lower, 1) * (1 + 1e-6) },
		"witness":           func(p *Proof) { p.File.X[0] += 0.05 },
		"field":             func(p *Proof) { p.File.Field = "real" },
	}
	for name, tamper := range cases {
		p := clone()
		tamper(p)
		_, err := CheckInput(ctx, p, &subspace.Input{Field: subspace.Complex, Complex: cb}, in.Bytes())
		if err == nil {
			t.Errorf("%s: accepted", name)
		} else if !errors.Is(err, ErrClaim) && !errors.Is(err, ErrFormat) && !errors.Is(err, ErrInput) {
			t.Errorf("%s: error %v not a refusal", name, err)
		}
	}
	other := complexGaussian(2, 3, 2, 2)
	var ob bytes.Buffer
	subspace.WriteComplexNPY(&ob, other)
	if _, err := CheckInput(ctx, clone(), &subspace.Input{Field: subspace.Complex, Complex: other}, ob.Bytes()); !errors.Is(err, ErrClaim) {
		t.Errorf("another input: %v", err)
	}
}
