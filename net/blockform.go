package net

import (
	"math"
	"strconv"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"

	"github.com/segre-lab/segre/internal/accurate"
	"github.com/segre-lab/segre/internal/rawstore"
	"github.com/segre-lab/segre/subspace"
)

// BlockForm holds the exact side's matrix as a quadratic form in the
// other side's vector, for global searches whose net side is small:
// H(x) = Σ_ab x_a x_b H_ab with the d² blocks H_ab (p×p) precomputed once, so
// that evaluating λmax(H(x)) at a new x costs O(d²p²) and no pass over the
// basis. It is immutable and safe for concurrent use.
type BlockForm struct {
	comp   bool    // the stored vectors span W⊥
	eta    float64 // the stored basis's proven orthogonality defect
	onX    bool    // the form is in x (blocks n×n); otherwise in y (blocks m×m)
	d, p   int
	blocks []float64 // d×d blocks of p×p: block (a, b) at ((a·d+b)·p·p)
	errs   []float64 // errs[a·d+b]: proven bound on the block's contribution error
}

// BlockFormBytes returns the storage a BlockForm for the given side needs.
func BlockFormBytes(w *subspace.Subspace, onX bool) int64 {
	d, p := w.Cols(), w.Rows()
	if onX {
		d, p = w.Rows(), w.Cols()
	}
	return 8 * int64(d) * int64(d) * int64(p) * int64(p)
}

// NewBlockForm builds the form in x (onX) or in y. With Z(x) = [S_tᵀx]_t the
// blocks are M_ab = Σ_t R_a,tᵀ R_b,t where R_a,t = row a of the stored matrix
// S_t, so Z(x)ᵀZ(x) = Σ_ab x_a x_b M_ab exactly; the float blocks err
// entrywise by at most γ_s Σ_t|R_a,t|ᵀ|R_b,t|, of spectral norm at most
// γ_s‖R_a‖_F‖R_b‖_F (Cauchy–Schwarz).
func NewBlockForm(w *subspace.Subspace, onX bool) *BlockForm {
	st, sq := w.Stored(), rawstore.Vectors(w)
	n := w.Cols()
	d, p := n, w.Rows()
	if onX {
		d, p = w.Rows(), n
	}
	f := &BlockForm{comp: st.Complement(), eta: st.OrthogonalityBound(), onX: onX, d: d, p: p,
		blocks: make([]float64, d*d*p*p), errs: make([]float64, d*d)}
	s, L := st.Count(), w.Rows()*n
	// rows[a] is the s×p matrix of row (or column) a of every stored matrix.
	rows := make([][]float64, d)
	rn := make([]float64, d)
	for a := 0; a < d; a++ {
		r := make([]float64, s*p)
		for t := 0; t < s; t++ {
			q := sq[t*L : (t+1)*L]
			for j := 0; j < p; j++ {
				if onX {
					r[t*p+j] = q[a*n+j]
				} else {
					r[t*p+j] = q[j*n+a]
				}
			}
		}
		rows[a] = r
		rn[a] = accurate.SqrtUp(accurate.SumSqUpper(r))
	}
	g := accurate.Gamma(max(s, 1))
	gc := accurate.Gamma(d*d + 2)
	for a := 0; a < d; a++ {
		for b := 0; b < d; b++ {
			blk := f.blocks[(a*d+b)*p*p : (a*d+b+1)*p*p]
			if s > 0 {
				blas64.Gemm(blas.Trans, blas.NoTrans, 1,
					blas64.General{Rows: s, Cols: p, Stride: p, Data: rows[a]},
					blas64.General{Rows: s, Cols: p, Stride: p, Data: rows[b]},
					0, blas64.General{Rows: p, Cols: p, Stride: p, Data: blk})
			}
			e := accurate.MulUp(g, accurate.MulUp(rn[a], rn[b]))
			e = accurate.AddUp(e, accurate.MulUp(gc, accurate.SqrtUp(accurate.SumSqUpper(blk))))
			f.errs[a*d+b] = e
		}
	}
	return f
}

// MaxEig returns an estimate and a proven upper bound of λmax(H(x)) (or of
// λmax(G(y)) for a form in y) for the float vector c exactly as given, as
// MaxEigH does, and writes the estimated top eigenvector into vec (whose
// content on entry is the start vector; zero for none). It panics on wrong
// lengths.
//
// Derivation: A = fl(Σ_ab c_a c_b M̂_ab) differs from Z(c)ᵀZ(c) by at most
// δ = √2·Σ_ab |c_a||c_b|·errs_ab in spectral norm (the block errors of
// NewBlockForm, plus γ_{d²+2}Σ|c_a c_b|‖M̂_ab‖_F for forming the products and
// the sum). The rest is as in MaxEigH: W stored, λmax(H) ≤ (λ̄max(A) + δ)/(1−η);
// W⊥ stored, λmax(H) ≤ ‖c‖² − max(0, λ̲min(A) − δ)/(1+η).
func (f *BlockForm) MaxEig(c, vec []float64) (est, upper float64) {
	var ws formWork
	return f.maxEig(c, vec, &ws)
}

// formWork is the reusable workspace of BlockForm.maxEig: the assembled
// matrix and the Lanczos buffers. One per worker; the zero value is ready.
type formWork struct {
	a    []float64 // p×p
	lz   lanczos
	chol cholWork
}

// maxEig is MaxEig with the caller's workspace (nothing allocated once ws
// is sized): the same estimate and bound, bit for bit.
func (f *BlockForm) maxEig(c, vec []float64, ws *formWork) (est, upper float64) {
	d, p := f.d, f.p
	if len(c) != d || len(vec) != p {
		panic("net: BlockForm.MaxEig needs vectors of lengths " + strconv.Itoa(d) + " and " + strconv.Itoa(p))
	}
	if len(ws.a) != p*p {
		ws.a = make([]float64, p*p)
	}
	a, delta := f.assembleInto(c, ws.a)
	cEst := sumSqEst(c)
	// The estimate runs on the full float matrix A with general
	// matrix-vector products; only the bound needs the exact symmetric form
	// (its upper triangle, which the verified test reads).
	shift := 0.0
	if f.comp {
		shift = cEst
	}
	est = ws.lz.topDense(a, p, f.comp, shift, vec, 1e-10)
	return est, f.upperWith(c, a, delta, cEst, est, &ws.chol)
}

// maxEigUpper is the proven part of MaxEig: the upper bound derived there,
// with est (an estimate of the form's λmax at c) only as the verified
// test's starting point. Any est, even NaN or ±Inf, gives a valid bound; a
// poor one gives a weaker bound. It runs no eigensolver, so a bound
// recorded with its estimate is recomputed bit for bit. It panics if
// len(c) ≠ d.
func (f *BlockForm) maxEigUpper(c []float64, est float64) float64 {
	if len(c) != f.d {
		panic("net: BlockForm bound needs a vector of length " + strconv.Itoa(f.d))
	}
	a, delta := f.assemble(c)
	return f.upper(c, a, delta, sumSqEst(c), est)
}

// assemble returns A = fl(Σ_ab c_a c_b M̂_ab) (p×p, row-major) and the
// bound δ on its error derived on MaxEig, √2 factor included.
func (f *BlockForm) assemble(c []float64) (a []float64, delta float64) {
	return f.assembleInto(c, make([]float64, f.p*f.p))
}

// assembleInto is assemble writing A into buf (p×p, overwritten): for each
// block in order, A += c_a c_b·M̂_ab by gonum's Axpy.
func (f *BlockForm) assembleInto(c, buf []float64) (a []float64, delta float64) {
	d, p := f.d, f.p
	a = buf[:p*p]
	clear(a)
	for i := 0; i < d; i++ {
		for j := 0; j < d; j++ {
			cij := c[i] * c[j]
			if cij == 0 {
				continue
			}
			blk := f.blocks[(i*d+j)*p*p : (i*d+j+1)*p*p]
			blas64.Axpy(cij, blas64.Vector{N: p * p, Data: blk, Inc: 1}, blas64.Vector{N: p * p, Data: a, Inc: 1})
			delta = accurate.AddUp(delta, accurate.MulUp(accurate.MulUp(math.Abs(c[i]), math.Abs(c[j])), f.errs[i*d+j]))
		}
	}
	// The symmetric matrix used is the upper triangle of A reflected; its
	// error's entries are bounded by the symmetric majorant behind δ taken at
	// (min(i,j), max(i,j)), whose Frobenius norm is at most √2 times δ.
	return a, accurate.MulUp(delta, 1.4143)
}

// sumSqEst is the plain floating-point Σ c_i², an estimate of ‖c‖².
func sumSqEst(c []float64) float64 {
	var s float64
	for _, v := range c {
		s += float64(v * v)
	}
	return s
}

// upper finishes the bound of MaxEig from the assembled A, its error bound
// δ, the estimate cEst of ‖c‖² and the eigenvalue estimate est.
func (f *BlockForm) upper(c, a []float64, delta, cEst, est float64) float64 {
	var w cholWork
	return f.upperWith(c, a, delta, cEst, est, &w)
}

// upperWith is upper with the caller's workspace for the verified test
// (maxEigUpperSym and minEigLowerSym: verified's MaxEigUpper and
// MinEigLower on the upper triangle of A, bit for bit).
func (f *BlockForm) upperWith(c, a []float64, delta, cEst, est float64, w *cholWork) float64 {
	for _, v := range c {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return math.Inf(1)
		}
	}
	if f.eta >= 0.5 {
		return math.Inf(1)
	}
	if !f.comp {
		lam := accurate.AddUp(maxEigUpperSym(a, f.p, est, w), delta)
		return accurate.Up(math.Max(lam, 0) / accurate.Down(1-f.eta))
	}
	cc := accurate.SumSqUpper(c)
	lmin := accurate.Down(minEigLowerSym(a, f.p, cEst-est, w) - delta)
	sub := accurate.Down(math.Max(lmin, 0) / accurate.Up(1+f.eta))
	return math.Max(0, accurate.Up(cc-sub))
}
