// Package proof writes and re-checks proof files: everything a reader needs
// to confirm a certified interval [Lower, Upper] on d* without searching and
// without trusting the program that found it.
//
// A proof file is a zip archive (format "segre-proof", version 1) with:
//
//   - proof.json: the claims and the small data (see File);
//   - stored.npy: the stored basis, s vectors of m×n (float64, C order),
//     spanning W, or W⊥ when stores_complement is true. The claims are about
//     the subspace these floats span exactly (or its complement), so a
//     re-check does not depend on repeating the orthonormalisation bit for
//     bit on another machine;
//   - certificate.npy (lower argument "sos-level-1"): the mn×mn matrix K of
//     the level-one certificate; (lower argument "sos-level-2") the matrix
//     K of order m·n(n+1)/2 of the level-two certificate, whose number t is
//     proof.json's "certificate_t";
//   - certificate.npy (lower argument "sos-level-1-complex"): the complex
//     Hermitian mn×mn matrix Z of the PPT certificate (complex128);
//   - cells.npy (lower arguments "branch-and-bound" and
//     "branch-and-bound-part"): one row per leaf cell of the branch-and-bound
//     cover: face, guess, then the box's lower and upper corners (absent for
//     a part that has no cells).
//
// A part proof (lower argument "branch-and-bound-part", written by a run of
// one part of a sharded branch-and-bound, net.Shard) proves no Lower by
// itself (its "lower" is 0): its "part" object says which part it is
// (index, count, the level of the initial cells and the ranks of its own)
// and claims a lower bound that holds unless the minimum distance is
// reached in another part (net.CheckPart). Merge checks a complete set of
// parts and joins them into one ordinary branch-and-bound proof.
//
// Check re-verifies every claim: the stored vectors' orthogonality defect;
// when the input basis is given, its SHA-256 and a proven distance θ from
// its span to the stored subspace (subspace.InputDistance), so that the
// interval widened by θ holds for the input as given; Upper as Verify at the
// witness; Lower from its argument (the flattening bound recomputed, the
// certificate verified by sos.Verify or sos.VerifyLevelTwo, the two-copy
// eigenvalue bound recomputed (lower argument "two-copy", no member of its
// own), or the cover checked by net.CheckCover). Each recomputed bound must be at least as good as the
// claim. The writer claims its own recomputation weakened by a relative
// margin (1e-9): on another machine the same sums may round differently in
// their last bits (gonum's kernels differ between architectures), and the
// margin keeps an honest claim confirmable there.
package proof

import (
	"archive/zip"
	"bytes"
	"context"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"slices"

	"github.com/segre-lab/segre/internal/accurate"
	"github.com/segre-lab/segre/net"
	"github.com/segre-lab/segre/rankone"
	"github.com/segre-lab/segre/sos"
	"github.com/segre-lab/segre/subspace"
)

// Errors.
var (
	// ErrFormat: the file is not a proof file of a version this package reads.
	ErrFormat = errors.New("proof: not a readable proof file")
	// ErrClaim: a claim of the proof does not hold (the message names it).
	ErrClaim = errors.New("proof: a claim does not hold")
	// ErrInput: the input basis given to Check cannot be compared with the
	// proof (another shape, unreadable data).
	ErrInput = errors.New("proof: the input basis does not fit the proof")
	// ErrParts: the part proofs given to Merge do not make one whole (a part
	// missing or repeated, parts of different inputs, stored bases or
	// partitions, a proof that is not a part; the message names it).
	ErrParts = errors.New("proof: the parts do not make a whole")
)

// The arguments behind Lower.
const (
	ArgNone       = "none"
	ArgFlattening = "flattening"
	ArgSOS1       = "sos-level-1"
	ArgSOS2       = "sos-level-2"
	// ArgSOS1Complex is the complex level one (PPT relaxation): the
	// Hermitian certificate Z of sos.VerifyComplex in certificate.npy
	// (complex128, mn×mn).
	ArgSOS1Complex = "sos-level-1-complex"
	ArgBranch      = "branch-and-bound"
	ArgBranchPart  = "branch-and-bound-part"
	// ArgTwoCopy is the two-copy eigenvalue bound (sos.EigenBound),
	// recomputed from the stored basis at check time (real only).
	ArgTwoCopy = "two-copy"
)

// Margin is the relative amount by which a writer weakens its claims (see
// the package doc).
const Margin = 1e-9

// maxCoverD is the largest cover dimension Read accepts (branch-and-bound
// refuses sides above 20; the bound keeps a hostile file from sizing
// arrays by it).
const maxCoverD = 64

// maxLevelTwoOrder is the largest level-two certificate order Read accepts
// (sos.VerifyLevelTwo's limit).
const maxLevelTwoOrder = 4000

// levelTwoOrder is the order m·n(n+1)/2 of a level-two certificate of an
// m×n subspace.
// It is −1 when the sizes are too large to matter (then refused).
func levelTwoOrder(m, n int) int {
	if m <= 0 || n <= 0 || m > maxLevelTwoOrder || n > maxLevelTwoOrder {
		return -1
	}
	return m * n * (n + 1) / 2
}

// File is proof.json.
type File struct {
	Format           string     `json:"format"`
	Version          int        `json:"version"`
	InputSHA256      string     `json:"input_sha256"` // hex; empty when the input was not a file
	Field            string     `json:"field"`
	Rows             int        `json:"rows"`
	Cols             int        `json:"cols"`
	StoredCount      int        `json:"stored_count"`
	StoresComplement bool       `json:"stores_complement"`
	X                []float64  `json:"x"`
	Y                []float64  `json:"y"`
	Upper            float64    `json:"upper"`
	Lower            float64    `json:"lower"`
	LowerArgument    string     `json:"lower_argument"`
	CoverD           int        `json:"cover_d,omitempty"`
	CoverOnX         bool       `json:"cover_on_x,omitempty"`
	Part             *PartClaim `json:"part,omitempty"`          // ArgBranchPart only
	CertificateT     float64    `json:"certificate_t,omitempty"` // ArgSOS2 only
}

// PartClaim is the "part" object of a part proof (ArgBranchPart).
type PartClaim struct {
	Index int `json:"index"` // part Index of Count
	Count int `json:"count"`
	// Level and InitialCells are net.Part's Level and Roots: the bisection
	// level of the partition's initial cells and the ranks of this part's.
	Level        int   `json:"level"`
	InitialCells []int `json:"initial_cells"`
	// Lower is the claim: d* ≥ Lower, unless the minimum distance is reached
	// only in other parts (net.CheckPart's level, as a distance, weakened by
	// Margin).
	Lower float64 `json:"lower"`
}

// Proof is a proof file in memory.
type Proof struct {
	File        File
	Stored      []float64 // StoredCount × Rows × Cols
	Certificate []float64 // (Rows·Cols)² for ArgSOS1, (Rows·Cols(Cols+1)/2)² for ArgSOS2
	// ComplexCertificate is the Hermitian Z of ArgSOS1Complex ((mn)² for
	// the complex shape m = Rows/2, n = Cols/2).
	ComplexCertificate []complex128
	Cover              *net.Cover
}

// Evidence is what a writer has: the subspace, the witness, and the
// arguments it can make for Lower (any of them may be nil).
type Evidence struct {
	W           *subspace.Subspace
	InputSHA256 string
	X, Y        []float64
	Certificate *sos.Certificate
	LevelTwo    *sos.LevelTwoCertificate
	Cover       *net.Cover
	// ComplexCertificate is the PPT certificate of a complex subspace
	// (sos.Bound.KeepComplex).
	ComplexCertificate *sos.ComplexCertificate
	// TwoCopy asks Build to consider the two-copy eigenvalue bound
	// (sos.EigenBound, recomputed like the flattening: it needs no data
	// beyond the stored basis) of a real subspace.
	TwoCopy bool
}

// Build makes a proof from the evidence: it recomputes every bound as Check
// will (so it claims nothing it has not re-proved), keeps the argument with
// the best Lower, and weakens both claims by Margin.
//
// For a complex subspace (field "complex") the stored basis is W” (2m×2n
// real matrices of the form [[a, b], [b, −a]], see subspace.NewComplex),
// the witness is in real coordinates, and the claims are about the complex
// distance: Upper from the complex residual (rankone.VerifyComplex),
// Lower from the PPT certificate directly, or from a bound on the
// realified d” (flattening, branch-and-bound, level two of W”) through
// d² = 2d”² − 1 (rankone.ComplexLower). Sharded proofs are real only.
func Build(ctx context.Context, ev Evidence) (*Proof, error) {
	w := ev.W
	cplx := w.Field() == subspace.Complex
	if cplx && ev.Cover != nil && ev.Cover.Part.Count > 0 {
		return nil, fmt.Errorf("proof: sharded proofs of complex subspaces are not supported")
	}
	st := w.Stored()
	stored := make([]float64, 0, st.Count()*w.Rows()*w.Cols())
	for t := 0; t < st.Count(); t++ {
		stored = append(stored, st.Vector(t, nil)...)
	}
	p := &Proof{File: File{Format: "segre-proof", Version: 1, InputSHA256: ev.InputSHA256, Field: fieldName(cplx),
		Rows: w.Rows(), Cols: w.Cols(), StoredCount: st.Count(), StoresComplement: st.Complement(),
		X: append([]float64(nil), ev.X...), Y: append([]float64(nil), ev.Y...), LowerArgument: ArgNone},
		Stored: stored}
	// Recompute on the subspace rebuilt from the stored floats, as a reader will.
	rw, err := rebuild(ctx, p.File, stored, w.MemoryLimit())
	if err != nil {
		return nil, err
	}
	up, err := upperAt(rw, p.File.X, p.File.Y)
	if err != nil {
		return nil, err
	}
	p.File.Upper = math.Min(1, accurate.Up(up*(1+Margin)))
	flatH, flatLo := rankone.FlatteningBound(ctx, rw) // also Λ₀ of the cover check
	flatLo = inField(rw, flatLo)
	if ev.Cover != nil && ev.Cover.Part.Count > 0 {
		return buildPart(ctx, p, rw, ev.Cover, flatH)
	}
	best, arg := 0.0, ArgNone
	if flatLo > best {
		best, arg = flatLo, ArgFlattening
	}
	if ev.Certificate != nil && !cplx {
		if hb, err := sos.Verify(rw, *ev.Certificate); err == nil {
			if lo := rankone.DistanceLower(hb); lo > best {
				best, arg = lo, ArgSOS1
				p.Certificate = append([]float64(nil), ev.Certificate.K...)
			}
		}
	}
	if ev.ComplexCertificate != nil && cplx {
		if hb, err := sos.VerifyComplex(rw, *ev.ComplexCertificate); err == nil {
			if lo := rankone.DistanceLower(hb); lo > best {
				best, arg = lo, ArgSOS1Complex
				p.ComplexCertificate = append([]complex128(nil), ev.ComplexCertificate.Z...)
			}
		}
	}
	if ev.Cover != nil && len(ev.Cover.Cells) > 0 {
		if hu, err := net.CheckCover(ctx, rw, ev.Cover, math.Min(1, flatH)); err == nil {
			if lo := inField(rw, rankone.DistanceLower(hu)); lo > best {
				best, arg = lo, ArgBranch
				p.Cover = ev.Cover
				p.File.CoverD, p.File.CoverOnX = ev.Cover.D, ev.Cover.OnX
			}
		}
	}
	if ev.TwoCopy && !cplx {
		if hb, err := sos.EigenBound(ctx, rw); err == nil {
			if lo := rankone.DistanceLower(hb); lo > best {
				best, arg = lo, ArgTwoCopy
			}
		}
	}
	if ev.LevelTwo != nil {
		if hb, err := sos.VerifyLevelTwo(rw, *ev.LevelTwo); err == nil {
			if lo := inField(rw, rankone.DistanceLower(hb)); lo > best {
				best, arg = lo, ArgSOS2
				p.Certificate = append([]float64(nil), ev.LevelTwo.K...)
				p.File.CertificateT = ev.LevelTwo.T
			}
		}
	}
	if arg != ArgSOS1 && arg != ArgSOS2 {
		p.Certificate = nil
	}
	if arg != ArgSOS2 {
		p.File.CertificateT = 0
	}
	if arg != ArgSOS1Complex {
		p.ComplexCertificate = nil
	}
	if arg != ArgBranch {
		p.Cover = nil
		p.File.CoverD, p.File.CoverOnX = 0, false
	}
	p.File.LowerArgument = arg
	p.File.Lower = math.Max(0, accurate.Down(best*(1-Margin)))
	if ctx.Err() != nil {
		return nil, ctx.Err()
	}
	return p, nil
}

// fieldName is File.Field for a subspace's field.
func fieldName(cplx bool) string {
	if cplx {
		return "complex"
	}
	return "real"
}

// rebuild makes the subspace a proof is about from its stored floats:
// subspace.FromStored, or FromStoredComplex (which checks the W” form)
// for field "complex", with the complex shape Rows/2 × Cols/2.
func rebuild(ctx context.Context, f File, stored []float64, limit int64) (*subspace.Subspace, error) {
	opt := subspace.Options{MaxBytes: limit}
	switch f.Field {
	case "real":
		return subspace.FromStored(ctx, stored, f.StoredCount, f.Rows, f.Cols, f.StoresComplement, opt)
	case "complex":
		if f.StoresComplement || f.Rows%2 != 0 || f.Cols%2 != 0 {
			return nil, fmt.Errorf("%w: a complex proof stores W'' of even shape, not %d×%d (complement %v)", ErrFormat, f.Rows, f.Cols, f.StoresComplement)
		}
		return subspace.FromStoredComplex(ctx, stored, f.StoredCount, f.Rows/2, f.Cols/2, opt)
	}
	return nil, fmt.Errorf("%w: field %q", ErrFormat, f.Field)
}

// upperAt is the certified Upper of a witness: Verify, or for a complex
// subspace the complex distance (VerifyComplex).
func upperAt(w *subspace.Subspace, x, y []float64) (float64, error) {
	if w.Field() == subspace.Complex {
		return rankone.VerifyComplex(w, x, y)
	}
	return rankone.Verify(w, x, y)
}

// inField turns a Lower on the stored subspace's d (d” of W” for a
// complex one) into a Lower on the claim's distance (the complex d, by
// rankone.ComplexLower).
func inField(w *subspace.Subspace, lo float64) float64 {
	if w.Field() == subspace.Complex {
		return rankone.ComplexLower(lo)
	}
	return lo
}

// buildPart finishes a part proof: the part's level recomputed by
// net.CheckPart from lambda0 (the flattening bound), claimed as a distance
// weakened by Margin; Lower is 0 (a part proves no Lower by itself).
func buildPart(ctx context.Context, p *Proof, rw *subspace.Subspace, cv *net.Cover, lambda0 float64) (*Proof, error) {
	hu, err := net.CheckPart(ctx, rw, cv, math.Min(1, lambda0))
	if err != nil {
		return nil, err
	}
	p.Cover = cv
	p.File.CoverD, p.File.CoverOnX = cv.D, cv.OnX
	p.File.LowerArgument = ArgBranchPart
	p.File.Part = &PartClaim{Index: cv.Part.Index, Count: cv.Part.Count, Level: cv.Part.Level,
		InitialCells: append([]int{}, cv.Part.Roots...),
		Lower:        math.Max(0, accurate.Down(rankone.DistanceLower(hu)*(1-Margin)))}
	return p, nil
}

// Confirmed is what Check proved.
type Confirmed struct {
	// Lower and Upper are the claims, confirmed for the stored subspace.
	Lower, Upper float64
	// Recomputed are the bounds the check itself proved (at least as good).
	RecomputedLower, RecomputedUpper float64
	// InputChecked reports that an input basis was given and matched; then
	// InputDistance is the proven θ and InputLower, InputUpper the interval
	// for the input's span, or InputNote says why it holds for the stored
	// basis only.
	InputChecked           bool
	HashChecked            bool // the input\'s SHA-256 matched the proof\'s
	InputDistance          float64
	InputLower, InputUpper float64
	InputNote              string
	Argument               string
	OrthogonalityBound     float64
	// Part is the confirmed claim of a part proof (nil for a whole proof),
	// and RecomputedPartLower the part's lower bound the check itself
	// proved (at least Part.Lower). Lower is then 0.
	Part                *PartClaim
	RecomputedPartLower float64
}

// Check re-verifies p (see the package doc). input, when non-nil, is the
// basis the proof is about and inputBytes the file's bytes (for its
// SHA-256; nil to skip the hash when the proof has none). A failed claim is
// an error wrapping ErrClaim naming it.
func Check(ctx context.Context, p *Proof, input *subspace.Basis, inputBytes []byte) (Confirmed, error) {
	if input == nil {
		return CheckInput(ctx, p, nil, inputBytes)
	}
	return CheckInput(ctx, p, &subspace.Input{Field: subspace.Real, Real: *input}, inputBytes)
}

// CheckInput is Check with the input as read by subspace.ReadInput or
// ParseInput: real or complex. A complex proof accepts complex data, or
// real data (treated over C); a real proof needs real data.
func CheckInput(ctx context.Context, p *Proof, in *subspace.Input, inputBytes []byte) (Confirmed, error) {
	f := p.File
	var c Confirmed
	if f.Format != "segre-proof" || f.Version != 1 || (f.Field != "real" && f.Field != "complex") {
		return c, fmt.Errorf("%w: format %q version %d field %q", ErrFormat, f.Format, f.Version, f.Field)
	}
	cplx := f.Field == "complex"
	w, err := rebuild(ctx, f, p.Stored, 0)
	if err != nil {
		return c, fmt.Errorf("%w: stored basis: %v", ErrClaim, err)
	}
	c.OrthogonalityBound = w.OrthogonalityBound()
	if in != nil {
		if !cplx && in.Field != subspace.Real {
			return c, fmt.Errorf("%w: complex data for a proof about a real subspace", ErrInput)
		}
		if inputBytes != nil && f.InputSHA256 != "" {
			sum := sha256.Sum256(inputBytes)
			if got := hex.EncodeToString(sum[:]); got != f.InputSHA256 {
				return c, fmt.Errorf("%w: the input's SHA-256 is %s, the proof is about %s", ErrClaim, got, f.InputSHA256)
			}
			c.HashChecked = true
		}
		var th float64
		if cplx {
			cb := in.AsComplex()
			if cb.Rows != f.Rows/2 || cb.Cols != f.Cols/2 {
				return c, fmt.Errorf("%w: the input holds %d×%d matrices, the proof is about %d×%d complex ones", ErrInput, cb.Rows, cb.Cols, f.Rows/2, f.Cols/2)
			}
			th, err = subspace.ComplexInputDistance(ctx, cb, w)
		} else {
			if in.Real.Rows != f.Rows || in.Real.Cols != f.Cols {
				return c, fmt.Errorf("%w: the input holds %d×%d matrices, the proof is about %d×%d", ErrInput, in.Real.Rows, in.Real.Cols, f.Rows, f.Cols)
			}
			th, err = subspace.InputDistance(ctx, in.Real, w)
		}
		c.InputChecked = true
		switch {
		case err == nil:
			c.InputDistance = th
		case errors.Is(err, subspace.ErrDependent) || errors.Is(err, subspace.ErrUnproven) || errors.Is(err, subspace.ErrTooLarge):
			c.InputNote = err.Error()
		default:
			return c, fmt.Errorf("%w: %v", ErrInput, err)
		}
	}
	up, err := upperAt(w, f.X, f.Y)
	if err != nil {
		return c, fmt.Errorf("%w: witness: %v", ErrClaim, err)
	}
	if !(up <= f.Upper) {
		return c, fmt.Errorf("%w: Upper: the witness is at distance ≤ %v, not ≤ %v as claimed", ErrClaim, up, f.Upper)
	}
	var lo float64
	switch f.LowerArgument {
	case ArgNone:
	case ArgFlattening:
		_, lo = rankone.FlatteningBound(ctx, w)
		lo = inField(w, lo)
	case ArgTwoCopy:
		if cplx {
			return c, fmt.Errorf("%w: the two-copy argument is real only", ErrFormat)
		}
		hb, err := sos.EigenBound(ctx, w)
		if err != nil {
			return c, fmt.Errorf("%w: two-copy bound: %v", ErrClaim, err)
		}
		lo = rankone.DistanceLower(hb)
	case ArgSOS1Complex:
		if !cplx {
			return c, fmt.Errorf("%w: a complex certificate in a real proof", ErrFormat)
		}
		m, n := f.Rows/2, f.Cols/2
		hb, err := sos.VerifyComplex(w, sos.ComplexCertificate{M: m, N: n, Z: p.ComplexCertificate})
		if err != nil {
			return c, fmt.Errorf("%w: certificate: %v", ErrClaim, err)
		}
		lo = rankone.DistanceLower(hb)
	case ArgSOS1:
		if cplx {
			return c, fmt.Errorf("%w: a real level-one certificate in a complex proof", ErrFormat)
		}
		L := f.Rows * f.Cols
		if len(p.Certificate) != L*L {
			return c, fmt.Errorf("%w: certificate has %d entries, want %d", ErrClaim, len(p.Certificate), L*L)
		}
		hb, err := sos.Verify(w, sos.Certificate{M: f.Rows, N: f.Cols, K: p.Certificate})
		if err != nil {
			return c, fmt.Errorf("%w: certificate: %v", ErrClaim, err)
		}
		lo = rankone.DistanceLower(hb)
	case ArgSOS2:
		dim := levelTwoOrder(f.Rows, f.Cols)
		if dim <= 0 || len(p.Certificate) != dim*dim {
			return c, fmt.Errorf("%w: level-two certificate has %d entries, want %d", ErrClaim, len(p.Certificate), dim*dim)
		}
		hb, err := sos.VerifyLevelTwo(w, sos.LevelTwoCertificate{M: f.Rows, N: f.Cols, T: f.CertificateT, K: p.Certificate})
		if err != nil {
			return c, fmt.Errorf("%w: level-two certificate: %v", ErrClaim, err)
		}
		lo = inField(w, rankone.DistanceLower(hb))
	case ArgBranch:
		if p.Cover == nil {
			return c, fmt.Errorf("%w: branch-and-bound argument without cells", ErrClaim)
		}
		lam0, _ := rankone.FlatteningBound(ctx, w)
		hu, err := net.CheckCover(ctx, w, p.Cover, math.Min(1, lam0))
		if err != nil {
			return c, fmt.Errorf("%w: cover: %v", ErrClaim, err)
		}
		lo = inField(w, rankone.DistanceLower(hu))
	case ArgBranchPart:
		if cplx {
			return c, fmt.Errorf("%w: sharded proofs are real only", ErrFormat)
		}
		if p.Cover == nil || f.Part == nil {
			return c, fmt.Errorf("%w: part argument without its part or cells", ErrClaim)
		}
		lam0, _ := rankone.FlatteningBound(ctx, w)
		hu, err := net.CheckPart(ctx, w, p.Cover, math.Min(1, lam0))
		if err != nil {
			return c, fmt.Errorf("%w: part %d of %d: %v", ErrClaim, f.Part.Index, f.Part.Count, err)
		}
		plo := rankone.DistanceLower(hu)
		if !(plo >= f.Part.Lower) || f.Part.Lower < 0 {
			return c, fmt.Errorf("%w: part %d of %d: its cells prove d* ≥ %v unless the minimum lies in another part, not ≥ %v as claimed",
				ErrClaim, f.Part.Index, f.Part.Count, plo, f.Part.Lower)
		}
		c.Part, c.RecomputedPartLower = f.Part, plo
	default:
		return c, fmt.Errorf("%w: unknown lower argument %q", ErrFormat, f.LowerArgument)
	}
	if ctx.Err() != nil {
		return c, ctx.Err()
	}
	if !(lo >= f.Lower) || f.Lower > f.Upper || f.Lower < 0 {
		return c, fmt.Errorf("%w: Lower: the %s argument proves d* ≥ %v, not ≥ %v as claimed", ErrClaim, f.LowerArgument, lo, f.Lower)
	}
	c.Lower, c.Upper, c.RecomputedLower, c.RecomputedUpper, c.Argument = f.Lower, f.Upper, lo, up, f.LowerArgument
	if c.InputChecked && c.InputNote == "" {
		c.InputLower, c.InputUpper = rankone.Widen(f.Lower, f.Upper, c.InputDistance)
	}
	return c, nil
}

// SHA256 returns the hex SHA-256 of data (the input file's bytes).
func SHA256(data []byte) string {
	s := sha256.Sum256(data)
	return hex.EncodeToString(s[:])
}

// Write writes p as a zip archive to wr.
func Write(wr io.Writer, p *Proof) error {
	z := zip.NewWriter(wr)
	js, err := json.MarshalIndent(p.File, "", "  ")
	if err != nil {
		return err
	}
	if err := member(z, "proof.json", js); err != nil {
		return err
	}
	var buf bytes.Buffer
	f := p.File
	if err := subspace.WriteNPY(&buf, subspace.Basis{Count: f.StoredCount, Rows: f.Rows, Cols: f.Cols, Data: p.Stored}); err != nil && f.StoredCount > 0 {
		return err
	}
	if err := member(z, "stored.npy", buf.Bytes()); err != nil {
		return err
	}
	if p.Certificate != nil {
		L := f.Rows * f.Cols
		if f.LowerArgument == ArgSOS2 {
			L = levelTwoOrder(f.Rows, f.Cols)
		}
		buf.Reset()
		if err := subspace.WriteNPY(&buf, subspace.Basis{Count: 1, Rows: L, Cols: L, Data: p.Certificate}); err != nil {
			return err
		}
		if err := member(z, "certificate.npy", buf.Bytes()); err != nil {
			return err
		}
	}
	if p.ComplexCertificate != nil {
		L := (f.Rows / 2) * (f.Cols / 2)
		buf.Reset()
		if err := subspace.WriteComplexNPY(&buf, subspace.ComplexBasis{Count: 1, Rows: L, Cols: L, Data: p.ComplexCertificate}); err != nil {
			return err
		}
		if err := member(z, "certificate.npy", buf.Bytes()); err != nil {
			return err
		}
	}
	if p.Cover != nil && len(p.Cover.Cells) > 0 {
		buf.Reset()
		if err := subspace.WriteNPY(&buf, coverArray(p.Cover)); err != nil {
			return err
		}
		if err := member(z, "cells.npy", buf.Bytes()); err != nil {
			return err
		}
	}
	return z.Close()
}

// WriteFile writes p to the file at path atomically: into a temporary file
// in the same folder, synced, then renamed over path, so that a reader (or a
// killed writer) never leaves a half-written proof under that name.
func WriteFile(path string, p *Proof) error {
	tmp, err := os.CreateTemp(filepath.Dir(path), ".proof-*")
	if err != nil {
		return err
	}
	defer os.Remove(tmp.Name())
	if err := Write(tmp, p); err != nil {
		tmp.Close()
		return err
	}
	if err := tmp.Sync(); err != nil {
		tmp.Close()
		return err
	}
	if err := tmp.Close(); err != nil {
		return err
	}
	if err := os.Chmod(tmp.Name(), 0o644); err != nil {
		return err
	}
	return os.Rename(tmp.Name(), path)
}

// ReadFile reads the proof file at path (see Read).
func ReadFile(path string) (*Proof, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	st, err := f.Stat()
	if err != nil {
		return nil, err
	}
	if !st.Mode().IsRegular() {
		return nil, fmt.Errorf("%w: %s is not a regular file", ErrFormat, path)
	}
	return Read(f, st.Size())
}

func member(z *zip.Writer, name string, data []byte) error {
	w, err := z.Create(name)
	if err != nil {
		return err
	}
	_, err = w.Write(data)
	return err
}

// coverArray lays the cells out as one matrix: row c = face, guess, lo…, hi….
func coverArray(c *net.Cover) subspace.Basis {
	k := c.D - 1
	cols := 2 + 2*k
	d := make([]float64, 0, len(c.Cells)*cols)
	for _, cl := range c.Cells {
		d = append(d, float64(cl.Face), cl.Guess)
		d = append(d, cl.Lo...)
		d = append(d, cl.Hi...)
	}
	return subspace.Basis{Count: 1, Rows: len(c.Cells), Cols: cols, Data: d}
}

// Read reads a proof archive of size bytes from ra. Malformed or truncated
// archives and members give an error wrapping ErrFormat, as do members that
// would decompress to more than subspace.DefaultMaxBytes together.
func Read(ra io.ReaderAt, size int64) (*Proof, error) {
	z, err := zip.NewReader(ra, size)
	if err != nil {
		return nil, fmt.Errorf("%w: %v", ErrFormat, err)
	}
	// The members read together may decompress to at most the library's
	// default memory limit (the limit Check rebuilds the basis under);
	// archive/zip refuses a member longer than its declared size.
	var left = uint64(subspace.DefaultMaxBytes)
	get := func(name string) ([]byte, bool, error) {
		for _, f := range z.File {
			if f.Name == name {
				if f.UncompressedSize64 > left {
					return nil, true, fmt.Errorf("%w: member %s (%d bytes) would take the members read past the memory limit of %d bytes", ErrFormat, name, f.UncompressedSize64, subspace.DefaultMaxBytes)
				}
				left -= f.UncompressedSize64
				rc, err := f.Open()
				if err != nil {
					return nil, true, fmt.Errorf("%w: %s: %v", ErrFormat, name, err)
				}
				defer rc.Close()
				b, err := io.ReadAll(rc)
				if err != nil {
					return nil, true, fmt.Errorf("%w: %s: %v", ErrFormat, name, err)
				}
				return b, true, nil
			}
		}
		return nil, false, nil
	}
	has := func(name string) bool {
		return slices.ContainsFunc(z.File, func(f *zip.File) bool { return f.Name == name })
	}
	js, ok, err := get("proof.json")
	if err != nil || !ok {
		return nil, fmt.Errorf("%w: no proof.json (%v)", ErrFormat, err)
	}
	p := &Proof{}
	dec := json.NewDecoder(bytes.NewReader(js))
	dec.DisallowUnknownFields()
	if err := dec.Decode(&p.File); err != nil {
		return nil, fmt.Errorf("%w: proof.json: %v", ErrFormat, err)
	}
	f := p.File
	if f.Rows <= 0 || f.Cols <= 0 || f.StoredCount < 0 {
		return nil, fmt.Errorf("%w: shape %d×%d with %d stored vectors", ErrFormat, f.Rows, f.Cols, f.StoredCount)
	}
	arr := func(name string, rows, cols int) ([]float64, error) {
		b, ok, err := get(name)
		if err != nil {
			return nil, err
		}
		if !ok {
			return nil, fmt.Errorf("%w: missing %s", ErrFormat, name)
		}
		// ReadArray: these arrays are only read (a cover of millions of
		// cells must not be refused for an orthonormalisation it never
		// gets), and cost at most about twice the member's bytes.
		in, err := subspace.ReadArray(b)
		if err != nil {
			return nil, fmt.Errorf("%w: %s: %v", ErrFormat, name, err)
		}
		if in.Field != subspace.Real {
			return nil, fmt.Errorf("%w: %s is not a real array", ErrFormat, name)
		}
		a := in.Real
		if rows >= 0 && a.Count*a.Rows != rows || a.Cols != cols {
			return nil, fmt.Errorf("%w: %s has shape (%d, %d, %d)", ErrFormat, name, a.Count, a.Rows, a.Cols)
		}
		return a.Data, nil
	}
	if f.StoredCount > 0 {
		if p.Stored, err = arr("stored.npy", f.StoredCount*f.Rows, f.Cols); err != nil {
			return nil, err
		}
	}
	if f.Part != nil && f.LowerArgument != ArgBranchPart {
		return nil, fmt.Errorf("%w: a part object in a %q proof", ErrFormat, f.LowerArgument)
	}
	switch f.LowerArgument {
	case ArgSOS1:
		L := f.Rows * f.Cols
		if p.Certificate, err = arr("certificate.npy", L, L); err != nil {
			return nil, err
		}
	case ArgSOS1Complex:
		if f.Field != "complex" || f.Rows%2 != 0 || f.Cols%2 != 0 || f.Rows > 1<<20 || f.Cols > 1<<20 {
			return nil, fmt.Errorf("%w: a complex certificate in a %s proof of %d×%d", ErrFormat, f.Field, f.Rows, f.Cols)
		}
		L := (f.Rows / 2) * (f.Cols / 2)
		b, ok, err := get("certificate.npy")
		if err != nil {
			return nil, err
		}
		if !ok {
			return nil, fmt.Errorf("%w: missing certificate.npy", ErrFormat)
		}
		in, err := subspace.ReadArray(b)
		if err != nil {
			return nil, fmt.Errorf("%w: certificate.npy: %v", ErrFormat, err)
		}
		if in.Field != subspace.Complex || in.Complex.Count != 1 || in.Complex.Rows != L || in.Complex.Cols != L {
			return nil, fmt.Errorf("%w: certificate.npy is not one complex %d×%d matrix", ErrFormat, L, L)
		}
		p.ComplexCertificate = in.Complex.Data
	case ArgSOS2:
		L := levelTwoOrder(f.Rows, f.Cols)
		if L <= 0 || L > maxLevelTwoOrder {
			return nil, fmt.Errorf("%w: level-two certificate of order %d (at most %d)", ErrFormat, L, maxLevelTwoOrder)
		}
		if p.Certificate, err = arr("certificate.npy", L, L); err != nil {
			return nil, err
		}
	case ArgBranch, ArgBranchPart:
		if f.CoverD < 1 || f.CoverD > maxCoverD {
			return nil, fmt.Errorf("%w: cover dimension %d", ErrFormat, f.CoverD)
		}
		if f.LowerArgument == ArgBranchPart && f.Part == nil {
			return nil, fmt.Errorf("%w: a part proof without its part object", ErrFormat)
		}
		k := f.CoverD - 1
		var cells []float64
		if has("cells.npy") || f.Part == nil || len(f.Part.InitialCells) > 0 { // only an empty part has none
			if cells, err = arr("cells.npy", -1, 2+2*k); err != nil {
				return nil, err
			}
		}
		cv := &net.Cover{D: f.CoverD, OnX: f.CoverOnX}
		if pc := f.Part; pc != nil {
			cv.Part = net.Part{Index: pc.Index, Count: pc.Count, Level: pc.Level, Roots: append([]int{}, pc.InitialCells...)}
		}
		for r := 0; r+2+2*k <= len(cells); r += 2 + 2*k {
			row := cells[r : r+2+2*k]
			face := int(row[0])
			if float64(face) != row[0] {
				return nil, fmt.Errorf("%w: cells.npy: face %v is not an integer", ErrFormat, row[0])
			}
			cv.Cells = append(cv.Cells, net.CoverCell{Face: face, Guess: row[1],
				Lo: append([]float64(nil), row[2:2+k]...), Hi: append([]float64(nil), row[2+k:]...)})
		}
		p.Cover = cv
	}
	return p, nil
}
