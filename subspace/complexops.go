package subspace

import (
	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
)

// Search operators of a complex subspace.
//
// GOperator and HOperator of a complex subspace contract the stored W''
// (2k rows of 2m×2n): 8kL numbers read per operator (L = mn), where the
// real problem of the same size reads kL. Local searches need only good
// estimates, so SearchGOperator and SearchHOperator build the same
// operators from an orthonormal complex basis U_1..U_k of W (ComplexSpan,
// computed once): 4kL numbers read.
//
// Derivation (here). With U_t = A_t + iB_t orthonormal, h = Σ_t |⟨U_t,
// x⊗y⟩|² and h'' = h/2. ⟨U_t, x⊗y⟩ = Σ_ij conj(U_t[i,j]) x_i y_j = xᵀc_t
// with c_t = conj(U_t)y = (A_t y_r + B_t y_i) + i(A_t y_i − B_t y_r). In
// the real coordinates X = (x_r, x_i), xᵀc = X·(c_r, −c_i) + i X·(c_i, c_r),
// so h'' = Σ_t [(X·g_t)² + (X·g'_t)²]/2 with g_t = (c_r, −c_i),
// g'_t = (c_i, c_r): G''(Y) = ZᵀZ for the 2k rows g_t/√2, g'_t/√2. On the
// other side ⟨U_t, x⊗y⟩ = yᵀe_t, e_t = conj(U_t)ᵀx = (A_tᵀx_r + B_tᵀx_i) +
// i(A_tᵀx_i − B_tᵀx_r), and H''(X) has the rows (e_r, −e_i)/√2,
// (e_i, e_r)/√2. These equal W'''s operators up to the rounding of U (its
// orthonormality is an estimate): they must never feed a certified bound
// (net's bounds use GOperator and HOperator).

// complexOps is the complex basis in the layout of the contractions: k
// blocks of 2m×n, rows 0..m−1 the real parts A_t, rows m..2m−1 the
// imaginary parts B_t.
type complexOps struct {
	k, m, n int
	v       []float64
}

// ops returns the complex basis of a complex subspace, built once.
func (cx *complexPart) ops(w *Subspace) *complexOps {
	cx.once.Do(func() {
		cb := w.ComplexSpan()
		m, n, L := cb.Rows, cb.Cols, cb.Rows*cb.Cols
		o := &complexOps{k: cb.Count, m: m, n: n, v: make([]float64, cb.Count*2*L)}
		for t := 0; t < cb.Count; t++ {
			blk := o.v[t*2*L : (t+1)*2*L]
			for l, z := range cb.Data[t*L : (t+1)*L] {
				blk[l], blk[L+l] = real(z), imag(z)
			}
		}
		cx.cops = o
	})
	return cx.cops
}

// SearchGOperator returns G(y) for a local search: for a real subspace
// GOperator(y) itself; for a complex one the same operator of W” built
// from the complex basis (see the notes on search operators above), equal
// up to rounding, at half the data. Never use it for a certified bound.
// It panics if len(y) ≠ Cols().
func (w *Subspace) SearchGOperator(y []float64) *Operator {
	if w.cx == nil {
		if w.freeSide(w.m, w.n) {
			w.checkY(y, "y")
			return &Operator{p: w.m, free: w, v: append([]float64(nil), y...), gSide: true}
		}
		return w.GOperator(y)
	}
	w.checkY(y, "y")
	o := w.cx.ops(w)
	m, n, k := o.m, o.n, o.k
	// S·y_r and S·y_i for the stacked (k·2m)×n matrix S of blocks [A_t; B_t].
	s := blas64.General{Rows: k * 2 * m, Cols: n, Stride: n, Data: o.v}
	pr, pi := make([]float64, k*2*m), make([]float64, k*2*m)
	if k > 0 {
		blas64.Gemv(blas.NoTrans, 1, s, blas64.Vector{N: n, Data: y[:n], Inc: 1}, 0, blas64.Vector{N: k * 2 * m, Data: pr, Inc: 1})
		blas64.Gemv(blas.NoTrans, 1, s, blas64.Vector{N: n, Data: y[n:], Inc: 1}, 0, blas64.Vector{N: k * 2 * m, Data: pi, Inc: 1})
	}
	op := &Operator{z: make([]float64, 2*k*2*m), s: 2 * k, p: 2 * m, shift: dot(y, y)}
	const r2 = 0x1.6a09e667f3bcdp-01 // 1/√2
	for t := 0; t < k; t++ {
		ay, by := pr[t*2*m:t*2*m+m], pr[t*2*m+m:(t+1)*2*m] // A y_r, B y_r
		ai, bi := pi[t*2*m:t*2*m+m], pi[t*2*m+m:(t+1)*2*m] // A y_i, B y_i
		g, g2 := op.z[2*t*2*m:(2*t+1)*2*m], op.z[(2*t+1)*2*m:(2*t+2)*2*m]
		for i := 0; i < m; i++ {
			cr, ci := ay[i]+bi[i], ai[i]-by[i]
			g[i], g[m+i] = r2*cr, -r2*ci
			g2[i], g2[m+i] = r2*ci, r2*cr
		}
	}
	return op
}

// SearchHOperator is SearchGOperator for H(x). It panics if
// len(x) ≠ Rows().
func (w *Subspace) SearchHOperator(x []float64) *Operator {
	if w.cx == nil {
		if w.freeSide(w.n, w.m) {
			w.checkX(x, "x")
			return &Operator{p: w.n, free: w, v: append([]float64(nil), x...)}
		}
		return w.HOperator(x)
	}
	w.checkX(x, "x")
	o := w.cx.ops(w)
	m, n, k := o.m, o.n, o.k
	op := &Operator{z: make([]float64, 2*k*2*n), s: 2 * k, p: 2 * n, shift: dot(x, x)}
	u1, u2 := xPair(x, m)
	er, ei := make([]float64, n), make([]float64, n)
	const r2 = 0x1.6a09e667f3bcdp-01
	for t := 0; t < k; t++ {
		blk := blas64.General{Rows: 2 * m, Cols: n, Stride: n, Data: o.v[t*2*m*n : (t+1)*2*m*n]}
		blas64.Gemv(blas.Trans, 1, blk, blas64.Vector{N: 2 * m, Data: u1, Inc: 1}, 0, blas64.Vector{N: n, Data: er, Inc: 1})
		blas64.Gemv(blas.Trans, 1, blk, blas64.Vector{N: 2 * m, Data: u2, Inc: 1}, 0, blas64.Vector{N: n, Data: ei, Inc: 1})
		g, g2 := op.z[2*t*2*n:(2*t+1)*2*n], op.z[(2*t+1)*2*n:(2*t+2)*2*n]
		for j := 0; j < n; j++ {
			g[j], g[n+j] = r2*er[j], -r2*ei[j]
			g2[j], g2[n+j] = r2*ei[j], r2*er[j]
		}
	}
	return op
}

// SearchApplyG sets dst = G(y)·x, as SearchGOperator(y).Apply(dst, x)
// does and with the same bits, without holding G(y)'s factor for a real
// subspace (ApplyG). It panics on wrong lengths.
func (w *Subspace) SearchApplyG(dst, y, x []float64) {
	if w.cx != nil {
		w.SearchGOperator(y).Apply(dst, x)
		return
	}
	w.ApplyG(dst, y, x)
}

// SearchApplyH sets dst = H(x)·y as SearchApplyG does for G (ApplyH).
func (w *Subspace) SearchApplyH(dst, x, y []float64) {
	if w.cx != nil {
		w.SearchHOperator(x).Apply(dst, y)
		return
	}
	w.ApplyH(dst, x, y)
}

// xPair returns (x_r, x_i) and (x_i, −x_r) for X = (x_r, x_i) of length
// 2m: with a block [A_t; B_t], [A; B]ᵀ of them are the real and imaginary
// parts of U_t*x (see SearchHOperator).
func xPair(x []float64, m int) (u1, u2 []float64) {
	u1, u2 = make([]float64, 2*m), make([]float64, 2*m)
	for i := 0; i < m; i++ {
		u1[i], u1[m+i] = x[i], x[m+i]
		u2[i], u2[m+i] = x[m+i], -x[i]
	}
	return u1, u2
}

// SearchPartialTrace1 is ApplyPartialTrace1 for a local search: for a
// complex subspace Tr₂(P”)·X from the complex basis (derived here: the
// quadratic form of Tr₂(P”) is Σ_rows ‖Q_tᵀX‖² = Σ_t ‖U_t*x‖², so
// Tr₂(P”) is the realification of Σ_t U_tU_t*, applied as
// f = Σ_t U_t(U_t*x), dst = (Re f, Im f)), at half the data; equal to
// ApplyPartialTrace1 up to rounding. It panics on wrong lengths.
func (w *Subspace) SearchPartialTrace1(dst, x []float64) {
	if w.cx == nil {
		w.ApplyPartialTrace1(dst, x)
		return
	}
	w.checkX(x, "x")
	w.checkX(dst, "dst")
	o := w.cx.ops(w)
	m, n := o.m, o.n
	u1, u2 := xPair(x, m)
	er, ei := make([]float64, n), make([]float64, n)
	pr, pi := make([]float64, 2*m), make([]float64, 2*m)
	clear(dst)
	for t := 0; t < o.k; t++ {
		blk := blas64.General{Rows: 2 * m, Cols: n, Stride: n, Data: o.v[t*2*m*n : (t+1)*2*m*n]}
		// e = U*x: e_r = Aᵀx_r + Bᵀx_i, e_i = Aᵀx_i − Bᵀx_r.
		blas64.Gemv(blas.Trans, 1, blk, blas64.Vector{N: 2 * m, Data: u1, Inc: 1}, 0, blas64.Vector{N: n, Data: er, Inc: 1})
		blas64.Gemv(blas.Trans, 1, blk, blas64.Vector{N: 2 * m, Data: u2, Inc: 1}, 0, blas64.Vector{N: n, Data: ei, Inc: 1})
		// U e = (A e_r − B e_i) + i(A e_i + B e_r), from [A; B]e_r and [A; B]e_i.
		blas64.Gemv(blas.NoTrans, 1, blk, blas64.Vector{N: n, Data: er, Inc: 1}, 0, blas64.Vector{N: 2 * m, Data: pr, Inc: 1})
		blas64.Gemv(blas.NoTrans, 1, blk, blas64.Vector{N: n, Data: ei, Inc: 1}, 0, blas64.Vector{N: 2 * m, Data: pi, Inc: 1})
		for i := 0; i < m; i++ {
			dst[i] += pr[i] - pi[m+i]
			dst[m+i] += pi[i] + pr[m+i]
		}
	}
}

// SearchPartialTrace2 is SearchPartialTrace1 for the other side:
// Tr₁(P”) is the realification of Σ_t U_tᵀ conj(U_t) (the quadratic form
// Σ_t ‖conj(U_t)y‖², derived as above), applied as f = Σ_t U_tᵀ c_t with
// c_t = conj(U_t)y. It panics on wrong lengths.
func (w *Subspace) SearchPartialTrace2(dst, y []float64) {
	if w.cx == nil {
		w.ApplyPartialTrace2(dst, y)
		return
	}
	w.checkY(y, "y")
	w.checkY(dst, "dst")
	o := w.cx.ops(w)
	m, n := o.m, o.n
	ar, ai := make([]float64, 2*m), make([]float64, 2*m)
	v1, v2 := make([]float64, 2*m), make([]float64, 2*m)
	qr, qi := make([]float64, n), make([]float64, n)
	clear(dst)
	for t := 0; t < o.k; t++ {
		blk := blas64.General{Rows: 2 * m, Cols: n, Stride: n, Data: o.v[t*2*m*n : (t+1)*2*m*n]}
		// [A; B]y_r and [A; B]y_i: c_r = A y_r + B y_i, c_i = A y_i − B y_r.
		blas64.Gemv(blas.NoTrans, 1, blk, blas64.Vector{N: n, Data: y[:n], Inc: 1}, 0, blas64.Vector{N: 2 * m, Data: ar, Inc: 1})
		blas64.Gemv(blas.NoTrans, 1, blk, blas64.Vector{N: n, Data: y[n:], Inc: 1}, 0, blas64.Vector{N: 2 * m, Data: ai, Inc: 1})
		for i := 0; i < m; i++ {
			cr, ci := ar[i]+ai[m+i], ai[i]-ar[m+i]
			// Uᵀc = (Aᵀc_r − Bᵀc_i) + i(Aᵀc_i + Bᵀc_r) = [A; B]ᵀ(c_r, −c_i) + i[A; B]ᵀ(c_i, c_r).
			v1[i], v1[m+i] = cr, -ci
			v2[i], v2[m+i] = ci, cr
		}
		blas64.Gemv(blas.Trans, 1, blk, blas64.Vector{N: 2 * m, Data: v1, Inc: 1}, 0, blas64.Vector{N: n, Data: qr, Inc: 1})
		blas64.Gemv(blas.Trans, 1, blk, blas64.Vector{N: 2 * m, Data: v2, Inc: 1}, 0, blas64.Vector{N: n, Data: qi, Inc: 1})
		for j := 0; j < n; j++ {
			dst[j] += qr[j]
			dst[n+j] += qi[j]
		}
	}
}

// SearchProject is Project for a local search: for a complex subspace
// P_{W”}a from the complex basis (derived here: P_{W”} = NᵀPN with N the
// co-isometry of NewComplex and P the projector of W_R, the realification
// of P_W; Na = (a_rr − a_ii, a_ri + a_ir)/√2 = (Re z, Im z) for z ∈ C^L,
// P_W z = Σ_t U_t⟨U_t, z⟩, and Nᵀ(u, v) = [[u, v], [v, −u]]/√2), at half
// the data; equal to Project up to rounding. dst and a may be the same
// slice. It panics if len(a) or len(dst) ≠ Rows()·Cols().
func (w *Subspace) SearchProject(dst, a []float64) {
	if w.cx == nil {
		w.Project(dst, a)
		return
	}
	m2, n2 := w.m, w.n
	if len(a) != m2*n2 || len(dst) != m2*n2 {
		panic("subspace: SearchProject needs vectors of length m·n = " + itoa(m2*n2))
	}
	o := w.cx.ops(w)
	m, n, k := o.m, o.n, o.k
	L := m * n
	const r2 = 0x1.6a09e667f3bcdp-01                     // 1/√2
	w1, w2 := make([]float64, 2*L), make([]float64, 2*L) // (p, q) and (q, −p), z = p + iq
	for i := 0; i < m; i++ {
		for j := 0; j < n; j++ {
			p := r2 * (a[i*n2+j] - a[(m+i)*n2+n+j])
			q := r2 * (a[i*n2+n+j] + a[(m+i)*n2+j])
			w1[i*n+j], w1[L+i*n+j] = p, q
			w2[i*n+j], w2[L+i*n+j] = q, -p
		}
	}
	if k == 0 {
		clear(dst)
		return
	}
	v := blas64.General{Rows: k, Cols: 2 * L, Stride: 2 * L, Data: o.v}
	cr, ci := make([]float64, k), make([]float64, k)
	// ⟨U_t, z⟩ = Σ(A p + B q) + iΣ(A q − B p).
	blas64.Gemv(blas.NoTrans, 1, v, blas64.Vector{N: 2 * L, Data: w1, Inc: 1}, 0, blas64.Vector{N: k, Data: cr, Inc: 1})
	blas64.Gemv(blas.NoTrans, 1, v, blas64.Vector{N: 2 * L, Data: w2, Inc: 1}, 0, blas64.Vector{N: k, Data: ci, Inc: 1})
	// Σ_t U_t c_t = Σ(A c_r − B c_i) + iΣ(A c_i + B c_r), from Vᵀc_r and Vᵀc_i.
	g1, g2 := w1, w2 // reused
	blas64.Gemv(blas.Trans, 1, v, blas64.Vector{N: k, Data: cr, Inc: 1}, 0, blas64.Vector{N: 2 * L, Data: g1, Inc: 1})
	blas64.Gemv(blas.Trans, 1, v, blas64.Vector{N: k, Data: ci, Inc: 1}, 0, blas64.Vector{N: 2 * L, Data: g2, Inc: 1})
	for i := 0; i < m; i++ {
		for j := 0; j < n; j++ {
			l := i*n + j
			u, vv := r2*(g1[l]-g2[L+l]), r2*(g2[l]+g1[L+l])
			dst[i*n2+j], dst[i*n2+n+j] = u, vv
			dst[(m+i)*n2+j], dst[(m+i)*n2+n+j] = vv, -u
		}
	}
}

// SearchGradient is Gradient for a local search: the projection by
// SearchProject (for a complex subspace, from the complex basis at half the
// data; equal to Gradient up to rounding). It panics on wrong lengths.
func (w *Subspace) SearchGradient(gx, gy, x, y, buf []float64) float64 {
	return w.gradientWith(gx, gy, x, y, buf, w.SearchProject)
}
