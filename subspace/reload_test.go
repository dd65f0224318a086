package subspace

import (
	"bytes"
	"context"
	"errors"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"testing"
)

// New with Options.Reload factors the caller's array in place and gives
// the same Subspace bit for bit as New on a copy (derived here: normalise
// moves each matrix to its place before scaling it, the same numbers the
// copy gets, and everything after reads only the normalised array and the
// input again, which Reload returns unchanged). InputDistanceReload gives
// InputDistance's bound bit for bit (the same numbers in the same order).
// With W stored, the stored basis lives in the caller's array. Zero
// matrices in the middle exercise the moves; 3×4 with 9 matrices stores
// W⊥, 4×5 with 6 stores W.
func TestNewReload(t *testing.T) {
	rng := rand.New(rand.NewPCG(31, 32))
	dir := t.TempDir()
	for _, sh := range [][3]int{{4, 5, 6}, {3, 4, 9}} {
		m, n, r := sh[0], sh[1], sh[2]
		b := randBasis(rng, r, m, n)
		clear(b.Data[2*m*n : 3*m*n]) // a zero matrix among them
		path := filepath.Join(dir, "b.npy")
		var file bytes.Buffer
		if err := WriteNPY(&file, b); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(path, file.Bytes(), 0o600); err != nil {
			t.Fatal(err)
		}
		ctx := context.Background()
		want, err := New(ctx, b, Options{})
		if err != nil {
			t.Fatal(err)
		}
		thWant, errWant := InputDistance(ctx, b, want)
		mine, err := ReadFile(path, 0)
		if err != nil {
			t.Fatal(err)
		}
		reload, closeFile, err := ReloadNPY(path, mine)
		if err != nil {
			t.Fatal(err)
		}
		got, err := New(ctx, mine, Options{Reload: reload})
		if err != nil {
			t.Fatal(err)
		}
		if !bitsEqual(got.q, want.q) || got.recon != want.recon || got.eta != want.eta || got.k != want.k || got.comp != want.comp {
			t.Fatalf("%dx%d: in place differs: recon %g vs %g, eta %g vs %g", m, n, got.recon, want.recon, got.eta, want.eta)
		}
		if !got.comp && &got.q[0] != &mine.Data[0] {
			t.Errorf("%dx%d: the stored basis is not in the caller's array", m, n)
		}
		th, err := InputDistanceReload(ctx, r, reload, got)
		if (err == nil) != (errWant == nil) || math.Float64bits(th) != math.Float64bits(thWant) {
			t.Errorf("%dx%d: InputDistanceReload %v (%v), InputDistance %v (%v)", m, n, th, err, thWant, errWant)
		}
		closeFile()
	}
}

// A file changed after its first reading is caught (ErrChanged), New and
// InputDistanceReload return the error, and ReloadNPY refuses what it
// cannot read a matrix at a time (Fortran order, complex) or a basis of
// another shape.
func TestReloadRefuses(t *testing.T) {
	rng := rand.New(rand.NewPCG(33, 34))
	dir := t.TempDir()
	b := randBasis(rng, 5, 3, 4)
	var file bytes.Buffer
	if err := WriteNPY(&file, b); err != nil {
		t.Fatal(err)
	}
	path := filepath.Join(dir, "b.npy")
	if err := os.WriteFile(path, file.Bytes(), 0o600); err != nil {
		t.Fatal(err)
	}
	first, err := ReadFile(path, 0)
	if err != nil {
		t.Fatal(err)
	}
	reload, closeFile, err := ReloadNPY(path, first)
	if err != nil {
		t.Fatal(err)
	}
	defer closeFile()
	changed := file.Bytes()
	changed[len(changed)-3] ^= 0x10 // a bit of the last matrix's last entry
	if err := os.WriteFile(path, changed, 0o600); err != nil {
		t.Fatal(err)
	}
	if _, err := New(context.Background(), first, Options{Reload: reload}); !errors.Is(err, ErrChanged) {
		t.Errorf("New on a changed file: %v, want ErrChanged", err)
	}
	w, err := New(context.Background(), b, Options{})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := InputDistanceReload(context.Background(), 5, reload, w); !errors.Is(err, ErrChanged) {
		t.Errorf("InputDistanceReload on a changed file: %v, want ErrChanged", err)
	}
	raw := file.Bytes()[len(file.Bytes())-5*12*8:]
	for name, c := range map[string]struct {
		data  []byte
		basis Basis
		want  error
	}{
		"fortran": {npyBytes(1, "<f8", true, "(5, 3, 4)", raw), b, ErrFormat},
		"complex": {npyBytes(1, "<c16", false, "(5, 3, 2)", raw), b, ErrFormat},
		"shape":   {npyBytes(1, "<f8", false, "(4, 3, 4)", raw[:4*12*8]), b, ErrShape},
	} {
		p := filepath.Join(dir, name+".npy")
		if err := os.WriteFile(p, c.data, 0o600); err != nil {
			t.Fatal(err)
		}
		if _, _, err := ReloadNPY(p, c.basis); !errors.Is(err, c.want) {
			t.Errorf("%s: %v, want %v", name, err, c.want)
		}
	}
}

// A Subspace built in the input's array proves its input span only through
// InputDistanceReload: InputDistance refuses (ErrUnproven), since the
// array now holds the stored basis and "proving" it against itself would
// give a bound near zero whatever the input was. A reading with more
// nonzero matrices than New counted, or another count, is refused too.
func TestInputDistanceInPlaceRefused(t *testing.T) {
	rng := rand.New(rand.NewPCG(35, 36))
	ctx := context.Background()
	b := randBasis(rng, 6, 4, 5)
	clear(b.Data[2*20 : 3*20])
	orig := append([]float64(nil), b.Data...)
	reads := 0
	reload := func(t int, dst []float64) error {
		reads++
		copy(dst, orig[t*20:(t+1)*20])
		return nil
	}
	w, err := New(ctx, b, Options{Reload: reload})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := InputDistance(ctx, b, w); !errors.Is(err, ErrUnproven) {
		t.Errorf("InputDistance on the overwritten array: %v, want ErrUnproven", err)
	}
	if _, err := InputDistanceReload(ctx, 6, reload, w); err != nil {
		t.Errorf("InputDistanceReload: %v", err)
	}
	changed := func(t int, dst []float64) error {
		copy(dst, orig[t*20:(t+1)*20])
		if t == 2 {
			dst[5] = 1 // the matrix New found zero is not zero now
		}
		return nil
	}
	if _, err := InputDistanceReload(ctx, 6, changed, w); !errors.Is(err, ErrUnproven) {
		t.Errorf("a reading with one more nonzero matrix than New's: %v, want ErrUnproven", err)
	}
	if _, err := InputDistanceReload(ctx, 5, reload, w); !errors.Is(err, ErrShape) {
		t.Errorf("a count other than New's: %v, want ErrShape", err)
	}
}

// ReloadNPY refuses counts and shapes whose products overflow (ErrShape,
// no panic), and NewComplex does not hand Reload to its realified copy
// (which is its own: Reload reads the caller's complex matrices).
func TestReloadShapesAndComplex(t *testing.T) {
	dir := t.TempDir()
	p := filepath.Join(dir, "empty.npy")
	if err := os.WriteFile(p, npyBytes(1, "<f8", false, "(0, 4)", nil), 0o600); err != nil {
		t.Fatal(err)
	}
	for _, b := range []Basis{{Count: 1 << 62, Rows: 1, Cols: 4}, {Count: 4, Rows: 1 << 31, Cols: 1 << 31}, {Count: 0, Rows: 1, Cols: 4}} {
		if _, _, err := ReloadNPY(p, b); !errors.Is(err, ErrShape) {
			t.Errorf("%d×%d×%d: %v, want ErrShape", b.Count, b.Rows, b.Cols, err)
		}
	}
	rng := rand.New(rand.NewPCG(37, 38))
	d := make([]complex128, 3*2*3)
	for i := range d {
		d[i] = complex(rng.NormFloat64(), rng.NormFloat64())
	}
	called := false
	_, err := NewComplex(context.Background(), ComplexBasis{Count: 3, Rows: 2, Cols: 3, Data: d}, Options{Reload: func(int, []float64) error { called = true; return nil }})
	if err != nil || called {
		t.Errorf("NewComplex with Reload: error %v, Reload called %v", err, called)
	}
}
