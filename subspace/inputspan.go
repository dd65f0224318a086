package subspace

import (
	"context"
	"errors"
	"fmt"
	"math"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"

	"github.com/segre-lab/segre/internal/accurate"
	"github.com/segre-lab/segre/internal/verified"
)

// Errors of InputDistance.
var (
	// ErrDependent: the rank decision kept fewer vectors than there are
	// nonzero input matrices, so the stored basis spans a subspace of lower
	// dimension than the input's span and no distance between the two is
	// proven: certified intervals hold for the stored basis only.
	ErrDependent = errors.New("subspace: the input matrices are numerically dependent")
	// ErrUnproven: the distance could not be proven (inputs too
	// ill-conditioned for binary64, or entries too far apart in magnitude
	// to rescale exactly).
	ErrUnproven = errors.New("subspace: no bound on the input span's distance could be proven")
)

// inputWork bounds the products InputDistance may spend (about a second
// of compensated arithmetic on this project's machine).
const inputWork = 1 << 28

// InputDistance returns θ, a proven upper bound on ‖P_V − P_W‖₂, where V is
// the span of the matrices of b exactly as given (the floats are exact data)
// and W is the subspace of w (spanned by its stored vectors, or their
// complement). b must be the basis w was built from; its matrices are not
// modified. Since |dist(z, V) − dist(z, W)| ≤ ‖(P_V − P_W)z‖ for every unit
// z = x⊗y, every certified interval [lo, up] on d* for w gives the certified
// interval [lo − θ, up + θ] for the input's span.
//
// It returns ErrDependent when the rank decision dropped a nonzero input
// (then V and W differ in dimension and only the stored basis is
// certified), ErrUnproven when the inputs are too ill-conditioned to prove
// anything (condition beyond about 1e15), ErrTooLarge beyond about 2^28
// products or the memory limit, ErrShape when b does not match w, and
// ctx.Err() when cancelled.
//
// Derivation. Drop the zero matrices (they do not change V) and scale each
// remaining matrix by a power of two so its largest entry lies in [1, 2):
// the result B̃ (r columns of length L = m·n) is exact (checked by
// scaling back) and has the same span. r must equal dim W = k.
//   - Distance from V to W. For c ∈ R^r, dist(B̃c, W) ≤ ‖B̃c − w'‖ for any
//     w' ∈ W. When W is stored as the rows of S (k×L), take w' = SᵀR'c with
//     R' = fl(S B̃) (any matrix serves): dist ≤ δ‖c‖, δ ≥ ‖B̃ − SᵀR'‖_F.
//     When W⊥ is stored as the rows of S, dist(z, W) = ‖P_{W⊥}z‖ =
//     ‖(SSᵀ)^{-1/2}Sz‖ ≤ ‖Sz‖/√(1−η) with η ≥ ‖SSᵀ − I‖₂, so
//     dist(B̃c, W) ≤ ν‖c‖/√(1−η), ν ≥ ‖S B̃‖_F.
//   - Smallest singular value of B̃. For a matrix T (c×L, rows nearly
//     orthonormal, ηT ≥ ‖TTᵀ − I‖₂) and R = fl(T B̃): σ_min(B̃) ≥
//     σ_min(TᵀR) − ‖B̃ − TᵀR‖₂ (Weyl) and σ_min(TᵀR) ≥ √(1−ηT)·σ_min(R) ≥
//     √(1−ηT)/‖R⁻¹‖₂ (min–max, R square), with ‖R⁻¹‖₂ bounded by
//     verified.InverseNormUpper. T is S itself when W is stored (so the
//     residual is the δ above), and the Q factor of a fresh pivoted QR of
//     B̃ when W⊥ is stored.
//   - Hence ‖(I − P_W)P_V‖₂ = max_c dist(B̃c, W)/‖B̃c‖ ≤ δ/σ_min(B̃) (resp.
//     ν/(√(1−η)σ_min(B̃))), and for subspaces of equal dimension
//     ‖P_V − P_W‖₂ = ‖(I − P_W)P_V‖₂ (Golub and Van Loan, Matrix
//     Computations, 4th ed., 2013, §2.5.3, recalled from memory). The
//     residuals and products are bounded with compensated dot products
//     (accurate.Acc), the rest with upward rounding; θ is capped at 1.
func InputDistance(ctx context.Context, b Basis, w *Subspace) (theta float64, err error) {
	L := w.m * w.n
	if b.Rows != w.m || b.Cols != w.n || b.Count <= 0 || len(b.Data) != b.Count*L {
		return 0, fmt.Errorf("%w: basis of %d matrices of %d×%d for a subspace of %d×%d matrices", ErrShape, b.Count, b.Rows, b.Cols, w.m, w.n)
	}
	if w.inPlace {
		// New overwrote the caller's array: a b that is that array now
		// holds the stored basis or meaningless numbers, and nothing here
		// can tell it from a copy of the input.
		return 0, fmt.Errorf("%w: the subspace was built in the input's array (Options.Reload); prove its input span with InputDistanceReload", ErrUnproven)
	}
	return inputDistance(ctx, b.Count, -1, func(t int) ([]float64, error) { return b.Data[t*L : (t+1)*L], nil }, w)
}

// InputDistanceReload is InputDistance for count input matrices read
// through read (as Options.Reload does: matrix t, m·n entries, into dst),
// for the input that New factored in place (count must be the number of
// matrices New was given). The bound is proven for the numbers read, once
// each: the number of nonzero matrices is New's (Inputs), and a reading
// with another number is refused (ErrUnproven); ReloadNPY's function
// checks that they are the numbers New factored. An error from read is
// returned, wrapped.
func InputDistanceReload(ctx context.Context, count int, read func(t int, dst []float64) error, w *Subspace) (theta float64, err error) {
	if count <= 0 || read == nil || count != w.inputs {
		return 0, fmt.Errorf("%w: %d input matrices for a subspace built from %d", ErrShape, count, w.inputs)
	}
	// Only r = k nonzero matrices can be proven, so the work limit is
	// checked for r = k before anything is read (reading the input again
	// is a pass over a file; ErrTooLarge then comes before ErrDependent).
	if err := inputWorkFits(w, w.k); err != nil {
		return 0, err
	}
	buf := make([]float64, w.m*w.n)
	return inputDistance(ctx, count, w.inputs-w.zeros, func(t int) ([]float64, error) {
		if err := read(t, buf); err != nil {
			return nil, fmt.Errorf("subspace: reading matrix %d again: %w", t, err)
		}
		return buf, nil
	}, w)
}

// inputWorkFits returns an error wrapping ErrTooLarge when proving the
// input span of r nonzero matrices is beyond the work or memory limit.
func inputWorkFits(w *Subspace, r int) error {
	L := w.m * w.n
	work := float64(float64(L) * float64(r) * float64(max(w.s, r)))
	if work+float64(float64(r)*float64(r)*float64(r)) > inputWork || int64(L)*int64(r)*8*3 > w.limit {
		return fmt.Errorf("%w: proving the input span's distance for %d matrices of %d×%d is beyond the work limit", ErrTooLarge, r, w.m, w.n)
	}
	return nil
}

// inputDistance is InputDistance for count matrices given by get (each
// slice valid until the next call), r of them nonzero: counted here in a
// first pass when r < 0, else known (the copy below checks it).
func inputDistance(ctx context.Context, count, r int, get func(t int) ([]float64, error), w *Subspace) (theta float64, err error) {
	L := w.m * w.n
	if r < 0 {
		r = 0
		for t := 0; t < count; t++ {
			src, err := get(t)
			if err != nil {
				return 0, err
			}
			if accurate.MaxAbs(src) != 0 {
				r++
			}
		}
	}
	if r != w.k {
		return 0, fmt.Errorf("%w: %d nonzero input matrices, the rank decision kept %d (tolerance %.3g)", ErrDependent, r, w.k, w.tol)
	}
	if err := inputWorkFits(w, r); err != nil {
		return 0, err
	}
	stop := func() bool { return ctx.Err() != nil }
	bt := make([]float64, r*L) // B̃, row j is scaled input matrix j
	j := 0
	for t := 0; t < count; t++ {
		src, err := get(t)
		if err != nil {
			return 0, err
		}
		mx := accurate.MaxAbs(src)
		if mx == 0 {
			continue
		}
		if j == r { // a reloaded input that is not the one New counted
			return 0, fmt.Errorf("%w: the input gave %d nonzero matrices, then more", ErrUnproven, r)
		}
		_, e := math.Frexp(mx)
		row := bt[j*L : (j+1)*L]
		for i, v := range src {
			sv := math.Ldexp(v, 1-e)
			if math.Ldexp(sv, e-1) != v {
				return 0, fmt.Errorf("%w: matrix %d cannot be rescaled exactly (entries from %.3g to %.3g)", ErrUnproven, j, v, mx)
			}
			row[i] = sv
		}
		j++
	}
	if j != r { // a reloaded input that is not the one New counted
		return 0, fmt.Errorf("%w: the input gave %d nonzero matrices, then %d", ErrUnproven, r, j)
	}
	var num, sigma float64
	if !w.comp {
		var ok bool
		num, sigma, ok = sigmaMinLower(w.q, w.k, w.eta, bt, r, L, stop)
		if !ok {
			return 0, cancelledOr(ctx, ErrUnproven)
		}
	} else {
		// ν ≥ ‖S B̃ᵀ‖_F (S: the s stored rows spanning W⊥).
		nu, ok := productNormUpper(w.q, w.s, bt, r, L, stop)
		if !ok {
			return 0, cancelledOr(ctx, ErrUnproven)
		}
		num = accurate.Up(nu / accurate.SqrtDown(accurate.Down(1-w.eta)))
		// A fresh orthonormal factor T of B̃ for σ_min.
		a := append([]float64(nil), bt...)
		f := pivotedQR(a, r, L, 0, stop)
		if stop() || f.k != r {
			return 0, cancelledOr(ctx, ErrUnproven)
		}
		f.formQ(a, L, stop)
		tq := a[:r*L]
		_, etaT := orthogonality(tq, r, L, accurate.SumSqUpper(tq), stop)
		_, sigma, ok = sigmaMinLower(tq, r, etaT, bt, r, L, stop)
		if !ok {
			return 0, cancelledOr(ctx, ErrUnproven)
		}
	}
	if !(sigma > 0) || math.IsNaN(num) || math.IsInf(num, 0) {
		return 0, cancelledOr(ctx, ErrUnproven)
	}
	return math.Min(1, accurate.Up(num/sigma)), nil
}

func cancelledOr(ctx context.Context, err error) error {
	if ctx.Err() != nil {
		return fmt.Errorf("subspace: %w", ctx.Err())
	}
	return err
}

// sigmaMinLower returns, for rows T (c×L, c = r, defect bound etaT) and the
// rows of B̃ (r×L): δ ≥ ‖B̃ᵀ − TᵀR‖_F with R = fl(T B̃ᵀ), and a lower bound
// on σ_min(B̃ᵀ) = √(1−etaT)/‖R⁻¹‖₂ − δ (see InputDistance); ok is false
// when it proves nothing.
func sigmaMinLower(t []float64, c int, etaT float64, bt []float64, r, L int, stop func() bool) (delta, sigma float64, ok bool) {
	if c != r || !(etaT < 0.5) {
		return 0, 0, false
	}
	rm := make([]float64, c*r) // R = T B̃ᵀ, c×r
	blas64.Gemm(blas.NoTrans, blas.Trans, 1,
		blas64.General{Rows: c, Cols: L, Stride: L, Data: t},
		blas64.General{Rows: r, Cols: L, Stride: L, Data: bt},
		0, blas64.General{Rows: c, Cols: r, Stride: r, Data: rm})
	acc := make([]accurate.Acc, L)
	e := make([]float64, L)
	var sq float64 // upper bound on Σ of the squared residual bounds
	for j := 0; j < r; j++ {
		if stop() {
			return 0, 0, false
		}
		for l := range acc {
			acc[l] = accurate.Acc{}
			acc[l].Add(bt[j*L+l])
		}
		for q := 0; q < c; q++ {
			accurate.AddProds(acc, -rm[q*r+j], t[q*L:(q+1)*L])
		}
		rc := accurate.NewResultConsts(acc[0].K)
		for l := range acc {
			v, bd := acc[l].ResultWith(&rc)
			e[l] = accurate.AddUp(math.Abs(v), bd)
		}
		sq = accurate.AddUp(sq, accurate.SumSqUpper(e))
	}
	delta = accurate.SqrtUp(sq)
	inv, ok := verified.InverseNormUpper(rm, r, stop)
	if !ok {
		return 0, 0, false
	}
	s := accurate.Down(accurate.SqrtDown(accurate.Down(1-etaT)) / inv)
	sigma = accurate.Down(s - accurate.AddUp(delta, accurate.Tiny))
	return delta, sigma, sigma > 0
}

// productNormUpper returns a proven upper bound on ‖S B̃ᵀ‖_F for the rows
// of S (s×L) and of B̃ (r×L), by compensated dot products.
func productNormUpper(sq []float64, s int, bt []float64, r, L int, stop func() bool) (float64, bool) {
	e := make([]float64, r)
	var tot float64
	for t := 0; t < s; t++ {
		if stop() {
			return 0, false
		}
		row := sq[t*L : (t+1)*L]
		for j := 0; j < r; j++ {
			var q accurate.Acc
			bj := bt[j*L : (j+1)*L]
			for l, v := range row {
				q.AddProd(v, bj[l])
			}
			v, bd := q.Result()
			e[j] = accurate.AddUp(math.Abs(v), bd)
		}
		tot = accurate.AddUp(tot, accurate.SumSqUpper(e))
	}
	return accurate.SqrtUp(tot), true
}
