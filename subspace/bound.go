package subspace

import (
	"context"
	"math"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
	"gonum.org/v1/gonum/mat"

	"github.com/segre-lab/segre/internal/accurate"
	"github.com/segre-lab/segre/internal/eigen"
	"github.com/segre-lab/segre/internal/verified"
)

// ResidualBound returns a proven upper bound on dist_F(x yᵀ, W) for the
// vectors x, y exactly as given (not normalised), W being the subspace the
// stored vectors define exactly. It never underestimates, whatever the
// rounding; it returns +Inf when it cannot prove anything finite.
//
// Derivation, W stored (rows S, not assumed orthonormal). For every float
// coefficient vector c, Sᵀc ∈ W exactly, so dist(x⊗y, W) ≤ ‖x⊗y − Sᵀc‖.
// We take c = fl(S v) refined once by c += fl(S fl(v − Sᵀc)), and evaluate
// each entry ρ_ℓ = x_i y_j − Σ_t c_t S_tℓ of the residual with the
// compensated dot product accurate.Acc, which returns ρ̃_ℓ and a proven
// b_ℓ ≥ |ρ̃_ℓ − ρ_ℓ|. Then ‖ρ‖² ≤ Σ_ℓ (|ρ̃_ℓ| + b_ℓ)², evaluated with upward
// rounding.
//
// Derivation, W⊥ stored (rows S spanning W⊥ exactly, Gram matrix
// SSᵀ = I + E with ‖E‖₂ ≤ η). The projector onto span(S) is
// Sᵀ(SSᵀ)⁻¹S ⪯ SᵀS/(1−η), so dist(v, W)² = vᵀ Sᵀ(SSᵀ)⁻¹S v ≤ ‖Sv‖²/(1−η).
// Each v_ℓ = x_i y_j is split exactly as p_ℓ + e_ℓ (TwoProd), and each
// (Sv)_t = Σ_ℓ S_tℓ(p_ℓ + e_ℓ) is evaluated by the compensated dot product
// with its proven error bound.
//
// It panics if len(x) ≠ m or len(y) ≠ n.
func (w *Subspace) ResidualBound(x, y []float64) float64 {
	w.checkX(x, "x")
	w.checkY(y, "y")
	m, n, L := w.m, w.n, w.m*w.n
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
	if w.comp {
		if w.eta >= 0.5 {
			return math.Inf(1)
		}
		p := make([]float64, L)
		e := make([]float64, L)
		for i := 0; i < m; i++ {
			for j := 0; j < n; j++ {
				p[i*n+j], e[i*n+j] = accurate.TwoProd(x[i], y[j])
			}
		}
		var ss float64
		for t := 0; t < w.s; t++ {
			row := w.q[t*L : (t+1)*L]
			var acc accurate.Acc
			for l, st := range row {
				acc.AddProd(st, p[l])
				acc.AddProd(st, e[l])
			}
			r, b := acc.Result()
			f := accurate.AddUp(math.Abs(r), b)
			ss += float64(f * f)
		}
		ss = accurate.UpperRel(ss, w.s+1)
		inv := accurate.Up(1 / accurate.Down(1-w.eta))
		return accurate.SqrtUp(accurate.MulUp(ss, inv))
	}
	v := make([]float64, L)
	kron(v, x, y)
	c := make([]float64, w.s)
	if w.s > 0 {
		w.coeffs(c, v)
		r := append([]float64(nil), v...)
		blas64.Gemv(blas.Trans, -1, w.stored(), blas64.Vector{N: w.s, Data: c, Inc: 1}, 1, blas64.Vector{N: L, Data: r, Inc: 1})
		dc := make([]float64, w.s)
		w.coeffs(dc, r)
		for t := range c {
			c[t] += dc[t]
		}
	}
	acc := make([]accurate.Acc, L)
	for i := 0; i < m; i++ {
		for j := 0; j < n; j++ {
			acc[i*n+j].AddProd(x[i], y[j])
		}
	}
	// Blocks of 512 entries keep their accumulators in the L1 cache while
	// every stored row passes over them (each accumulator still sees its
	// terms in the order t = 0, 1, …: the same result as row by row).
	const block = 512
	for l0 := 0; l0 < L; l0 += block {
		l1 := min(L, l0+block)
		ab := acc[l0:l1]
		for t := 0; t < w.s; t++ {
			ct := -c[t]
			if ct == 0 {
				continue
			}
			accurate.AddProds(ab, ct, w.q[t*L+l0:t*L+l1])
		}
	}
	var ss float64
	var rc accurate.ResultConsts // shared: every entry has the same number of terms
	for l := range acc {
		if l == 0 || acc[l].K != acc[l-1].K {
			rc = accurate.NewResultConsts(acc[l].K)
		}
		r, b := acc[l].ResultWith(&rc)
		f := accurate.AddUp(math.Abs(r), b)
		ss += float64(f * f)
	}
	return accurate.SqrtUp(accurate.UpperRel(ss, L+1)) // L squares and L−1 additions: within γ_{L+1}
}

// PartialTraces returns symmetric T1 (m×m) and T2 (n×n) and numbers
// δ1, δ2 ≥ 0 such that, in exact arithmetic for the stored subspace,
//
//	Tr₂(P_W) ⪯ T1 + δ1·I   and   Tr₁(P_W) ⪯ T2 + δ2·I,
//
// where Tr₂(P)_ab = Σ_j P[(a,j),(b,j)] and Tr₁(P)_cd = Σ_i P[(i,c),(i,d)] are
// the partial traces (for an orthonormal basis Q_t of W, Tr₂(P_W) = Σ Q_tQ_tᵀ
// and Tr₁(P_W) = Σ Q_tᵀQ_t). The returned matrices are copies.
//
// Derivation (W stored, rows S, Gram SSᵀ = I + E, ‖E‖ ≤ η): P_W =
// Sᵀ(SSᵀ)⁻¹S ⪯ SᵀS/(1−η), and the partial trace is a positive map, so
// Tr₂(P_W) ⪯ Σ_t S_tS_tᵀ/(1−η) ⪯ Σ_t S_tS_tᵀ + (η/(1−η))·‖S‖_F²·I. The float
// sum T1 = fl(Σ_t S_tS_tᵀ) errs entrywise by at most γ_{sn}Σ|S||S|ᵀ, whose
// spectral norm is at most γ_{sn}‖S‖_F² (Cauchy–Schwarz on each entry, then
// the rank-one majorant [‖r_a‖‖r_b‖] has norm Σ_a‖r_a‖² = ‖S‖_F²).
// (W⊥ stored): Tr₂(P_W) = n·I − Tr₂(P_{W⊥}) and P_{W⊥} ⪰ SᵀS/(1+η), so
// Tr₂(P_W) ⪯ n·I − fl(ΣS_tS_tᵀ) + (γ_{sn}‖S‖_F² + (η/(1+η))‖S‖_F²)·I; the
// rounding of the diagonal n − T_ii adds 2u·max|T_ii|. Likewise for Tr₁.
// A side of order p is formed only if TraceFits(p) and η < 1/2; otherwise
// its matrix is nil and its δ is +Inf (the bound Tr ⪯ +Inf·I is true and says nothing).
func (w *Subspace) PartialTraces() (t1 *mat.SymDense, d1 float64, t2 *mat.SymDense, d2 float64) {
	t1, d1 = w.partialTrace(context.Background(), true)
	t2, d2 = w.partialTrace(context.Background(), false)
	cp := func(s *mat.SymDense) *mat.SymDense {
		if s == nil {
			return nil
		}
		p := s.SymmetricDim()
		return mat.NewSymDense(p, append([]float64(nil), s.RawSymmetric().Data...))
	}
	return cp(t1), d1, cp(t2), d2
}

// TraceFits reports whether a partial trace of order p and the work of
// bounding its top eigenvalue (four p×p matrices: the cached one, the copy
// returned, the verified Cholesky test's factor and its shifted copy) fit
// in the MemoryLimit.
func (w *Subspace) TraceFits(p int) bool {
	return 32*float64(p)*float64(p) <= float64(w.limit)
}

// partialTrace returns the cached T1, δ1 (rows) or T2, δ2 (!rows) of
// PartialTraces, computing that side on first use; callers must not
// modify the matrix. If ctx is done during the computation it returns nil,
// +Inf and caches nothing.
func (w *Subspace) partialTrace(ctx context.Context, rows bool) (*mat.SymDense, float64) {
	i := 1
	if rows {
		i = 0
	}
	w.ptMu[i].Lock()
	defer w.ptMu[i].Unlock()
	if !w.ptDone[i] {
		t, d, ok := w.computePartialTrace(ctx, rows)
		if !ok {
			return nil, math.Inf(1)
		}
		w.pt[i], w.ptDelta[i], w.ptDone[i] = t, d, true
	}
	return w.pt[i], w.ptDelta[i]
}

// computePartialTrace forms one side of PartialTraces (see its derivation),
// checking ctx between blocks of the product; ok is false if ctx was done.
func (w *Subspace) computePartialTrace(ctx context.Context, rows bool) (t *mat.SymDense, d float64, ok bool) {
	m, n, L := w.m, w.n, w.m*w.n
	p, other, inner := m, n, w.s*n // order, the other side, terms per entry
	if !rows {
		p, other, inner = n, m, w.s*m
	}
	if !w.TraceFits(p) || w.eta >= 0.5 {
		return nil, math.Inf(1), true
	}
	a := blas64.Symmetric{N: p, Stride: p, Data: make([]float64, p*p), Uplo: blas.Upper}
	if rows {
		for t := 0; t < w.s; t++ {
			if ctx.Err() != nil {
				return nil, 0, false
			}
			blas64.Syrk(blas.NoTrans, 1, blas64.General{Rows: m, Cols: n, Stride: n, Data: w.q[t*L : (t+1)*L]}, 1, a)
		}
	} else if w.s > 0 {
		// T2 = FᵀF for F = the stored rows as an (s·m)×n matrix, in tiles.
		f := blas64.General{Rows: w.s * m, Cols: n, Stride: n, Data: w.q}
		if !gramTiles(blas.Trans, f, a, func() bool { return ctx.Err() != nil }) {
			return nil, 0, false
		}
	}
	for i := 0; i < p; i++ {
		for j := 0; j < i; j++ {
			a.Data[i*p+j] = a.Data[j*p+i]
		}
	}
	sf := w.sumSq
	d = accurate.MulUp(accurate.Gamma(inner+1), sf)
	if !w.comp {
		d = accurate.AddUp(d, accurate.MulUp(accurate.Up(w.eta/accurate.Down(1-w.eta)), sf))
	} else {
		d = accurate.AddUp(d, accurate.MulUp(accurate.Up(w.eta/accurate.Down(1+w.eta)), sf))
		d = accurate.AddUp(d, complementDiag(a, float64(other)))
	}
	return mat.NewSymDense(p, a.Data), d, true
}

// complementDiag replaces s by c·I − s in place and returns the bound
// 2u·max|c − s_ii| on the rounding of its new diagonal.
func complementDiag(s blas64.Symmetric, c float64) float64 {
	var mx float64
	for i := range s.Data {
		s.Data[i] = -s.Data[i]
	}
	for i := 0; i < s.N; i++ {
		s.Data[i*s.N+i] += c
		mx = math.Max(mx, math.Abs(s.Data[i*s.N+i]))
	}
	return accurate.MulUp(2*accurate.U, mx)
}

// MaxEigH returns an estimate of λmax(H(x)) and a proven upper bound on it,
// for the float vector x exactly as given (not normalised) and the subspace
// the stored vectors define exactly; if vec is non-nil (length n) it receives
// the estimated top eigenvector, the best unit y for this x. λmax(H(x)) is
// max over unit y of ‖P_W(x⊗y)‖², the squared seminorm s(x)² used by global
// searches. It panics on wrong lengths.
//
// Derivation, W stored (rows S, Gram SSᵀ = I + E, ‖E‖₂ ≤ η). With
// Z = [S_tᵀx]_t (s×n, exact), H(x) = (x⊗I)ᵀSᵀ(SSᵀ)⁻¹S(x⊗I) ⪯ ZᵀZ/(1−η), so
// λmax(H) ≤ σmax(Z)²/(1−η). The float Ẑ errs entrywise by at most
// γ_m Σ_i|S_t,ij||x_i| ≤ γ_m‖x‖‖S_t[·, j]‖ (Cauchy–Schwarz), so
// ‖Z − Ẑ‖_F ≤ γ_m‖x‖‖S‖_F =: e and σmax(Z) ≤ σmax(Ẑ) + e. σmax(Ẑ)² is
// λmax of ẐᵀẐ (or of ẐẐᵀ, whichever is smaller), whose float formation errs
// by at most γ_s‖Ẑ‖_F² (γ_n for ẐẐᵀ) in norm, and whose λmax is bounded by
// the verified Cholesky test.
// W⊥ stored: H(x) = ‖x‖²I − (x⊗I)ᵀP_{W⊥}(x⊗I) ⪯ ‖x‖²I − ZᵀZ/(1+η), so
// λmax(H) ≤ ‖x‖² − σ_n(Z)²/(1+η), with σ_n(Z) ≥ σ_n(Ẑ) − e ≥ 0 and σ_n(Ẑ)²
// bounded below by the verified test on ẐᵀẐ (σ_n = 0 when s < n).
func (w *Subspace) MaxEigH(x, vec []float64) (est, upper float64) {
	w.checkX(x, "x")
	op := w.HOperator(x)
	return w.maxEig(op, x, vec)
}

// MaxEigG is MaxEigH for the other side: an estimate and a proven upper
// bound of λmax(G(y)) = max over unit x of ‖P_W(x⊗y)‖², for y exactly as
// given; vec (length m, optional) receives the estimated best unit x.
func (w *Subspace) MaxEigG(y, vec []float64) (est, upper float64) {
	w.checkY(y, "y")
	op := w.GOperator(y)
	return w.maxEig(op, y, vec)
}

func (w *Subspace) maxEig(op *Operator, u, vec []float64) (est, upper float64) {
	p, s := op.p, op.s
	v := make([]float64, p)
	if vec != nil {
		if len(vec) != p {
			panic("subspace: eigenvector buffer has the wrong length")
		}
		copy(v, vec)
	}
	est, _ = eigen.Top(op.Apply, v, 0, 0, 1e-10)
	if vec != nil {
		copy(vec, v)
	}
	for _, a := range u {
		if math.IsNaN(a) || math.IsInf(a, 0) {
			return est, math.Inf(1)
		}
	}
	if w.eta >= 0.5 {
		return est, math.Inf(1)
	}
	uu := accurate.SumSqUpper(u)
	if s == 0 {
		if w.comp {
			return est, uu // H = ‖x‖²I exactly
		}
		return est, 0
	}
	other := w.m * w.n / p // the length of u
	sf := accurate.SqrtUp(w.sumSq)
	e := accurate.MulUp(accurate.MulUp(accurate.Gamma(other), accurate.SqrtUp(uu)), sf)
	zf := accurate.SumSqUpper(op.z)
	var raw blas64.Symmetric
	var form float64
	useSmall := !w.comp && s < p
	if useSmall {
		raw = blas64.Symmetric{N: s, Stride: s, Data: make([]float64, s*s), Uplo: blas.Upper}
		blas64.Syrk(blas.NoTrans, 1, blas64.General{Rows: s, Cols: p, Stride: p, Data: op.z}, 0, raw)
		form = accurate.MulUp(accurate.Gamma(p), zf)
	} else {
		zt := make([]float64, p*s)
		for t := 0; t < s; t++ {
			for a := 0; a < p; a++ {
				zt[a*s+t] = op.z[t*p+a]
			}
		}
		raw = blas64.Symmetric{N: p, Stride: p, Data: make([]float64, p*p), Uplo: blas.Upper}
		blas64.Syrk(blas.NoTrans, 1, blas64.General{Rows: p, Cols: s, Stride: s, Data: zt}, 0, raw)
		form = accurate.MulUp(accurate.Gamma(s), zf)
	}
	mhat := mat.NewSymDense(raw.N, raw.Data)
	if !w.comp {
		lam := accurate.AddUp(verified.MaxEigUpper(mhat, est), form)
		sig := accurate.AddUp(accurate.SqrtUp(math.Max(lam, 0)), e)
		b := accurate.MulUp(sig, sig)
		return est, accurate.Up(b / accurate.Down(1-w.eta))
	}
	var sigLow float64
	if s >= p {
		lmin := accurate.Down(verified.MinEigLower(mhat, uu-est) - form)
		if lmin > 0 {
			sigLow = math.Max(0, accurate.Down(accurate.SqrtDown(lmin)-e))
		}
	}
	sub := accurate.Down(accurate.Down(sigLow*sigLow) / accurate.Up(1+w.eta))
	return est, math.Max(0, accurate.Up(uu-math.Max(sub, 0)))
}

// ProjectorBound returns a float matrix P̂ (mn×mn) and δ ≥ 0 with
// P_W ⪯ P̂ + δI in exact arithmetic for the stored subspace, for
// certificates that need the whole projector (sum-of-squares bounds). It
// panics if mn > 8192 (the matrix would not be small).
//
// Derivation. W stored (rows S, Gram I + E, ‖E‖ ≤ η): P_W = Sᵀ(SSᵀ)⁻¹S ⪯
// SᵀS/(1−η) = SᵀS + (η/(1−η))SᵀS, and ‖SᵀS‖ = ‖SSᵀ‖ ≤ 1 + η; the float
// P̂ = fl(SᵀS) errs entrywise by γ_s|S|ᵀ|S|, of norm ≤ γ_s‖S‖_F². W⊥ stored:
// P_W = I − P_{W⊥} ⪯ I − SᵀS/(1+η) ⪯ I − SᵀS + ηI (as ‖SᵀS‖ ≤ 1 + η), with
// P̂ = I − fl(SᵀS), whose diagonal rounding adds 2u·max|P̂_ii|.
func (w *Subspace) ProjectorBound() (*mat.SymDense, float64) {
	L := w.m * w.n
	if L > 8192 {
		panic("subspace: ProjectorBound needs m·n ≤ 8192")
	}
	raw := blas64.Symmetric{N: L, Stride: L, Data: make([]float64, L*L), Uplo: blas.Upper}
	if w.s > 0 {
		blas64.Syrk(blas.Trans, 1, blas64.General{Rows: w.s, Cols: L, Stride: L, Data: w.q}, 0, raw)
	}
	if w.eta >= 0.5 {
		return mat.NewSymDense(L, raw.Data), math.Inf(1)
	}
	sf := w.sumSq
	delta := accurate.MulUp(accurate.Gamma(max(w.s, 1)), sf)
	if !w.comp {
		f := accurate.Up(w.eta / accurate.Down(1-w.eta))
		delta = accurate.AddUp(delta, accurate.MulUp(f, accurate.AddUp(1, w.eta)))
		return mat.NewSymDense(L, raw.Data), delta
	}
	delta = accurate.AddUp(delta, w.eta)
	delta = accurate.AddUp(delta, complementDiag(raw, 1))
	return mat.NewSymDense(L, raw.Data), delta
}

// ExtensionBound returns a proven upper bound on λmax(Π(P_W⊗I_n)Π), where Π
// projects R^m⊗R^n⊗R^n onto R^m⊗Sym²(R^n) (the two-copy symmetric extension
// of the column side), and ok = false when the stored basis is W⊥ or k·n
// exceeds maxOrder (then the caller needs another method). Since
// h(x, y) = vᵀ(P_W⊗I)v for the unit v = x⊗y⊗y in the range of Π, the result
// bounds h*.
//
// Derivation (W stored, rows S_t as m×n matrices, Gram SSᵀ = G, ‖G − I‖ ≤ η):
// P_W ⪯ SᵀS/(1−η), so P_W⊗I ⪯ FFᵀ/(1−η) with F = [s_t⊗e_j]_{t,j}, and
// λmax(ΠFFᵀΠ) = λmax(FᵀΠF). With Π = I⊗(I + SWAP)/2 on the last two factors,
// FᵀΠF = ½(G⊗I + N), N[(t,j),(t',j')] = Σ_i S_t[i][j']·S_t'[i][j] (derived
// by expanding the swap). The float N errs entrywise by at most
// γ_m·Σ_i|S_t[i][j']||S_t'[i][j]| (Frobenius norm bounded alongside), the
// float G by γ_L‖S‖_F² in norm (as in the orthogonality bound), and forming
// ½(G⊗I + N) rounds each entry at most twice.
//
// ok is also false when the order-k·n matrix does not fit in the
// MemoryLimit (TraceFits). The top eigenvalue is estimated by Lanczos and
// proven by the verified Cholesky test.
func (w *Subspace) ExtensionBound(maxOrder int) (upper float64, ok bool) {
	return w.ExtensionBoundContext(context.Background(), maxOrder)
}

// ExtensionBoundContext is ExtensionBound under a context: when ctx is done
// first it returns ok = false (nothing proven) after at most one row block
// of its work.
func (w *Subspace) ExtensionBoundContext(ctx context.Context, maxOrder int) (upper float64, ok bool) {
	if w.comp || w.s == 0 {
		return 1, false
	}
	m, n, s, L := w.m, w.n, w.s, w.m*w.n
	dim := s * n
	if dim > maxOrder || !w.TraceFits(dim) {
		return 1, false
	}
	stop := func() bool { return ctx.Err() != nil }
	if w.eta >= 0.5 {
		return math.Inf(1), true
	}
	g := blas64.Symmetric{N: s, Stride: s, Data: make([]float64, s*s), Uplo: blas.Upper}
	if !gramTiles(blas.NoTrans, blas64.General{Rows: s, Cols: L, Stride: L, Data: w.q}, g, stop) {
		return 1, false
	}
	a := mat.NewSymDense(dim, nil)
	var absF, fro float64
	for t := 0; t < s; t++ {
		if stop() {
			return 1, false
		}
		st := w.q[t*L : (t+1)*L]
		for j := 0; j < n; j++ {
			for t2 := t; t2 < s; t2++ {
				su := w.q[t2*L : (t2+1)*L]
				j0 := 0
				if t2 == t {
					j0 = j
				}
				for j2 := j0; j2 < n; j2++ {
					var v, ab float64
					for i := 0; i < m; i++ {
						p := float64(st[i*n+j2] * su[i*n+j])
						v += p
						ab += math.Abs(p)
					}
					if j == j2 {
						v += g.Data[t*s+t2]
					}
					v /= 2
					a.SetSym(t*n+j, t2*n+j2, v)
					mult := 2.0
					if t == t2 && j == j2 {
						mult = 1
					}
					absF += float64(mult * ab * ab)
					fro += float64(mult * v * v)
				}
			}
		}
	}
	errN := accurate.MulUp(accurate.Gamma(m+1), accurate.SqrtUp(accurate.UpperRel(absF, dim*dim+1)))
	errG := accurate.MulUp(accurate.Gamma(L), w.sumSq)
	errR := accurate.MulUp(4*accurate.U, accurate.SqrtUp(accurate.UpperRel(fro, dim*dim+1)))
	x := make([]float64, dim)
	guess, _ := eigen.Top(eigen.SymApply(a), x, 0, 0, 1e-13)
	lam := verified.MaxEigUpperStop(a, guess, stop)
	if stop() {
		return 1, false // the test may have fallen back to Gershgorin: valid, but say nothing
	}
	lam = accurate.AddUp(lam, accurate.MulUp(0.5, accurate.AddUp(errN, errG)))
	lam = accurate.AddUp(lam, errR)
	return accurate.Up(math.Max(lam, 0) / accurate.Down(1-w.eta)), true
}
