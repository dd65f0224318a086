package subspace

import (
	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
	"gonum.org/v1/gonum/mat"
)

// The contractions below treat the stored vectors S (s × mn) as an exactly
// orthonormal family: P_W = SᵀS when W is stored, P_W = I − SᵀS when W⊥ is.
// They are the fast, uncertified oracles of the searches; the certified
// bounds are in bound.go.

func (w *Subspace) checkX(x []float64, what string) {
	if len(x) != w.m {
		panic("subspace: " + what + " has length " + itoa(len(x)) + ", want m = " + itoa(w.m))
	}
}

func (w *Subspace) checkY(y []float64, what string) {
	if len(y) != w.n {
		panic("subspace: " + what + " has length " + itoa(len(y)) + ", want n = " + itoa(w.n))
	}
}

func itoa(v int) string {
	if v == 0 {
		return "0"
	}
	neg := v < 0
	if neg {
		v = -v
	}
	var b [20]byte
	i := len(b)
	for v > 0 {
		i--
		b[i] = byte('0' + v%10)
		v /= 10
	}
	if neg {
		i--
		b[i] = '-'
	}
	return string(b[i:])
}

func (w *Subspace) stored() blas64.General {
	return blas64.General{Rows: w.s, Cols: w.m * w.n, Stride: w.m * w.n, Data: w.q}
}

// kron writes x⊗y into v.
func kron(v, x, y []float64) {
	n := len(y)
	for i, xi := range x {
		row := v[i*n : (i+1)*n]
		for j, yj := range y {
			row[j] = xi * yj
		}
	}
}

func dot(a, b []float64) float64 {
	return blas64.Dot(blas64.Vector{N: len(a), Data: a, Inc: 1}, blas64.Vector{N: len(b), Data: b, Inc: 1})
}

// coeffs sets c = S a (length s).
func (w *Subspace) coeffs(c, a []float64) {
	if w.s == 0 {
		return
	}
	blas64.Gemv(blas.NoTrans, 1, w.stored(), blas64.Vector{N: len(a), Data: a, Inc: 1}, 0, blas64.Vector{N: w.s, Data: c, Inc: 1})
}

// Value returns ‖P_W(x⊗y)‖², which is h(x, y) for unit x and y.
// It panics if len(x) ≠ m or len(y) ≠ n.
//
// With c_t = xᵀQ_t y for the stored matrices Q_t, the value is Σ c_t² (or
// ‖x‖²‖y‖² − Σ c_t² when W⊥ is stored). Each c_t is formed as xᵀ(Q_t y):
// the rows of Q_t dotted with y (dotRows over the basis viewed as an
// (s·m)×n matrix), then with x, a batch of stored matrices at a time in a
// small buffer, so the basis is read once and nothing of length mn is
// formed.
func (w *Subspace) Value(x, y []float64) float64 {
	w.checkX(x, "x")
	w.checkY(y, "y")
	cc := w.coeffSumSq(x, y)
	if w.comp {
		return dot(x, x)*dot(y, y) - cc
	}
	return cc
}

// batchRows is the number of rows of Q_t y (or of Q_tᵀ x) that the
// fused contractions keep at a time: 8 KiB, in the L1 cache.
const batchRows = 1024

// smallWork is the length of the buffers the contractions keep on the
// stack (2 KiB: Go zeroes them on every call, so they stay small); larger
// ones come from contractScratch.
const smallWork = 256

// work returns a buffer of n entries (contents undefined): small, when it
// is long enough, else one from contractScratch, whose handle h the caller
// gives back with putScratch.
func work(small []float64, n int) (h *[]float64, buf []float64) {
	if n <= len(small) {
		return nil, small[:n]
	}
	return getScratch(n)
}

// batch returns how many of s stored matrices a fused contraction takes at
// a time when each gives p entries.
func batch(p, s int) int { return max(1, min(s, batchRows/max(p, 1))) }

// coeffSumSq returns Σ_t (xᵀQ_t y)².
func (w *Subspace) coeffSumSq(x, y []float64) float64 {
	m, n, L := w.m, w.n, w.m*w.n
	tb := batch(m, w.s)
	var small [smallWork]float64
	h, buf := work(small[:], tb*m+tb)
	z, c := buf[:tb*m], buf[tb*m:]
	var cc float64
	for t0 := 0; t0 < w.s; t0 += tb {
		nt := min(tb, w.s-t0)
		zt, ct := z[:nt*m], c[:nt]
		dotRows(zt, w.q[t0*L:], n, y)
		dotRows(ct, zt, m, x)
		for _, v := range ct {
			cc += float64(v * v)
		}
	}
	if h != nil {
		putScratch(h)
	}
	return cc
}

// Residual returns ‖x⊗y − P_W(x⊗y)‖², which is d²(x, y) for unit x and y.
// It is computed from the residual vector itself (never as 1 − h), so it is
// accurate to about u·‖x‖‖y‖ in d even when d is tiny.
// It panics if len(x) ≠ m or len(y) ≠ n.
func (w *Subspace) Residual(x, y []float64) float64 {
	w.checkX(x, "x")
	w.checkY(y, "y")
	L := w.m * w.n
	v := make([]float64, L)
	kron(v, x, y)
	c := make([]float64, w.s)
	w.coeffs(c, v)
	if w.comp {
		return dot(c, c)
	}
	if w.s > 0 {
		blas64.Gemv(blas.Trans, -1, w.stored(), blas64.Vector{N: w.s, Data: c, Inc: 1}, 1, blas64.Vector{N: L, Data: v, Inc: 1})
	}
	return dot(v, v)
}

// Project writes P_W a into dst, for a full matrix a given as its row-major
// vec (length mn). dst and a may be the same slice.
// It panics if len(a) or len(dst) ≠ mn.
func (w *Subspace) Project(dst, a []float64) {
	L := w.m * w.n
	if len(a) != L || len(dst) != L {
		panic("subspace: Project needs vectors of length m·n = " + itoa(L))
	}
	c := make([]float64, w.s)
	w.coeffs(c, a)
	if w.comp {
		copy(dst, a)
		if w.s > 0 {
			blas64.Gemv(blas.Trans, -1, w.stored(), blas64.Vector{N: w.s, Data: c, Inc: 1}, 1, blas64.Vector{N: L, Data: dst, Inc: 1})
		}
		return
	}
	if w.s == 0 {
		clear(dst)
		return
	}
	blas64.Gemv(blas.Trans, 1, w.stored(), blas64.Vector{N: w.s, Data: c, Inc: 1}, 0, blas64.Vector{N: L, Data: dst, Inc: 1})
}

// Gradient returns h = ‖P_W(x⊗y)‖² and writes its Euclidean gradient:
// gx = ∂h/∂x = 2·M y and gy = ∂h/∂y = 2·Mᵀx, where M = P_W(x yᵀ).
// If buf is non-nil it must have length mn and receives vec(M).
// It panics on wrong lengths.
func (w *Subspace) Gradient(gx, gy, x, y, buf []float64) float64 {
	return w.gradientWith(gx, gy, x, y, buf, w.Project)
}

// gradientWith is Gradient with the projection given (Project, or
// SearchProject for SearchGradient).
func (w *Subspace) gradientWith(gx, gy, x, y, buf []float64, project func(dst, a []float64)) float64 {
	w.checkX(x, "x")
	w.checkY(y, "y")
	w.checkX(gx, "gx")
	w.checkY(gy, "gy")
	L := w.m * w.n
	if buf == nil {
		buf = make([]float64, L)
	} else if len(buf) != L {
		panic("subspace: Gradient's matrix buffer must have length m·n")
	}
	kron(buf, x, y)
	project(buf, buf)
	mm := blas64.General{Rows: w.m, Cols: w.n, Stride: w.n, Data: buf}
	blas64.Gemv(blas.NoTrans, 2, mm, blas64.Vector{N: w.n, Data: y, Inc: 1}, 0, blas64.Vector{N: w.m, Data: gx, Inc: 1})
	blas64.Gemv(blas.Trans, 2, mm, blas64.Vector{N: w.m, Data: x, Inc: 1}, 0, blas64.Vector{N: w.n, Data: gy, Inc: 1})
	return dot(gx, x) / 2
}

// zy writes Z = [Q_t y]_t (s×m, row-major) for the stored matrices Q_t:
// one dotRows over the basis viewed as an (s·m)×n matrix.
func (w *Subspace) zy(z, y []float64) {
	dotRows(z[:w.s*w.m], w.q, w.n, y)
}

// zx writes Z = [Q_tᵀ x]_t (s×n, row-major): for each t, the rows of Q_t
// weighted by x and summed (axpyRows).
func (w *Subspace) zx(z, x []float64) {
	L, n := w.m*w.n, w.n
	for t := 0; t < w.s; t++ {
		zt := z[t*n : (t+1)*n]
		clear(zt)
		axpyRows(zt, x, w.q[t*L:], n)
	}
}

// G writes the m×m matrix G(y) = (I⊗y)ᵀ P_W (I⊗y) into dst, so that
// xᵀG(y)x = ‖P_W(x⊗y)‖². An empty dst is resized. Forming G costs one pass
// over the basis (Z = [Q_t y]_t) plus the Gram product ZᵀZ (about s·m²/2
// multiply-adds, gramUpper); GOperator avoids the latter.
// It panics if len(y) ≠ n or dst is not empty and not m×m.
func (w *Subspace) G(dst *mat.SymDense, y []float64) {
	w.checkY(y, "y")
	hz, z := getScratch(w.s*w.m + gramPad)
	clear(z[w.s*w.m:])
	w.zy(z, y)
	gramInto(dst, z, w.s, w.m, w.comp, dot(y, y))
	putScratch(hz)
}

// H writes the n×n matrix H(x) = (x⊗I)ᵀ P_W (x⊗I) into dst, so that
// yᵀH(x)y = ‖P_W(x⊗y)‖². An empty dst is resized.
// It panics if len(x) ≠ m or dst is not empty and not n×n.
func (w *Subspace) H(dst *mat.SymDense, x []float64) {
	w.checkX(x, "x")
	hz, z := getScratch(w.s*w.n + gramPad)
	clear(z[w.s*w.n:])
	w.zx(z, x)
	gramInto(dst, z, w.s, w.n, w.comp, dot(x, x))
	putScratch(hz)
}

// Operator is the symmetric positive semidefinite map G(y) or H(x) of a
// Subspace, held in factored form: building it costs one pass over the
// stored basis, and each Apply costs O(s·p) for order p, far less than
// forming the p×p matrix when p is large. It is immutable and safe for
// concurrent use.
//
// A search operator (SearchGOperator, SearchHOperator) of a real subspace
// whose other side is tiny may instead be held free of its factor (see
// freeSide): then each Apply is ApplyG or ApplyH, which make the factor's
// rows again a batch at a time, in one pass over the basis, and give the
// same bits.
type Operator struct {
	z     []float64 // s×p: row t is Q_t y (or Q_tᵀ x)
	s, p  int
	comp  bool
	shift float64   // ‖y‖² (or ‖x‖²), used when the complement is stored
	free  *Subspace // the free form's basis (only p, v and gSide are then set)
	v     []float64 // the free form's point: y (order m) or x (order n)
	gSide bool      // the free form is G(y)
}

// Order returns p, the order of the operator.
func (op *Operator) Order() int { return op.p }

// Apply sets dst = A·src; dst and src may be the same slice. With
// c = Z·src (dotRows), dst = Zᵀc (axpyRows, in order of t) when W is
// stored, and dst = σ·src − Zᵀc when W⊥ is, σ = ‖y‖² (or ‖x‖²): the
// products −c_t·z_t (exactly the negated ones) added to the rounded σ·src
// in order of t.
// It panics on wrong lengths.
func (op *Operator) Apply(dst, src []float64) {
	if len(dst) != op.p || len(src) != op.p {
		panic("subspace: Operator.Apply needs vectors of length " + itoa(op.p))
	}
	if op.free != nil {
		op.free.applyOne(op.gSide, dst, op.v, src)
		return
	}
	if op.s == 0 {
		if op.comp {
			for i := range dst {
				dst[i] = op.shift * src[i]
			}
		} else {
			clear(dst)
		}
		return
	}
	var small [smallWork]float64
	h, c := work(small[:], op.s)
	dotRows(c, op.z, op.p, src)
	if op.comp {
		for t := range c {
			c[t] = -c[t]
		}
		for i := range dst {
			dst[i] = op.shift * src[i]
		}
	} else {
		clear(dst)
	}
	axpyRows(dst, c, op.z, op.p)
	if h != nil {
		putScratch(h)
	}
}

// freeMaxSide and freeMinEntries decide when a search operator is held
// free of its factor (freeSide): when the other side is at most
// freeMaxSide (so that making the factor's rows again costs at most
// freeMaxSide multiply-adds an entry, against the two of an Apply) and the
// factor would hold at least freeMinEntries numbers (8 MiB; a variable so
// that tests can lower it). With m = 2 and n = 4000, say, H(x)'s factor is
// half the basis, and every search holding one (or each point of a
// batch) would add that much memory.
const freeMaxSide = 4

var freeMinEntries = 1 << 20

// freeSide reports whether the search operators of order p, whose factor
// rows are sums over the other side of length other, are held free of
// their factor: a real subspace only.
func (w *Subspace) freeSide(p, other int) bool {
	return w.cx == nil && other <= freeMaxSide && int64(w.s)*int64(p) >= int64(freeMinEntries)
}

// GOperator returns G(y) (order m) in factored form: one dotRows over the
// stored basis viewed as an (s·m)×n matrix. Each entry of the factor Z is
// a sum of n rounded products, so within γ_n Σ_j |Q_t[i,j]·y_j| of the
// exact one (contract_kernel.go), as the certified bound net.MaxEigG
// assumes.
// It panics if len(y) ≠ n.
func (w *Subspace) GOperator(y []float64) *Operator {
	w.checkY(y, "y")
	op := &Operator{z: make([]float64, w.s*w.m), s: w.s, p: w.m, comp: w.comp, shift: dot(y, y)}
	w.zy(op.z, y)
	return op
}

// HOperator returns H(x) (order n) in factored form: for each stored
// matrix, its rows weighted by x and summed (axpyRows). Each entry of the
// factor is a sum of m rounded products, within γ_m Σ_i |x_i·Q_t[i,j]| of
// the exact one, as net.MaxEigH assumes.
// It panics if len(x) ≠ m.
func (w *Subspace) HOperator(x []float64) *Operator {
	w.checkX(x, "x")
	op := &Operator{z: make([]float64, w.s*w.n), s: w.s, p: w.n, comp: w.comp, shift: dot(x, x)}
	w.zx(op.z, x)
	return op
}

// gramInto writes the matrix of the operator with factor z (s×p, followed
// by gramPad zeros) into dst: ZᵀZ (gramUpper), or shift·I − ZᵀZ when comp
// is set.
func gramInto(dst *mat.SymDense, z []float64, s, p int, comp bool, shift float64) {
	if dst.IsEmpty() {
		dst.ReuseAsSym(p)
	}
	if dst.SymmetricDim() != p {
		panic("subspace: partial matrix has the wrong order")
	}
	raw := dst.RawSymmetric()
	if raw.Uplo != blas.Upper {
		panic("subspace: partial matrix must be stored upper")
	}
	if s > 0 {
		gramUpper(z, s, p, raw.Data, raw.Stride)
	} else {
		for i := 0; i < p; i++ {
			clear(raw.Data[i*raw.Stride+i : i*raw.Stride+p])
		}
	}
	if comp {
		for i := 0; i < p; i++ {
			row := raw.Data[i*raw.Stride : i*raw.Stride+p]
			for j := i; j < p; j++ {
				row[j] = -row[j]
			}
			row[i] += shift
		}
	}
}

// ApplyG writes G(y)·x into dst (length m) without forming G(y): the same
// sums in the same order as GOperator(y).Apply(dst, x), so the same
// result bit for bit, but a batch of the rows Q_t y at a time in a small
// buffer instead of all of Z. dst and x may be the same slice.
// It panics on wrong lengths.
func (w *Subspace) ApplyG(dst, y, x []float64) {
	w.checkX(x, "x")
	w.checkX(dst, "dst")
	w.checkY(y, "y")
	m, n, L := w.m, w.n, w.m*w.n
	tb := batch(m, w.s)
	var small [smallWork]float64
	h, buf := work(small[:], tb*m+tb+m)
	z, c, acc := buf[:tb*m], buf[tb*m:tb*m+tb], buf[tb*m+tb:]
	w.applyStart(acc, x, y)
	for t0 := 0; t0 < w.s; t0 += tb {
		nt := min(tb, w.s-t0)
		zt := z[:nt*m]
		dotRows(zt, w.q[t0*L:], n, y)
		w.applyBatch(acc, zt, c[:nt], x)
	}
	copy(dst, acc)
	if h != nil {
		putScratch(h)
	}
}

// ApplyH writes H(x)·y into dst (length n) without forming H(x), as
// ApplyG: bit for bit HOperator(x).Apply(dst, y). dst and y may be the
// same slice.
// It panics on wrong lengths.
func (w *Subspace) ApplyH(dst, x, y []float64) {
	w.checkY(y, "y")
	w.checkY(dst, "dst")
	w.checkX(x, "x")
	n, L := w.n, w.m*w.n
	tb := batch(n, w.s)
	var small [smallWork]float64
	h, buf := work(small[:], tb*n+tb+n)
	z, c, acc := buf[:tb*n], buf[tb*n:tb*n+tb], buf[tb*n+tb:]
	w.applyStart(acc, y, x)
	for t0 := 0; t0 < w.s; t0 += tb {
		nt := min(tb, w.s-t0)
		zt := z[:nt*n]
		for u := 0; u < nt; u++ {
			zu := zt[u*n : (u+1)*n]
			clear(zu)
			axpyRows(zu, x, w.q[(t0+u)*L:], n)
		}
		w.applyBatch(acc, zt, c[:nt], y)
	}
	copy(dst, acc)
	if h != nil {
		putScratch(h)
	}
}

// applyOne is ApplyG (gSide: dst = G(v)·u) or ApplyH (dst = H(v)·u).
func (w *Subspace) applyOne(gSide bool, dst, v, u []float64) {
	if gSide {
		w.ApplyG(dst, v, u)
	} else {
		w.ApplyH(dst, v, u)
	}
}

// applyStart sets acc, the accumulator of ApplyG or ApplyH for the vector
// v the operator is applied to (u the other side), to zero, or to ‖u‖²·v
// when W⊥ is stored (Apply's start).
func (w *Subspace) applyStart(acc, v, u []float64) {
	if !w.comp {
		clear(acc)
		return
	}
	shift := dot(u, u)
	for i, a := range v {
		acc[i] = shift * a
	}
}

// applyBatch adds the contribution of a batch of rows z_t of Z (zt,
// len(c) rows of length len(v)) to acc, as Apply does: c_t = z_t·v, then
// acc += c_t·z_t (−c_t when W⊥ is stored) in order of t.
func (w *Subspace) applyBatch(acc, zt, c, v []float64) {
	p := len(v)
	dotRows(c, zt, p, v)
	if w.comp {
		for t := range c {
			c[t] = -c[t]
		}
	}
	axpyRows(acc, c, zt, p)
}

// ApplyPartialTrace1 writes Tr₂(P_W)·x into dst (both length m), where
// Tr₂(P_W) = Σ_t Q_tQ_tᵀ for an orthonormal basis Q_t of W (the flattening
// matrix on the row side). It costs two passes over the stored basis.
// It panics on wrong lengths.
func (w *Subspace) ApplyPartialTrace1(dst, x []float64) {
	w.checkX(x, "x")
	w.checkX(dst, "dst")
	L := w.m * w.n
	// One row of the factor Z = [Q_tᵀx]_t at a time (zx makes each row
	// alone, so the numbers are those of the whole factor, without its
	// s·n words).
	h, z := getScratch(w.n)
	clear(dst)
	for t := 0; t < w.s; t++ {
		clear(z)
		axpyRows(z, x, w.q[t*L:], w.n)
		g := blas64.General{Rows: w.m, Cols: w.n, Stride: w.n, Data: w.q[t*L : (t+1)*L]}
		blas64.Gemv(blas.NoTrans, 1, g, blas64.Vector{N: w.n, Data: z, Inc: 1}, 1, blas64.Vector{N: w.m, Data: dst, Inc: 1})
	}
	putScratch(h)
	if w.comp {
		for i := range dst {
			dst[i] = float64(w.n)*x[i] - dst[i]
		}
	}
}

// ApplyPartialTrace2 writes Tr₁(P_W)·y into dst (both length n), where
// Tr₁(P_W) = Σ_t Q_tᵀQ_t for an orthonormal basis Q_t of W.
// It panics on wrong lengths.
func (w *Subspace) ApplyPartialTrace2(dst, y []float64) {
	w.checkY(y, "y")
	w.checkY(dst, "dst")
	clear(dst)
	if w.s > 0 {
		// Rows of Z = [Q_t y]_t a chunk at a time, added in order.
		rows := w.s * w.m
		T := min(rows, max(w.m, batchRows))
		h, z := getScratch(T)
		for r0 := 0; r0 < rows; r0 += T {
			nr := min(T, rows-r0)
			dotRows(z[:nr], w.q[r0*w.n:], w.n, y)
			g := blas64.General{Rows: nr, Cols: w.n, Stride: w.n, Data: w.q[r0*w.n : (r0+nr)*w.n]}
			blas64.Gemv(blas.Trans, 1, g, blas64.Vector{N: nr, Data: z[:nr], Inc: 1}, 1, blas64.Vector{N: w.n, Data: dst, Inc: 1})
		}
		putScratch(h)
	}
	if w.comp {
		for j := range dst {
			dst[j] = float64(w.m)*y[j] - dst[j]
		}
	}
}
