package proof

import (
	"bytes"
	"context"
	"testing"

	"github.com/segre-lab/segre/rankone/suite"
)

// The two-copy argument round-trips and is refused when tampered. On the
// antisymmetric 4×4 subspace the two-copy bound proves h* ≤ 3/4, so
// d* ≥ 1/2 (sos.TestEigenBoundAntisymmetric's value), below d* = √(1/2)
// (suite.Antisymmetric's derivation), and better than the flattening bound
// there (the test fails if the proof does not pick it).
func TestTwoCopyRoundTrip(t *testing.T) {
	ctx := context.Background()
	in := suite.Antisymmetric(4)
	w := suite.MustNew(t, in)
	x, y := witness(t, w)
	p, c := roundTrip(t, in, Evidence{W: w, X: x, Y: y, TwoCopy: true})
	if p.File.LowerArgument != ArgTwoCopy || c.Lower > 0.5 || c.Lower < 0.5*(1-1e-8) || c.Upper < in.Optimum {
		t.Fatalf("two-copy: %s [%v, %v], d* = %v", p.File.LowerArgument, c.Lower, c.Upper, in.Optimum)
	}
	other := suite.Antisymmetric(4)
	other.Basis.Data = append([]float64(nil), other.Basis.Data...)
	other.Basis.Data[1] += 0.25 // another subspace: its stored basis differs
	ow := suite.MustNew(t, other)
	for name, tamper := range map[string]func(q *Proof){
		"Lower raised": func(q *Proof) { q.File.Lower = 0.51 },
		"stored entry": func(q *Proof) { q.Stored[3] += 1e-3 },
		"other basis": func(q *Proof) {
			st := ow.Stored()
			q.Stored = q.Stored[:0]
			for i := 0; i < st.Count(); i++ {
				q.Stored = append(q.Stored, st.Vector(i, nil)...)
			}
			q.File.StoredCount, q.File.StoresComplement = st.Count(), st.Complement()
		},
		"as complex": func(q *Proof) { q.File.Field = "complex" },
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
			t.Errorf("two-copy, %s tampered: accepted", name)
		}
	}
}
