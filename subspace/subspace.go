// Package subspace holds a linear subspace W of real m×n matrices, built
// from any spanning set, and answers the contractions that every rank-one
// search needs.
//
// Conventions. vec is row-major: vec(M)[i·n+j] = M[i][j], so vec(x yᵀ) = x⊗y.
// For x ∈ R^m, y ∈ R^n the value is h(x, y) = ‖P_W(x⊗y)‖² and the squared
// distance is d²(x, y) = ‖x⊗y − P_W(x⊗y)‖²; for unit x, y, h + d² = 1.
// Value and Residual are these homogeneous forms (degree four in (x, y));
// callers that want h and d² pass unit vectors.
//
// The stored basis. New orthonormalises the input by Householder QR with
// column pivoting (blocked, its pivots chosen a block at a time from a
// random sketch and checked against the rank rule of Options.RankTol; see
// qrcp.go) on every core, and keeps whichever of W and W⊥ has the smaller
// dimension, as s floating-point vectors of length mn. The result is the
// same, bit for bit, for any GOMAXPROCS. Every contraction reads only that
// storage. The certified bounds (ResidualBound, PartialTraces) are proven for
// the subspace the stored vectors span exactly (W itself, or the orthogonal
// complement of the stored span); BackwardError says how far that stored
// subspace is from the span of the input.
//
// Contracts. Inputs are never modified. A Subspace is immutable after New and
// safe for concurrent use. Bad user data gives an error wrapping one of the
// Err values below; a vector or matrix of the wrong size passed to a
// contraction is a programmer error and panics with a "subspace:" message.
package subspace

import (
	"context"
	"errors"
	"fmt"
	"math"

	"gonum.org/v1/gonum/blas/blas64"

	"github.com/segre-lab/segre/internal/accurate"
)

// Errors for bad user data, usable with errors.Is.
var (
	ErrEmpty     = errors.New("subspace: no matrices")
	ErrShape     = errors.New("subspace: shapes do not agree")
	ErrNotFinite = errors.New("subspace: entry is NaN or infinite")
	ErrZero      = errors.New("subspace: every matrix is zero")
	ErrTooLarge  = errors.New("subspace: input too large for the memory limit")
	ErrFormat    = errors.New("subspace: malformed file")
	ErrOption    = errors.New("subspace: invalid option")
)

// DefaultMaxBytes is the working-storage limit used when Options.MaxBytes is 0.
const DefaultMaxBytes int64 = 4 << 30

// Basis is r real m×n matrices stored contiguously:
// Data[(t·Rows + i)·Cols + j] is entry (i, j) of matrix t.
type Basis struct {
	Count, Rows, Cols int
	Data              []float64
}

// Matrix returns a copy of matrix t of b as a row-major slice.
func (b Basis) Matrix(t int) []float64 {
	L := b.Rows * b.Cols
	return append([]float64(nil), b.Data[t*L:(t+1)*L]...)
}

// Options configures New. The zero value gives the defaults.
type Options struct {
	// RankTol is the rank tolerance. Every input matrix is first scaled to unit
	// Frobenius norm; pivoted QR then stops when every remaining matrix lies
	// within Frobenius distance RankTol of the span of those already chosen,
	// each of which was farther than RankTol from the span of those chosen
	// before it (distances as computed in the factorisation).
	// Zero means max(m·n, r)·2^-52, the usual rule for numerical rank
	// (common practice: NumPy's matrix_rank and LAPACK-based codes use
	// σ_max·max(M, N)·eps). RankTol must be in [0, 1).
	RankTol float64
	// MaxBytes limits the working storage New may allocate; inputs that
	// would need more are refused with ErrTooLarge before any allocation.
	// The Subspace keeps it as its MemoryLimit: derived structures (the
	// partial traces, the searches' block forms and frontiers) that would
	// exceed it are not built. Zero means DefaultMaxBytes; negative is
	// invalid.
	MaxBytes int64
	// Progress, if set, is called by the goroutine running New with the
	// estimated fraction of New's work done so far, in [0, 1], at most every
	// 200 ms, and with 1 when New succeeds. Nil means no reports.
	Progress func(fraction float64)
	// Reload, if set, lets New work in the caller's array: b.Data is
	// normalised and factored where it is, so New holds no copy of the
	// input (a third of its peak memory otherwise), and afterwards b.Data
	// holds the stored basis or meaningless numbers (do not use b again;
	// the Subspace may keep b.Data as its storage). New then reads the
	// input matrices again through Reload, matrix t (as stored in b.Data
	// before, m·n entries) into dst, for the reconstruction error it
	// reports; an error from Reload ends New with that error. Reload must
	// give the numbers b.Data held (ReloadNPY's function checks them). Nil
	// means New copies the input and leaves b.Data as it was.
	Reload func(t int, dst []float64) error

	keepW bool // store W even when W⊥ is smaller (the complex path needs W)
}

// Subspace is a linear subspace of m×n real matrices with its stored basis.
type Subspace struct {
	m, n, k int
	comp    bool      // stored vectors span W⊥ rather than W
	s       int       // number of stored vectors
	q       []float64 // s×(m·n), row t is stored vector t
	tol     float64
	limit   int64 // Options.MaxBytes (or its default)

	inputs, zeros int
	inPlace       bool    // built with Options.Reload: the caller's array holds other numbers now
	recon         float64 // ‖B̂Π − QR‖_F / ‖B̂‖_F for the unit-normalised input B̂
	orthFl        float64 // ‖SSᵀ − I‖_F as computed
	eta           float64 // proven bound on ‖SSᵀ − I‖₂
	sumSq         float64 // proven upper bound on ‖S‖_F² (accurate.SumSqUpper of the stored rows)
	rankKept      float64 // |R_kk| of the last pivot kept by the rank decision
	rankLeft      float64 // norm of the first column left out (0 when none)

	cx *complexPart // non-nil for a subspace of complex matrices (see NewComplex)
}

// MemoryLimit returns the working-storage limit in bytes given to New
// (Options.MaxBytes, or DefaultMaxBytes). Methods and strategies that
// would build a structure larger than this leave it out (see each one).
func (w *Subspace) MemoryLimit() int64 { return w.limit }

// Rows returns m. Cols returns n. Dim returns the numerical dimension k of W.
func (w *Subspace) Rows() int { return w.m }

// Cols returns n, the number of columns of the matrices.
func (w *Subspace) Cols() int { return w.n }

// Dim returns the numerical dimension k of W.
func (w *Subspace) Dim() int { return w.k }

// RankTol returns the rank tolerance that was used.
func (w *Subspace) RankTol() float64 { return w.tol }

// Inputs returns how many matrices were given and how many of them were
// exactly zero (and so contributed nothing).
func (w *Subspace) Inputs() (given, zero int) { return w.inputs, w.zeros }

// StoresComplement reports whether the stored vectors span W⊥ (used when
// dim W > mn/2). It is informational; no contraction depends on it.
func (w *Subspace) StoresComplement() bool { return w.comp }

// BackwardError returns the relative reconstruction error
// ‖B̂Π − QR‖_F/‖B̂‖_F of the pivoted QR of the unit-normalised input B̂ (it is
// at most about RankTol·√r plus rounding), and the computed ‖SSᵀ − I‖_F of the
// stored vectors S.
func (w *Subspace) BackwardError() (reconstruction, orthogonality float64) {
	return w.recon, w.orthFl
}

// RankGap describes the rank decision of the pivoted QR of the
// unit-normalised inputs: the size |R_kk| of the last pivot kept and the
// norm of the first column left out (0 when every nonzero input was kept;
// it was at most RankTol). A wide gap (kept ≫ left) means a clear decision.
// These are floating-point estimates, not certified.
func (w *Subspace) RankGap() (kept, left float64) { return w.rankKept, w.rankLeft }

// OrthogonalityBound returns η, a proven upper bound on ‖SSᵀ − I‖₂ for the
// stored vectors S, rounding of its computation included. Certified bounds
// inflate by η where orthonormality is used.
func (w *Subspace) OrthogonalityBound() float64 { return w.eta }

// New builds the subspace spanned by the matrices of b. b is not modified,
// unless Options.Reload is set: then b.Data is New's work space and holds
// the stored basis or meaningless numbers afterwards, also when New
// fails after validating (an error from the normalisation or later,
// cancellation included), and the Subspace proves its input span only
// through InputDistanceReload.
// It runs on min(GOMAXPROCS, 8) goroutines; the result does not depend on
// their number. The factorisation checks ctx between its steps and inside
// its products (every few milliseconds for inputs of tens of megabytes)
// and returns ctx.Err(), wrapped, when it is done first; nothing is kept
// then. Options.Progress, if set, hears how far it has got.
//
// It runs three steps: validate (options, shapes, memory, finiteness),
// normalise (unit-norm copies of the nonzero matrices, or with Reload the
// matrices scaled where they are) and factor (pivoted QR, the stored basis
// and its checks).
func New(ctx context.Context, b Basis, opt Options) (*Subspace, error) {
	tol, limit, err := validate(b, opt)
	if err != nil {
		return nil, err
	}
	in, err := normalise(b, opt.Reload != nil)
	if err != nil {
		return nil, err
	}
	return factor(ctx, b, in, tol, limit, opt)
}

// validate checks opt and b in the order of the errors New documents
// (options, count and shape, address-space overflow, data length, memory
// limit, finiteness) and returns the rank tolerance and memory limit with
// the defaults of Options applied.
func validate(b Basis, opt Options) (tol float64, limit int64, err error) {
	if opt.RankTol < 0 || opt.RankTol >= 1 || math.IsNaN(opt.RankTol) {
		return 0, 0, fmt.Errorf("%w: RankTol = %v, want 0 ≤ RankTol < 1", ErrOption, opt.RankTol)
	}
	if opt.MaxBytes < 0 {
		return 0, 0, fmt.Errorf("%w: MaxBytes = %d is negative", ErrOption, opt.MaxBytes)
	}
	limit = opt.MaxBytes
	if limit == 0 {
		limit = DefaultMaxBytes
	}
	r, m, n := b.Count, b.Rows, b.Cols
	if r == 0 {
		return 0, 0, ErrEmpty
	}
	if r < 0 || m <= 0 || n <= 0 {
		return 0, 0, fmt.Errorf("%w: %d matrices of %d×%d", ErrShape, r, m, n)
	}
	L, ok := mulOK(m, n)
	total, ok2 := mulOK(L, r)
	if !ok || !ok2 {
		return 0, 0, fmt.Errorf("%w: %d matrices of %d×%d overflow the address space", ErrTooLarge, r, m, n)
	}
	if len(b.Data) != total {
		return 0, 0, fmt.Errorf("%w: %d matrices of %d×%d need %d entries, have %d", ErrShape, r, m, n, total, len(b.Data))
	}
	if need := workBytes(r, L); tooLarge(need, limit) {
		return 0, 0, fmt.Errorf("%w: %d matrices of %d×%d need about %d bytes of working storage, limit %d", ErrTooLarge, r, m, n, need, limit)
	}
	for idx, v := range b.Data {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			t, rem := idx/L, idx%L
			return 0, 0, fmt.Errorf("%w: matrix %d, entry (%d, %d) is %v", ErrNotFinite, t, rem/n, rem%n, v)
		}
	}
	tol = opt.RankTol
	if tol == 0 {
		tol = float64(max(L, r)) * 0x1p-52
		if tol >= 0.5 {
			tol = 0.5
		}
	}
	return tol, limit, nil
}

// normalised is the validated input with its zero matrices dropped and
// every other matrix scaled to unit Frobenius norm: copied column c (row c
// of a) is Ldexp(B_t, shift[c])·scale[c] for t = orig[c].
type normalised struct {
	a     []float64 // the copied columns, rr rows of length L
	orig  []int     // orig[c] = input index of copied column c
	scale []float64
	shift []int
	zeros int // the number of exactly zero input matrices
}

// normalise copies the nonzero matrices of a validated b, each scaled to
// unit Frobenius norm; inPlace, it moves them to the front of b.Data
// instead (matrix t to place c ≤ t, in order, so that each move reads a
// matrix not yet overwritten) and scales them there. It returns an error
// wrapping ErrZero when every matrix is zero.
func normalise(b Basis, inPlace bool) (*normalised, error) {
	r, m, n := b.Count, b.Rows, b.Cols
	L := m * n
	in := &normalised{}
	if inPlace {
		in.a = b.Data[: 0 : L*r]
	} else {
		in.a = make([]float64, 0, L*r)
	}
	for t := 0; t < r; t++ {
		src := b.Data[t*L : (t+1)*L]
		nrm := blas64.Nrm2(blas64.Vector{N: L, Data: src, Inc: 1})
		if nrm == 0 {
			in.zeros++
			continue
		}
		in.a = append(in.a, src...) // in place: a move within b.Data (copy allows the overlap)
		f, sh := unitScale(in.a[len(in.a)-L:], nrm)
		in.scale = append(in.scale, f)
		in.shift = append(in.shift, sh)
		in.orig = append(in.orig, t)
	}
	if len(in.orig) == 0 {
		return nil, fmt.Errorf("%w: all %d matrices of %d×%d", ErrZero, r, m, n)
	}
	return in, nil
}

// unitScale scales row, a nonzero vector of Euclidean norm nrm (as
// computed by Nrm2), to unit norm in place, and returns the factor f and
// exponent shift sh it used: row ← Ldexp(row, sh)·f.
func unitScale(row []float64, nrm float64) (f float64, sh int) {
	if math.IsInf(1/nrm, 0) || math.IsInf(nrm, 0) {
		// Out of range (subnormal or huge entries): first bring the
		// largest entry into [1, 2) by an exponent shift (math.Ldexp, so
		// the factor itself never overflows, as 2^1030 would for a
		// subnormal maximum), then normalise.
		_, e := math.Frexp(accurate.MaxAbs(row))
		for i := range row {
			row[i] = math.Ldexp(row[i], 1-e)
		}
		nrm = blas64.Nrm2(blas64.Vector{N: len(row), Data: row, Inc: 1})
		f2 := 1 / nrm
		for i := range row {
			row[i] *= f2
		}
		return f2, 1 - e
	}
	f = 1 / nrm
	for i := range row {
		row[i] *= f
	}
	return f, 0
}

// factor orthonormalises the normalised input by pivoted QR (qrcp.go)
// and builds the Subspace: it keeps the smaller of W (the first k columns
// of Q) and W⊥ (the last L−k, built from the reflectors first), forms the
// first k columns of Q in place, and records the reconstruction error and
// the orthogonality of the stored vectors. It consumes in.a. ctx is
// checked between the steps and inside them; when it is done the result
// is discarded and its error returned, wrapped.
//
// What is certified, and why the factorisation itself need not be. Every
// certified number about the stored basis is computed afterwards from the
// stored floats alone: η (orthogonality, a proven bound on ‖SSᵀ − I‖₂ from
// their Gram matrix with its rounding counted) and the bound on ‖S‖_F²
// (accurate.SumSqUpper). The contractions' certified bounds (ResidualBound,
// the bound builders through Stored) hold for the subspace these floats
// span, whatever arithmetic produced them; InputDistance proves the
// distance to the input's span from the stored floats and the input again.
// So the factorisation's products may round in any order, use fused
// multiply-adds and run on any number of workers (their result is the same
// for every number of workers, see gemm.go). What the factorisation does
// promise is the rank rule of Options.RankTol (kept exactly, see qrcp.go)
// and the reconstruction error it reports, which is computed afresh from
// the caller's data and the stored Q and R.
//
// Memory (issue 16). The caller's data are only read, unless
// Options.Reload is set: then the normalised array is the caller's own
// (normalise moved and scaled the matrices there), no copy is made, and
// the reconstruction reads the input again, a matrix at a time, through
// Reload. Their one copy (or the caller's array), the
// normalised rr×L array, is factored in place and turned into Q in place
// (as LAPACK's xORGQR does), and when W is stored its first k rows are
// the stored vectors, without a copy. Forming Q overwrites the first k
// columns of R, which the reconstruction needs afterwards: they are saved
// first (saveR, about k²/2 words, the one other large array; R's other
// columns stay in the array's rows k..rr−1). The reconstruction's chunk
// and the Gram matrix's panels share one buffer (a few percent of the
// copy), the block products share theirs, and the Gram matrix is never
// whole (orthogonality). So New holds at most about rr·L + k²/2 words
// beyond the caller's data, plus the stored complement when W⊥ is stored;
// workBytes bounds it from above. When W is stored and the rank decision
// left columns out (rr > k), the stored vectors keep the whole array
// alive (its last rr − k rows unused): copying them out would cost k·L
// more words at the peak.
func factor(ctx context.Context, b Basis, in *normalised, tol float64, limit int64, opt Options) (*Subspace, error) {
	m, n := b.Rows, b.Cols
	L := m * n
	rr := len(in.orig)
	a := in.a
	in.a = nil // a is the only reference, so that it can be released below
	stop := func() bool { return ctx.Err() != nil }
	cancelled := func() (*Subspace, error) { return nil, fmt.Errorf("subspace: %w", ctx.Err()) }
	g := newGemmPool(max(rr, L))
	pr := newProgress(opt.Progress, newWork(rr, L))
	f := factorQR(a, rr, L, tol, stop, g, pr.add)
	if stop() {
		return cancelled()
	}
	f.saveR(a, L)
	k := f.k
	w := &Subspace{m: m, n: n, k: k, tol: tol, limit: limit, inputs: b.Count, zeros: in.zeros, rankLeft: f.left, inPlace: opt.Reload != nil}
	if k > 0 {
		w.rankKept = math.Abs(f.diag[k-1])
	}
	w.comp = L-k < k && !opt.keepW
	if w.comp {
		w.s = L - k
		w.q = f.complement(g, a, L, stop, pr.add)
	}
	f.formQWith(g, a, L, stop, pr.add)
	qw := a[:k*L]
	var work []float64 // the reconstruction's chunk, then the Gram matrix's panel
	input := func(t int) ([]float64, error) { return b.Data[t*L : (t+1)*L], nil }
	if opt.Reload != nil {
		h, buf := getScratch(L)
		defer putScratch(h)
		input = func(t int) ([]float64, error) {
			if err := opt.Reload(t, buf); err != nil {
				return nil, fmt.Errorf("subspace: reading matrix %d again: %w", t, err)
			}
			return buf, nil
		}
	}
	var rerr error
	w.recon, rerr = reconstruction(g, input, in.orig, in.scale, in.shift, f, a, L, stop, &work)
	if rerr != nil {
		return nil, rerr
	}
	pr.add(float64(rr) * float64(k) * float64(L))
	if !w.comp {
		w.s = k
		w.q = qw[: k*L : k*L]
	}
	a, qw, f = nil, nil, nil // release the input copy (the stored complement does not need it)
	w.sumSq = accurate.SumSqUpper(w.q)
	w.orthFl, w.eta = orthogonalityWith(g, w.q, w.s, L, w.sumSq, stop, &work)
	if stop() {
		return cancelled()
	}
	pr.finish()
	return w, nil
}

// workBytes estimates New's peak working storage in bytes for r matrices of
// L entries, from the allocations of factor (an upper bound: they do not
// all live at once). With k = min(r, L), s the number of vectors stored
// (min(k, L−k)), nb = qrNB, p = qrNB + qrOver and c = reconChunk(r), in
// 8-byte words:
//   - the normalised copy, factored in place and turned into Q: r·L; the
//     first k columns of R, saved for the reconstruction (saveR): at most
//     Σ_{j<k} (j + c) ≤ k(k+1)/2 + c·k; the blocks' T: k·nb; pivots, norms
//     and factors: 3r + 2k;
//   - the block products' intermediates (rows ≤ r: the complement, the
//     only other row count, is stored only when L − k < k ≤ r), counted
//     three times (the factorisation, forming Q and the complement share
//     them, forming Q growing them at most once): 3·2nb·r; the saved
//     triangle and the Gram matrix of a block: 2nb²; formQ's slice of a
//     block's columns: nb·formCols;
//   - the sketch, when used: r·p + p·sketchCols + 2nb·p, and the choice's
//     vectors: 6r + 2nb;
//   - the reconstruction's chunk, c·L, then the Gram matrix's panels in the
//     same buffer, s·min(s, gramPanel) (counted apart: the buffer may be
//     grown); the stored complement ((L−k)·L, when stored);
//   - the packing buffers of the products (gemmBytes).
//
// So the peak is about r·L + k²/2 words beyond the caller's input (and
// the stored complement, when stored): the input copy becomes the stored
// basis, and R's triangle is the one other large array.
func workBytes(r, L int) int64 {
	k := int64(min(r, L))
	r64, L64 := int64(r), int64(L)
	s := min(k, L64-k)
	nb, p, c := int64(qrNB), int64(qrNB+qrOver), int64(reconChunk(r))
	// Saturating arithmetic: a shape whose estimate would overflow int64
	// gets math.MaxInt64, which every limit refuses (tooLarge).
	b := sumSat(mulSat(r64, L64), mulSat(k, k+1)/2, mulSat(c, k), mulSat(k, nb), mulSat(3, r64), mulSat(2, k))
	b = sumSat(b, mulSat(6*nb, r64), 2*nb*nb, nb*formCols)
	if r > qrPanelMax && min(r, L) > qrNB {
		b = sumSat(b, mulSat(r64, p), p*sketchCols, 2*nb*p, mulSat(6, r64), 2*nb)
	}
	b = sumSat(b, mulSat(c, L64), mulSat(s, min(s, gramPanel)))
	if L64-k < k {
		b = sumSat(b, mulSat(L64-k, L64))
	}
	return sumSat(mulSat(8, b), gemmBytes(max(r, L)))
}

// mulSat returns a·b for a, b ≥ 0, or math.MaxInt64 when it overflows.
func mulSat(a, b int64) int64 {
	if a == 0 || b == 0 {
		return 0
	}
	if a > math.MaxInt64/b {
		return math.MaxInt64
	}
	return a * b
}

// sumSat returns the sum of nonnegative terms, or math.MaxInt64 when it
// overflows.
func sumSat(terms ...int64) int64 {
	var t int64
	for _, v := range terms {
		if t > math.MaxInt64-v {
			return math.MaxInt64
		}
		t += v
	}
	return t
}

// tooLarge reports whether an estimate need refuses a shape under limit:
// above it, negative, or saturated (the estimate overflowed; refused even
// when the limit is math.MaxInt64).
func tooLarge(need, limit int64) bool {
	return need > limit || need < 0 || need == math.MaxInt64
}

// complexWorkBytes estimates the bytes NewComplex needs for r complex
// matrices of m×n, the complex input included: the input (16 bytes an
// entry), its realified copy (2r real vectors of 2mn entries), New's
// working storage for it (workBytes), W” (up to k₂ = min(2r, 2mn) vectors
// of 4mn entries) and the panels of its Gram matrix (k₂·min(k₂, gramPanel)
// words). The caller has checked that 16·r·m·n and 4·m·n·r do not overflow.
func complexWorkBytes(r, m, n int64) int64 {
	mn := mulSat(m, n)
	data := mulSat(16, mulSat(r, mn))
	r2, mn2 := mulSat(2, r), mulSat(2, mn)
	if r2 == math.MaxInt64 || mn2 == math.MaxInt64 {
		return math.MaxInt64
	}
	k2 := min(r2, mn2)
	return sumSat(data, mulSat(2, data), workBytes(int(r2), int(mn2)), mulSat(8*k2, mulSat(4, mn)), mulSat(8*k2, min(k2, gramPanel)))
}

func mulOK(a, b int) (int, bool) {
	if a == 0 || b == 0 {
		return 0, true
	}
	c := a * b
	if c/b != a || c < 0 {
		return 0, false
	}
	return c, true
}

// reconstruction returns ‖B̂Π − QR‖_F/‖B̂‖_F, recomputing each unit-normalised
// input column from the caller's data, in chunks to bound the memory: the
// chunk's columns of QR are blocked products (R is upper trapezoidal, so
// the columns c0..c1−1 need only the first min(c1, k) rows of Q). a is the
// factored array after formQ: its first k rows are Q; the columns of R
// come from f.rsave (those before k) and from the rows k.. of a, in
// place (the others; see saveR). The chunk's columns of QR go to *work,
// grown if needed. It returns early, with a meaningless value, when stop
// reports true.
//
// A chunk straddling k is two products, one per source of R's columns;
// every entry of a product is the same sum in the same order however its
// rows are grouped (gemm.go), so the result is the one of a single
// product over a full Rᵀ.
func reconstruction(g *gemmPool, input func(t int) ([]float64, error), orig []int, scale []float64, shift []int, f *qrFactors, a []float64, L int, stop func() bool, work *[]float64) (float64, error) {
	rr, k := len(orig), f.k
	chunk := reconChunk(rr)
	q := a[:k*L]
	buf := grow(work, chunk*L)
	var ss float64
	off := 0 // start of the chunk's block in f.rsave
	for c0 := 0; c0 < rr && !stop(); c0 += chunk {
		c1 := min(c0+chunk, rr)
		nc := c1 - c0
		qr := buf[:nc*L]
		clear(qr)
		if w := min(c1, k); c0 < w {
			g.mul(w-c0, L, w, false, operand{f.rsave[off:], w, false}, operand{q, L, false}, qr, L, stop)
			off += (w - c0) * w
		}
		if lo := max(c0, k); lo < c1 && k > 0 {
			g.mul(c1-lo, L, k, false, operand{a[lo*L:], L, false}, operand{q, L, false}, qr[(lo-c0)*L:], L, stop)
		}
		for j := c0; j < c1; j++ {
			col := f.perm[j]
			src, err := input(orig[col])
			if err != nil {
				return 0, err
			}
			sc, sh := scale[col], shift[col]
			row := qr[(j-c0)*L : (j-c0+1)*L]
			for i, v := range src {
				if sh != 0 {
					v = math.Ldexp(v, sh)
				}
				d := float64(v*sc) - row[i]
				ss += float64(d * d)
			}
		}
	}
	return math.Sqrt(ss / float64(rr)), nil
}

// reconChunk is the number of columns of QR that reconstruction forms at
// a time for rr columns: an eighth of them (so the buffer is at most an
// eighth of the input copy, and Q is packed at most eight times), between
// 32 and 256.
func reconChunk(rr int) int { return min(rr, max(32, min(256, rr/8))) }

// orthogonality returns the computed ‖SSᵀ − I‖_F and a proven bound η on
// ‖SSᵀ − I‖₂ for the s stored rows of length L.
//
// Derivation: each entry of the float Gram matrix Ĝ = fl(SSᵀ) satisfies
// |Ĝ_ij − G_ij| ≤ γ_L Σ_ℓ|S_iℓ||S_jℓ| ≤ γ_L‖s_i‖‖s_j‖ (Higham 2002, eq. 3.5,
// any summation order; Cauchy–Schwarz). Ĝ is the symmetric matrix whose
// entries on and below the diagonal gemmPool.gramCols forms: each product
// S_iℓ·S_jℓ rounded to binary64 (never fused with its addition:
// tile4x12Sep, or float64(a*b) in Go), the L rounded products summed in
// slices of tileK, each slice from zero in one register lane, the slice
// sums added in turn to the entry (first to an exact zero) — one summation
// order among those eq. 3.5 covers, so each term meets at most L roundings
// including its product's. The matrix [‖s_i‖‖s_j‖] has Frobenius norm
// Σ‖s_i‖² = ‖S‖_F². So ‖G − I‖₂ ≤ ‖Ĝ − I‖_F + γ_L‖S‖_F², each term
// evaluated with upward rounding (Ĝ_ij − δ_ij is rounded once more, and
// the squares and sum add s²+1 roundings).
//
// Memory. Ĝ is never stored whole (s² words, half the stored basis when
// s = L/2: 128 MB for 4000 matrices of 2×4000): it is formed gramPanel
// columns at a time into one buffer of s·gramPanel words, and each
// panel's entries are added to the sum of squares before the next panel
// is formed. The sum runs over the
// columns i in order and, in each, over the rows j ≥ i in order: entry
// (j, i) of Ĝ has the bits of entry (i, j) (gramCols), so this is the sum
// over the rows of the upper triangle, in the order of a row-major pass,
// whatever the panel width.
//
// The Gram matrix is formed on all cores (the same result for any number
// of workers) with stop checked inside its products; if stop reports true
// the result is meaningless (the caller discards it).
// sf is a proven upper bound on ‖S‖_F².
func orthogonality(q []float64, s, L int, sf float64, stop func() bool) (computed, bound float64) {
	return orthogonalityWith(newGemmPool(max(s, L)), q, s, L, sf, stop, nil)
}

// gramPanel is the number of columns of the Gram matrix that
// orthogonality forms at a time.
const gramPanel = tileN

// orthogonalityWith is orthogonality with the caller's product pool and,
// when work is not nil, a buffer for the panels (grown if too short).
func orthogonalityWith(gp *gemmPool, q []float64, s, L int, sf float64, stop func() bool, work *[]float64) (computed, bound float64) {
	if s == 0 {
		return 0, 0
	}
	P := min(s, gramPanel)
	if work == nil {
		work = new([]float64)
	}
	buf := grow(work, s*P)
	var ss float64
	for j0 := 0; j0 < s; j0 += P {
		j1 := min(s, j0+P)
		if !gp.gramCols(s, L, q, j0, j1, buf, P, stop) {
			return math.Inf(1), math.Inf(1)
		}
		for i := j0; i < j1; i++ {
			for j := i; j < s; j++ {
				v := buf[(j-j0)*P+i-j0]
				if i == j {
					v -= 1
				}
				if i == j {
					ss += float64(v * v)
				} else {
					ss += float64(2 * v * v)
				}
			}
		}
	}
	computed = math.Sqrt(ss)
	// |fl(Ĝ_ij − δ_ij)| ≤ (1+u)|Ĝ_ij − δ_ij|: absorbed by counting one more rounding per term.
	fro := accurate.SqrtUp(accurate.UpperRel(ss, s*s+4))
	fro = accurate.MulUp(fro, 1+4*accurate.U)
	bound = accurate.AddUp(fro, accurate.MulUp(accurate.Gamma(L), sf))
	return computed, bound
}
