package sos

import (
	"context"
	"fmt"
	"io"
	"math"
	"math/cmplx"
	"math/rand/v2"
	"time"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
	"gonum.org/v1/gonum/mat"

	"github.com/segre-lab/segre/internal/accurate"
	"github.com/segre-lab/segre/internal/eigen"
	"github.com/segre-lab/segre/internal/rawstore"
	"github.com/segre-lab/segre/internal/sdp"
	"github.com/segre-lab/segre/internal/verified"
	"github.com/segre-lab/segre/rankone"
	"github.com/segre-lab/segre/subspace"
)

// The level-one relaxation over C: the PPT relaxation.
//
// For a complex subspace W ⊂ C^{m×n} (L = mn) and unit x ∈ C^m, y ∈ C^n, let
// z = x⊗y and ρ = zz*. Then ρ ⪰ 0, tr ρ = 1, h(x, y) = z*P_W z = ⟨P_W, ρ⟩,
// and the partial transpose on the second factor,
// ρ^Γ[(i,j),(k,l)] = ρ[(i,l),(k,j)], is (x⊗ȳ)(x⊗ȳ)* ⪰ 0 (A. Peres, "Separability
// criterion for density matrices", Phys. Rev. Lett. 77, 1996). So
//
//	h* ≤ max{⟨P_W, ρ⟩ : ρ ⪰ 0, ρ^Γ ⪰ 0, tr ρ = 1},
//
// the first level of the hierarchy of A. C. Doherty, P. A. Parrilo,
// F. M. Spedalieri (Phys. Rev. A 69, 022308, 2004). It is exact when
// m·n ≤ 6 (m = 2, n ≤ 3 or the reverse): there every PPT state is separable
// (M. Horodecki, P. Horodecki, R. Horodecki, "Separability of mixed states:
// necessary and sufficient conditions", Phys. Lett. A 223, 1996), and the
// maximum of a linear function over separable states is attained at a
// product state.
//
// Unlike the real case, ρ^Γ ≠ ρ over C (y ≠ ȳ), so a Hermitian K with
// K^Γ = −K proves nothing over C: (x⊗y)*K(x⊗y) = (x⊗ȳ)*K^Γ(x⊗ȳ) need not
// vanish. (span{I, J}, J the rotation by 90°, has h* = 1/2 over R, proven
// by such a K, and h* = 1 over C.) The certificate over C is the dual of
// the PPT constraint: a Hermitian Z ⪰ 0. For every product z,
//
//	z*Z^Γ z = (x⊗ȳ)*Z(x⊗ȳ) ≥ λmin(Z),
//
// so h(x, y) ≤ z*(P_W + Z^Γ)z − λmin(Z) ≤ λmax(P_W + Z^Γ) + max(0, −λmin(Z)).
// Any Hermitian Z gives a valid bound (a slightly indefinite one from an
// inexact solver costs only its negative part), so nothing about Z needs
// to hold exactly but its Hermitian symmetry, which VerifyComplex checks
// bit for bit.
//
// Everything is computed in real coordinates v = (Re z, Im z) ∈ R^{2L},
// ‖v‖ = 1. A Hermitian H = A + iB satisfies z*Hz = vᵀR(H)v with the
// realification R(H) = [[A, −B], [B, A]], and λmax(R(H)) = λmax(H). The
// stored complex subspace is W'' = NᵀW̃_R (see package subspace), whose
// rows q_t = [[a′, b′], [b′, −a′]] give rows r_t = √2(a′_t, b′_t) of W̃_R
// with the same Gram matrix (Nᵀ is an isometry; derived there), hence the
// same orthogonality defect η, and h(x, y) = vᵀP v with P the orthogonal
// projector onto W̃_R (h = 2h'' = 2‖NᵀPN(X⊗Y)‖², N(X⊗Y) = v/√2). P is real
// symmetric but, after rounding, not exactly a realification; nothing below
// needs it to be: with P ⪯ P̂ + δI (P̂ = fl(RᵀR), as ProjectorBound),
//
//	h ≤ vᵀ(P̂ + R(Z^Γ))v − λmin(Z) + δ ≤ λmax(P̂ + R(Z^Γ)) + max(0, −λmin(Z)) + δ,
//
// because vᵀR(Z^Γ)v = z*Z^Γ z.
//
// The SDP solved is the real one of this form: X_ρ, X_σ ⪰ 0 real symmetric
// of order 2L, maximise ⟨P̂, X_ρ⟩ subject to tr X_ρ = 1 and, for each E of
// the real basis of Hermitian L×L matrices, ⟨R(E), X_σ⟩ = ⟨R(E^Γ), X_ρ⟩
// (L² constraints; the product point gives X_ρ = vvᵀ, X_σ = v′v′ᵀ with v′
// the coordinates of x⊗ȳ). Its dual is
//
//	min t  s.t.  tI − P̂ − R(Z^Γ) ⪰ 0,  R(Z) ⪰ 0,  Z = Σ_E y_E E,
//
// which is the certificate above. (For a realification C, the real SDP has
// the value of the complex one: averaging a feasible X with JXJᵀ keeps it
// feasible and its value, and gives a realification; common practice.)

// ComplexCertificate is a Hermitian L×L matrix Z (L = m·n, indices
// (i, j) ↦ i·n + j, stored full row-major) whose verification bounds h*
// over C (see VerifyComplex).
type ComplexCertificate struct {
	M, N int
	Z    []complex128
}

// complexProjector returns P̂ (order 2L, coordinates (Re z, Im z)) and δ
// with P ⪯ P̂ + δI for the projector P onto W̃_R of a complex subspace
// (derivation above and on ProjectorBound: W̃_R's rows have the stored
// subspace's Gram matrix and sum of squares).
func complexProjector(w *subspace.Subspace) (*mat.SymDense, float64, error) {
	if w.Field() != subspace.Complex {
		return nil, 0, fmt.Errorf("%w: the complex relaxation needs a complex subspace", ErrCertificate)
	}
	st, q := w.Stored(), rawstore.Vectors(w)
	if st.Complement() {
		return nil, 0, fmt.Errorf("%w: a complex subspace stored by its complement", ErrCertificate)
	}
	m, n := w.ComplexShape()
	L, s, eta := m*n, st.Count(), st.OrthogonalityBound()
	rows := make([]float64, s*2*L)
	for t := 0; t < s; t++ {
		src, out := q[t*4*L:(t+1)*4*L], rows[t*2*L:(t+1)*2*L]
		for i := 0; i < m; i++ {
			for j := 0; j < n; j++ {
				out[i*n+j] = src[i*2*n+j]     // a′
				out[L+i*n+j] = src[i*2*n+n+j] // b′
			}
		}
	}
	raw := blas64.Symmetric{N: 2 * L, Stride: 2 * L, Data: make([]float64, 4*L*L), Uplo: blas.Upper}
	if s > 0 {
		// fl(2·Σ r′r′ᵀ) = 2·fl(Σ r′r′ᵀ): scaling by two is exact.
		blas64.Syrk(blas.Trans, 1, blas64.General{Rows: s, Cols: 2 * L, Stride: 2 * L, Data: rows}, 0, raw)
		for i := range raw.Data {
			raw.Data[i] *= 2
		}
	}
	p := mat.NewSymDense(2*L, raw.Data)
	if eta >= 0.5 {
		return p, math.Inf(1), nil
	}
	// ‖R‖_F² = Σ 2(a′² + b′²) = ‖Q''‖_F² (each of a′, b′ appears twice in q_t).
	delta := accurate.MulUp(accurate.Gamma(max(s, 1)), st.SumSqUpper())
	f := accurate.Up(eta / accurate.Down(1-eta))
	delta = accurate.AddUp(delta, accurate.MulUp(f, accurate.AddUp(1, eta)))
	return p, delta, nil
}

// realifyInto writes R(H) of the Hermitian h (L×L, full row-major) into
// the 2L×2L dst; exact (copies and negations).
func realifyInto(dst *mat.SymDense, h []complex128, L int) {
	for a := 0; a < L; a++ {
		for b := a; b < L; b++ {
			v := h[a*L+b]
			dst.SetSym(a, b, real(v))
			dst.SetSym(L+a, L+b, real(v))
		}
		for b := 0; b < L; b++ {
			dst.SetSym(a, L+b, -imag(h[a*L+b])) // the whole block −B
		}
	}
}

// VerifyComplex returns a certified upper bound on h* over C for the stored
// complex subspace w from the Hermitian certificate c (see the notes on the
// complex relaxation above), or an error if w is not complex or c is
// malformed, not finite or not exactly Hermitian.
//
// Rounding: P̂ + R(Z^Γ) is formed with one rounding per entry (error matrix
// of norm ≤ u‖·‖_F, bounded from the float sum); R(Z) is formed exactly, and
// λmin(R(Z)) = λmin(Z) is bounded below by the verified Cholesky test.
func VerifyComplex(w *subspace.Subspace, c ComplexCertificate) (float64, error) {
	if w.Field() != subspace.Complex {
		return 1, fmt.Errorf("%w: a complex certificate for a real subspace", ErrCertificate)
	}
	m, n := w.ComplexShape()
	L := m * n
	if c.M != m || c.N != n || len(c.Z) != L*L {
		return 1, fmt.Errorf("%w: shape %d×%d with %d entries for %d×%d", ErrCertificate, c.M, c.N, len(c.Z), m, n)
	}
	for a := 0; a < L; a++ {
		for b := a; b < L; b++ {
			v := c.Z[a*L+b]
			if cmplx.IsNaN(v) || cmplx.IsInf(v) || v != cmplx.Conj(c.Z[b*L+a]) {
				return 1, fmt.Errorf("%w: entry (%d, %d) not finite or not Hermitian", ErrCertificate, a, b)
			}
		}
	}
	p, delta, err := complexProjector(w)
	if err != nil {
		return 1, err
	}
	gamma := make([]complex128, L*L)
	for a := 0; a < L; a++ {
		for b := 0; b < L; b++ {
			pa, pb := partner(a, b, n)
			gamma[a*L+b] = c.Z[pa*L+pb]
		}
	}
	rg := mat.NewSymDense(2*L, nil)
	realifyInto(rg, gamma, L)
	sum := mat.NewSymDense(2*L, nil)
	var fro float64
	for a := 0; a < 2*L; a++ {
		for b := a; b < 2*L; b++ {
			v := p.At(a, b) + rg.At(a, b)
			sum.SetSym(a, b, v)
			if a == b {
				fro += float64(v * v)
			} else {
				fro += float64(2 * v * v)
			}
		}
	}
	round := accurate.MulUp(accurate.U, accurate.SqrtUp(accurate.UpperRel(fro, 4*L*L+2)))
	rz := mat.NewSymDense(2*L, nil)
	realifyInto(rz, c.Z, L)
	neg, zguess := 0.0, math.NaN()
	if v, _, ok := eigen.Sym(rz, false); ok {
		zguess = v[0]
	}
	if mu := verified.MinEigLower(rz, zguess); mu < 0 {
		neg = -mu
	} else if math.IsNaN(mu) {
		return 1, fmt.Errorf("%w: no bound on the certificate's smallest eigenvalue", ErrCertificate)
	}
	guess := math.NaN()
	if v, _, ok := eigen.Sym(sum, false); ok {
		guess = v[len(v)-1]
	}
	ub := accurate.AddUp(accurate.AddUp(verified.MaxEigUpper(sum, guess), delta), accurate.AddUp(round, neg))
	if math.IsNaN(ub) {
		return 1, nil
	}
	return math.Min(ub, 1), nil
}

// maxComplexOrder is the largest m·n for which LevelOneComplex builds the
// relaxation: L² + 1 constraints, a dense Schur complement of that order.
const maxComplexOrder = 36

// ComplexRelaxation is the level-one (PPT) relaxation of a complex
// subspace in the form of internal/sdp: two blocks of order 2L, block 0
// holding X_ρ and block 1 holding X_σ (WriteSDPA exports the same two
// blocks).
type ComplexRelaxation struct {
	Problem sdp.Problem
	m, n    int
	basis   []hermElem // constraint i ≥ 1 is basis[i−1]
}

// hermElem is one element E of the real basis of Hermitian L×L matrices:
// E_aa (a = b, kind 0), E_ab + E_ba (kind 1), i(E_ab − E_ba) (kind 2).
type hermElem struct{ a, b, kind int }

// entries returns the upper-triangle entries of R(E) in the block blk
// (of order 2L).
func (e hermElem) entries(L, blk int) []sdp.Entry {
	a, b := e.a, e.b
	switch e.kind {
	case 0:
		return []sdp.Entry{{Block: blk, I: a, J: a, V: 1}, {Block: blk, I: L + a, J: L + a, V: 1}}
	case 1:
		if a > b {
			a, b = b, a
		}
		return []sdp.Entry{{Block: blk, I: a, J: b, V: 1}, {Block: blk, I: L + a, J: L + b, V: 1}}
	default:
		// E[a][b] = i, E[b][a] = −i: R(E) has −Im E at (a, L+b) and (b, L+a):
		// −1 at (a, L+b), +1 at (b, L+a).
		return []sdp.Entry{{Block: blk, I: a, J: L + b, V: -1}, {Block: blk, I: b, J: L + a, V: 1}}
	}
}

// gammaOf returns E^Γ as ±(a basis element): the partial transpose maps
// the entry (a, b) to partner(a, b), so E_aa ↦ E_aa, the real symmetric
// pair to the pair at partner(a, b), and the imaginary one to the pair at
// (p, q) = partner(a, b), negated when p > q.
func (e hermElem) gammaOf(n int) (hermElem, float64) {
	p, q := partner(e.a, e.b, n)
	if e.kind == 0 {
		return hermElem{p, q, 0}, 1
	}
	if p > q {
		if e.kind == 2 {
			return hermElem{q, p, 2}, -1
		}
		return hermElem{q, p, 1}, 1
	}
	return hermElem{p, q, e.kind}, 1
}

// LevelOneComplex builds the level-one (PPT) relaxation of a complex
// subspace (see the notes on the complex relaxation): at most m·n = 36.
func LevelOneComplex(w *subspace.Subspace) (*ComplexRelaxation, error) {
	if w.Field() != subspace.Complex {
		return nil, fmt.Errorf("%w: LevelOneComplex of a real subspace", ErrCertificate)
	}
	m, n := w.ComplexShape()
	L := m * n
	if L > maxComplexOrder {
		return nil, fmt.Errorf("%w: m·n = %d (the complex level one is built for m·n ≤ %d)", ErrTooLarge, L, maxComplexOrder)
	}
	p, _, err := complexProjector(w)
	if err != nil {
		return nil, err
	}
	r := &ComplexRelaxation{m: m, n: n}
	r.Problem.Blocks = []int{2 * L, 2 * L}
	for a := 0; a < 2*L; a++ {
		for b := a; b < 2*L; b++ {
			if v := p.At(a, b); v != 0 {
				r.Problem.C = append(r.Problem.C, sdp.Entry{I: a, J: b, V: v})
			}
		}
	}
	tr := make([]sdp.Entry, 2*L)
	for a := range tr {
		tr[a] = sdp.Entry{I: a, J: a, V: 1}
	}
	r.Problem.A = append(r.Problem.A, tr)
	r.Problem.B = append(r.Problem.B, 1)
	for a := 0; a < L; a++ {
		r.basis = append(r.basis, hermElem{a, a, 0})
		for b := a + 1; b < L; b++ {
			r.basis = append(r.basis, hermElem{a, b, 1}, hermElem{a, b, 2})
		}
	}
	for _, e := range r.basis {
		row := e.entries(L, 1)
		g, sign := e.gammaOf(n)
		for _, x := range g.entries(L, 0) {
			row = append(row, sdp.Entry{Block: 0, I: x.I, J: x.J, V: -sign * x.V})
		}
		r.Problem.A = append(r.Problem.A, row)
		r.Problem.B = append(r.Problem.B, 0)
	}
	return r, nil
}

// Certificate turns the dual multipliers into the Hermitian
// Z = Σ_E y_E E (exactly Hermitian by construction).
func (r *ComplexRelaxation) Certificate(y []float64) ComplexCertificate {
	L := r.m * r.n
	z := make([]complex128, L*L)
	for i, e := range r.basis {
		if i+1 >= len(y) {
			break
		}
		v := y[i+1]
		switch e.kind {
		case 0:
			z[e.a*L+e.a] = complex(v, 0)
		case 1:
			z[e.a*L+e.b] += complex(v, 0)
			z[e.b*L+e.a] += complex(v, 0)
		default:
			z[e.a*L+e.b] += complex(0, v)
			z[e.b*L+e.a] += complex(0, -v)
		}
	}
	return ComplexCertificate{M: r.m, N: r.n, Z: z}
}

// WriteSDPA writes the complex relaxation as a real SDP in the SDPA sparse
// format with two blocks of order 2mn: block 1 is X_ρ (rows and columns
// (Re z, Im z), z indexed (i, j) ↦ i·n + j, 1-based), block 2 is X_σ;
// matrix 0 is the objective P̂ on block 1 (maximised, as CSDP reads the
// format), constraint 1 is tr X_ρ = 1, constraint 1 + t links the two
// blocks through the t-th element of the real basis of Hermitian matrices
// (diagonal, real pair, imaginary pair, in the order a ≤ b).
func (r *ComplexRelaxation) WriteSDPA(wr io.Writer) error {
	return writeSDPA(wr, fmt.Sprintf("level-one PPT relaxation over C, %dx%d", r.m, r.n), r.Problem)
}

// searchComplex is Bound.Search on a complex subspace: the PPT relaxation,
// its certificate verified by VerifyComplex (a bound hb on h* over C gives
// h” ≤ hb/2 on the stored W”, so Lower = √(1 − hb/2) on d” as every
// complex Result), and the moment block X_ρ rounded to a witness.
func (b *Bound) searchComplex(ctx context.Context, w *subspace.Subspace) (rankone.Result, error) {
	begin := time.Now()
	res := startResult(w, b.Name())
	rel, err := LevelOneComplex(w)
	if err != nil {
		return res, err
	}
	// The relaxation's value is h over C, twice h'' of the Result's W''.
	sol, err := b.solve(ctx, rel.Problem, &res, 0.5)
	if sol == nil {
		return res, err
	}
	cert := rel.Certificate(sol.Y)
	// Only a bound below 1 proves anything over C (hb = 1 gives d'' ≥ 1/√2,
	// which every complex subspace satisfies).
	if hb, verr := VerifyComplex(w, cert); verr == nil && hb < 1 {
		if lo := rankone.DistanceLower(hb / 2); lo > 0 {
			res.Lower, res.LowerBy = lo, "sos level 1"
			if b.KeepComplex != nil {
				*b.KeepComplex = cert
			}
		}
	}
	m, n := w.ComplexShape()
	if x, y, ok := roundComplex(sol.X[0], m, n); ok {
		keepBetter(ctx, w, &res, x, y)
	}
	if res.LowerBy != "" && closed(res) {
		res.LowerBy = exactLabel
	}
	return finishResult(ctx, res, begin, err)
}

// roundComplex takes the top eigenvector v of the X_ρ block xr (order 2L),
// z = v[:L] + i·v[L:], reshapes it to the complex m×n matrix Zm, and
// returns the real coordinates of its top singular pair (x, y) with
// Zm ≈ σ x yᵀ, by the power iteration x ∝ Zm ȳ, y ∝ Zmᵀ x̄ (a rounding
// heuristic; the witness is polished and certified afterwards).
func roundComplex(xr *mat.SymDense, m, n int) ([]float64, []float64, bool) {
	L := m * n
	if xr == nil || xr.SymmetricDim() != 2*L {
		return nil, nil, false
	}
	_, vecs, ok := eigen.Sym(xr, true)
	if !ok {
		return nil, nil, false
	}
	top := mat.Col(nil, 2*L-1, vecs)
	zm := make([]complex128, L)
	for a := range zm {
		zm[a] = complex(top[a], top[L+a])
	}
	rng := rand.New(rand.NewPCG(1, 2))
	yv := make([]complex128, n)
	for j := range yv {
		yv[j] = complex(rng.NormFloat64(), rng.NormFloat64())
	}
	xv := make([]complex128, m)
	for it := 0; it < 60; it++ {
		for i := 0; i < m; i++ {
			var s complex128
			for j := 0; j < n; j++ {
				s += zm[i*n+j] * cmplx.Conj(yv[j])
			}
			xv[i] = s
		}
		if !normaliseC(xv) {
			return nil, nil, false
		}
		for j := 0; j < n; j++ {
			var s complex128
			for i := 0; i < m; i++ {
				s += zm[i*n+j] * cmplx.Conj(xv[i])
			}
			yv[j] = s
		}
		if !normaliseC(yv) {
			return nil, nil, false
		}
	}
	rx, ry := make([]float64, 2*m), make([]float64, 2*n)
	for i, v := range xv {
		rx[i], rx[m+i] = real(v), imag(v)
	}
	for j, v := range yv {
		ry[j], ry[n+j] = real(v), imag(v)
	}
	return rx, ry, true
}

func normaliseC(v []complex128) bool {
	var s float64
	for _, z := range v {
		s += real(z)*real(z) + imag(z)*imag(z)
	}
	if !(s > 0) || math.IsInf(s, 0) {
		return false
	}
	f := complex(1/math.Sqrt(s), 0)
	for i := range v {
		v[i] *= f
	}
	return true
}
