package proof

import (
	"archive/zip"
	"bytes"
	"errors"
	"strings"
	"testing"

	"github.com/segre-lab/segre/subspace"
)

// A member whose declared size would take the members read past the memory
// limit (subspace.DefaultMaxBytes) is refused before it is decompressed.
func TestReadRefusesMembersPastTheLimit(t *testing.T) {
	archive := func(size uint64) []byte {
		var buf bytes.Buffer
		z := zip.NewWriter(&buf)
		w, err := z.CreateRaw(&zip.FileHeader{Name: "proof.json", Method: zip.Store, CompressedSize64: 2, UncompressedSize64: size})
		if err != nil {
			t.Fatal(err)
		}
		w.Write([]byte("{}"))
		if err := z.Close(); err != nil {
			t.Fatal(err)
		}
		return buf.Bytes()
	}
	limit := uint64(subspace.DefaultMaxBytes)
	b := archive(limit + 1)
	_, err := Read(bytes.NewReader(b), int64(len(b)))
	if !errors.Is(err, ErrFormat) || !strings.Contains(err.Error(), "memory limit") {
		t.Fatalf("got %v, want the memory-limit refusal", err)
	}
}
