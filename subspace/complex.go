package subspace

import (
	"context"
	"fmt"
	"math"
	"math/cmplx"
	"sync"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"

	"github.com/segre-lab/segre/internal/accurate"
)

// Complex subspaces.
//
// A subspace W of complex m×n matrices, with the Frobenius inner product
// ⟨A, B⟩ = tr(A*B), asks for unit x ∈ C^m, y ∈ C^n with x yᵀ (no
// conjugation; vec(x yᵀ) = x⊗y in the row-major order, the Kronecker order
// |i⟩⊗|j⟩ of quantum information) nearest to W: h(x, y) = ‖P_W(x⊗y)‖²,
// d² = 1 − h.
//
// Reduction to a real subspace (derived here). Write x = x_r + i x_i and
// X = (x_r, x_i) ∈ R^{2m}, likewise Y ∈ R^{2n}; ‖X‖ = ‖x‖. The real
// coordinates v = (Re(x⊗y), Im(x⊗y)) ∈ R^{2mn} of x⊗y are M(X⊗Y) with
// M(rr, ri, ir, ii) = (rr − ii, ri + ir) on the four blocks of X⊗Y, and
// MMᵀ = 2I, so N = M/√2 is a co-isometry and Nᵀ an isometry. W seen as a
// real subspace W_R ⊂ R^{2mn} (spanned by (A, B) and (−B, A) for each
// input A + iB) has the same orthogonal projector as W, hence
//
//	h(x, y) = ‖P_{W_R} M(X⊗Y)‖² = 2‖P_{W''}(X⊗Y)‖²,  W'' = Nᵀ W_R,
//
// because NᵀP_{W_R}N is the projector onto NᵀW_R. Nᵀ(a, b) is the real
// 2m×2n matrix [[a, b], [b, −a]]/√2 (rows: real then imaginary parts of x;
// columns: of y). So a complex subspace of dimension k is the real
// subspace W'' of 2m×2n matrices, of dimension 2k, with h = 2h'' and
// d² = 2d''² − 1 (d''² = 1 − h''). Every real strategy, bound and net
// runs on W'' unchanged; NewComplex returns W'' and keeps the rows of W_R
// that W'' is made of, to certify complex distances without the
// cancellation of 1 − h (ComplexResidualBound) about the same subspace.
// h'' ≤ 1/2 always, and the optima are attained along orbits of the phase
// symmetry (x, y) → (e^{iθ}x, e^{−iθ}y), which global searches must reduce
// (net.BranchBound fixes the phase of one coordinate).

// Field is the number field of a subspace's matrices.
type Field int

// The fields.
const (
	Real Field = iota
	Complex
)

func (f Field) String() string {
	if f == Complex {
		return "complex"
	}
	return "real"
}

// ComplexBasis holds Count complex matrices of Rows×Cols, row-major, one
// after another: element (i, j) of matrix t is Data[(t·Rows + i)·Cols + j].
type ComplexBasis struct {
	Count, Rows, Cols int
	Data              []complex128
}

// ComplexFromReal returns b with zero imaginary parts, to treat real data
// over C.
func ComplexFromReal(b Basis) ComplexBasis {
	d := make([]complex128, len(b.Data))
	for i, v := range b.Data {
		d[i] = complex(v, 0)
	}
	return ComplexBasis{Count: b.Count, Rows: b.Rows, Cols: b.Cols, Data: d}
}

// complexPart is what a complex Subspace keeps besides W”.
type complexPart struct {
	m, n int       // the complex shape
	s    int       // stored rows of W_R
	q    []float64 // s×(2mn): rows (a′, b′) spanning W_R exactly (see NewComplex)
	once sync.Once
	cops *complexOps // the complex basis of the search operators (complexops.go), built once
}

// Field reports whether w is a subspace of real or of complex matrices.
// For a complex subspace, Rows and Cols are 2m and 2n (the real
// coordinates, see the package's notes on complex subspaces) and
// ComplexShape gives m and n.
func (w *Subspace) Field() Field {
	if w.cx != nil {
		return Complex
	}
	return Real
}

// ComplexShape returns m and n of a complex subspace (Rows and Cols of a
// real one).
func (w *Subspace) ComplexShape() (m, n int) {
	if w.cx != nil {
		return w.cx.m, w.cx.n
	}
	return w.m, w.n
}

// realify returns the 2r real vectors (A, B) and (−B, A) of length 2mn of
// the input matrices A + iB, as a basis of 2r "matrices" of 2×(mn) (only
// their span in R^{2mn} matters).
func realify(cb ComplexBasis) Basis {
	L := cb.Rows * cb.Cols
	d := make([]float64, 0, 2*cb.Count*2*L)
	for t := 0; t < cb.Count; t++ {
		src := cb.Data[t*L : (t+1)*L]
		for _, z := range src {
			d = append(d, real(z))
		}
		for _, z := range src {
			d = append(d, imag(z))
		}
		for _, z := range src {
			d = append(d, -imag(z))
		}
		for _, z := range src {
			d = append(d, real(z))
		}
	}
	return Basis{Count: 2 * cb.Count, Rows: 2, Cols: L, Data: d}
}

// NewComplex builds the subspace spanned over C by the complex matrices of
// cb (cb is not modified), as the real subspace W” of 2m×2n matrices on
// which every strategy runs (see the notes above), with Field() = Complex.
// The rank decision is made on the realified inputs (each complex matrix
// gives two real vectors of equal norm), with Options as in New. Errors are
// those of New, with NaN or infinite real or imaginary parts reported as
// ErrNotFinite naming the matrix and entry.
func NewComplex(ctx context.Context, cb ComplexBasis, opt Options) (*Subspace, error) {
	if cb.Count == 0 {
		return nil, ErrEmpty
	}
	if cb.Count < 0 || cb.Rows <= 0 || cb.Cols <= 0 {
		return nil, fmt.Errorf("%w: %d matrices of %d×%d", ErrShape, cb.Count, cb.Rows, cb.Cols)
	}
	L, ok := mulOK(cb.Rows, cb.Cols)
	total, ok2 := mulOK(L, cb.Count)
	L4, ok3 := mulOK(L, 4)
	if !ok || !ok2 || !ok3 {
		return nil, fmt.Errorf("%w: %d complex matrices of %d×%d overflow the address space", ErrTooLarge, cb.Count, cb.Rows, cb.Cols)
	}
	if len(cb.Data) != total {
		return nil, fmt.Errorf("%w: %d matrices of %d×%d need %d entries, have %d", ErrShape, cb.Count, cb.Rows, cb.Cols, total, len(cb.Data))
	}
	for idx, z := range cb.Data {
		if cmplx.IsNaN(z) || cmplx.IsInf(z) {
			t, rem := idx/L, idx%L
			return nil, fmt.Errorf("%w: matrix %d, entry (%d, %d) is %v", ErrNotFinite, t, rem/cb.Cols, rem%cb.Cols, z)
		}
	}
	limit := opt.MaxBytes
	if limit == 0 {
		limit = DefaultMaxBytes
	}
	// The complex input, its realified copy and New's working storage, W''
	// (up to 2r rows of 4mn) and one panel of its Gram matrix: the count
	// the readers use (complexWorkBytes), so that both refuse the same
	// shapes.
	need := complexWorkBytes(int64(cb.Count), int64(cb.Rows), int64(cb.Cols))
	if opt.MaxBytes >= 0 && tooLarge(need, limit) {
		return nil, fmt.Errorf("%w: %d complex matrices of %d×%d need about %d bytes of working storage, limit %d", ErrTooLarge, cb.Count, cb.Rows, cb.Cols, need, limit)
	}
	ropt := opt
	ropt.keepW = true
	ropt.Reload = nil // it reads the caller's complex matrices, not br's realified ones
	br := realify(cb)
	wr, err := New(ctx, br, ropt)
	if err != nil {
		return nil, err
	}
	if wr.eta >= 0.5 {
		return nil, fmt.Errorf("%w: the realified basis lost its orthogonality (η = %g)", ErrUnproven, wr.eta)
	}
	m, n, s := cb.Rows, cb.Cols, wr.s
	// W'' = Nᵀ W_R: row t of q is [[a, b], [b, −a]]/√2 for (a, b) = stored
	// row t of W_R, rows of the 2m×2n matrix indexed (re x, im x), columns
	// (re y, im y).
	q := make([]float64, s*L4)
	const r2 = 0x1.6a09e667f3bcdp-01 // fl(1/√2)
	for t := 0; t < s; t++ {
		a, b := wr.q[t*2*L:t*2*L+L], wr.q[t*2*L+L:(t+1)*2*L]
		out := q[t*L4 : (t+1)*L4]
		for i := 0; i < m; i++ {
			for j := 0; j < n; j++ {
				av, bv := a[i*n+j]*r2, b[i*n+j]*r2
				out[i*2*n+j] = av        // (re x, re y)
				out[i*2*n+n+j] = bv      // (re x, im y)
				out[(m+i)*2*n+j] = bv    // (im x, re y)
				out[(m+i)*2*n+n+j] = -av // (im x, im y)
			}
		}
	}
	stop := func() bool { return ctx.Err() != nil }
	w := &Subspace{m: 2 * m, n: 2 * n, k: s, s: s, q: q, tol: wr.tol, limit: wr.limit,
		inputs: cb.Count, zeros: wr.zeros / 2, recon: wr.recon, rankKept: wr.rankKept, rankLeft: wr.rankLeft}
	w.sumSq = accurate.SumSqUpper(w.q)
	w.orthFl, w.eta = orthogonality(w.q, w.s, L4, w.sumSq, stop)
	if stop() {
		return nil, fmt.Errorf("subspace: %w", ctx.Err())
	}
	// The stored W'' is exactly Nᵀ W̃_R for W̃_R = span{(a′_t, b′_t)}, the
	// rounded scaled rows (N of row t is √2·(a′_t, b′_t) exactly). Every
	// bound of W'' is about W̃_R, so the complex residual and the input
	// distance use the same rows: they are copied from W'' itself.
	qr := make([]float64, s*2*L)
	for t := 0; t < s; t++ {
		out, src := qr[t*2*L:(t+1)*2*L], q[t*L4:(t+1)*L4]
		for i := 0; i < m; i++ {
			for j := 0; j < n; j++ {
				out[i*n+j] = src[i*2*n+j]     // a′
				out[L+i*n+j] = src[i*2*n+n+j] // b′
			}
		}
	}
	w.cx = &complexPart{m: m, n: n, s: s, q: qr}
	return w, nil
}

// ComplexDim returns the complex dimension of a complex subspace (Dim/2,
// rounded up when the rank decision split a pair), or Dim for a real one.
func (w *Subspace) ComplexDim() int {
	if w.cx != nil {
		return (w.k + 1) / 2
	}
	return w.k
}

// ComplexResidualBound returns a proven upper bound on the complex
// distance dist_F(x yᵀ, W) for x = X[:m] + i X[m:], y = Y[:n] + i Y[n:]
// exactly as given (not normalised), W the complex subspace spanned by the
// rows (a′, b′) spanning W_R exactly. It returns +Inf when it cannot prove anything
// finite. It panics if w is not complex or the lengths are not 2m and 2n.
//
// Derivation: as ResidualBound with W stored. The real coordinates of x⊗y
// are v_(i,j) = x_r,i y_r,j − x_i,i y_i,j and v'_(i,j) = x_r,i y_i,j +
// x_i,i y_r,j; for every float coefficient vector c, Qᵀc ∈ W_R exactly, so
// dist(v, W_R) ≤ ‖v − Qᵀc‖, each entry of which is a compensated dot
// product (two products of v and the stored terms) with a proven error
// bound. W_R and W have the same projector, so this is the complex
// distance, with no cancellation when it is tiny.
func (w *Subspace) ComplexResidualBound(x, y []float64) float64 {
	cx := w.cx
	if cx == nil {
		panic("subspace: ComplexResidualBound of a real subspace")
	}
	m, n := cx.m, cx.n
	if len(x) != 2*m || len(y) != 2*n {
		panic("subspace: ComplexResidualBound needs vectors of lengths 2m and 2n")
	}
	for _, v := range x {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return math.Inf(1)
		}
	}
	for _, v := range y {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return math.Inf(1)
		}
	}
	L := m * n
	xr, xi, yr, yi := x[:m], x[m:], y[:n], y[n:]
	v := make([]float64, 2*L)
	for i := 0; i < m; i++ {
		for j := 0; j < n; j++ {
			// Estimates for the coefficients only (the bound below uses
			// the exact products).
			v[i*n+j] = float64(xr[i]*yr[j]) - float64(xi[i]*yi[j])
			v[L+i*n+j] = float64(xr[i]*yi[j]) + float64(xi[i]*yr[j])
		}
	}
	// Coefficients c ≈ 2·Q v (the rows are orthogonal with squared norms
	// about 1/2, so the projector is about 2QᵀQ), refined once; any c gives
	// a valid bound, a good one a tight bound.
	qm := blas64.General{Rows: cx.s, Cols: 2 * L, Stride: 2 * L, Data: cx.q}
	c := make([]float64, cx.s)
	if cx.s > 0 {
		blas64.Gemv(blas.NoTrans, 2, qm, blas64.Vector{N: 2 * L, Data: v, Inc: 1}, 0, blas64.Vector{N: cx.s, Data: c, Inc: 1})
		r := append([]float64(nil), v...)
		blas64.Gemv(blas.Trans, -1, qm, blas64.Vector{N: cx.s, Data: c, Inc: 1}, 1, blas64.Vector{N: 2 * L, Data: r, Inc: 1})
		dc := make([]float64, cx.s)
		blas64.Gemv(blas.NoTrans, 2, qm, blas64.Vector{N: 2 * L, Data: r, Inc: 1}, 0, blas64.Vector{N: cx.s, Data: dc, Inc: 1})
		for t := range c {
			c[t] += dc[t]
		}
	}
	acc := make([]accurate.Acc, 2*L)
	for i := 0; i < m; i++ {
		for j := 0; j < n; j++ {
			re, im := &acc[i*n+j], &acc[L+i*n+j]
			re.AddProd(xr[i], yr[j])
			re.AddProd(-xi[i], yi[j])
			im.AddProd(xr[i], yi[j])
			im.AddProd(xi[i], yr[j])
		}
	}
	for t := 0; t < cx.s; t++ {
		if ct := -c[t]; ct != 0 {
			accurate.AddProds(acc, ct, cx.q[t*2*L:(t+1)*2*L])
		}
	}
	var ss float64
	rc := accurate.NewResultConsts(acc[0].K)
	for l := range acc {
		r, b := acc[l].ResultWith(&rc)
		f := accurate.AddUp(math.Abs(r), b)
		ss += float64(f * f)
	}
	return accurate.SqrtUp(accurate.UpperRel(ss, 2*L+1))
}

// ComplexWitness returns x = X[:m] + i X[m:] and y likewise, for a complex
// subspace's real-coordinate witness (X, Y). It panics on wrong lengths.
func ComplexWitness(x, y []float64) (cx, cy []complex128) {
	if len(x)%2 != 0 || len(y)%2 != 0 {
		panic("subspace: ComplexWitness needs vectors of even lengths")
	}
	m, n := len(x)/2, len(y)/2
	cx, cy = make([]complex128, m), make([]complex128, n)
	for i := range cx {
		cx[i] = complex(x[i], x[m+i])
	}
	for j := range cy {
		cy[j] = complex(y[j], y[n+j])
	}
	return cx, cy
}

// ComplexInputDistance is InputDistance for a complex subspace built by
// NewComplex from cb: a proven θ ≥ ‖P_V − P_W‖₂ for V the complex span of
// the matrices of cb as given (their real and imaginary parts exact data)
// and W the stored subspace. It is proven on W” itself: the real 2m×2n
// matrices [[A, B], [B, −A]] and [[−B, A], [A, B]] of each input A + iB are
// exact (no rounding) and span NᵀV_R exactly, the stored W” is NᵀW̃_R
// exactly, and ‖NᵀXN‖₂ = ‖X‖₂ for the isometry Nᵀ, so the distance between
// the realified spans — which is the complex one, as their projectors
// coincide — equals that between the W” spans. It panics if w is real.
func ComplexInputDistance(ctx context.Context, cb ComplexBasis, w *Subspace) (float64, error) {
	if w.cx == nil {
		panic("subspace: ComplexInputDistance of a real subspace")
	}
	if cb.Rows != w.cx.m || cb.Cols != w.cx.n {
		return 0, fmt.Errorf("%w: basis of %d×%d matrices for a subspace of %d×%d", ErrShape, cb.Rows, cb.Cols, w.cx.m, w.cx.n)
	}
	return InputDistance(ctx, RealMatrices(cb), w)
}

// RealMatrices returns the exact real 2m×2n matrices [[A, B], [B, −A]]
// and [[−B, A], [A, B]] (those of A + iB and of i(A + iB)) of every input:
// they span NᵀV_R exactly, √2 times the real subspace W” that NewComplex
// stores for the span V of cb (see the notes on complex subspaces).
func RealMatrices(cb ComplexBasis) Basis {
	m, n, L := cb.Rows, cb.Cols, cb.Rows*cb.Cols
	d := make([]float64, 0, 2*cb.Count*4*L)
	for t := 0; t < cb.Count; t++ {
		for rot := 0; rot < 2; rot++ {
			mt := make([]float64, 4*L)
			for i := 0; i < m; i++ {
				for j := 0; j < n; j++ {
					z := cb.Data[t*L+i*n+j]
					a, b := real(z), imag(z) // A + iB
					if rot == 1 {
						a, b = -imag(z), real(z) // i(A + iB) = −B + iA, exactly
					}
					mt[i*2*n+j], mt[i*2*n+n+j] = a, b
					mt[(m+i)*2*n+j], mt[(m+i)*2*n+n+j] = b, -a
				}
			}
			d = append(d, mt...)
		}
	}
	return Basis{Count: 2 * cb.Count, Rows: 2 * m, Cols: 2 * n, Data: d}
}
