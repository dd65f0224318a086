// Package sos gives certified upper bounds on h* (lower bounds on d*) from
// the degree-four sum-of-squares / moment relaxation, with certificates
// that are checked independently of the SDP solver that found them.
//
// Level one (the real analogue of the PPT relaxation; Doherty, Parrilo,
// Spedalieri, Phys. Rev. A 69, 022308, 2004; for real biquadratic forms
// Ling, Nie, Qi, Ye, SIAM J. Optim. 20, 2009). Index R^m⊗R^n by pairs
// a = (i, j) and let T be the partial transpose on the second factor,
// T(ρ)[(i,j),(k,l)] = ρ[(i,l),(k,j)]. For unit x, y the moment matrix
// ρ = (x⊗y)(x⊗y)ᵀ is PSD, has trace one and T(ρ) = ρ, and h(x, y) = ⟨P_W, ρ⟩;
// so h* ≤ max{⟨P_W, ρ⟩ : ρ ⪰ 0, tr ρ = 1, T(ρ) = ρ}. Dually, for every
// symmetric K with T(K) = −K the biquadratic form (x⊗y)ᵀK(x⊗y) vanishes
// identically (it equals its own negative), so
//
//	h(x, y) = (x⊗y)ᵀ(P_W + K)(x⊗y) ≤ λmax(P_W + K)   for unit x, y.
//
// A certificate is such a K; Verify checks T(K) = −K and symmetry exactly
// (bit for bit, so no residual is left) and bounds λmax(P_W + K) with the
// verified Cholesky test, P_W ⪯ P̂ + δI from subspace.ProjectorBound, and the
// rounding of forming P̂ + K.
package sos

import (
	"bufio"
	"context"
	"errors"
	"fmt"
	"io"
	"math"
	"strconv"
	"time"

	"gonum.org/v1/gonum/mat"

	"github.com/segre-lab/segre/internal/accurate"
	"github.com/segre-lab/segre/internal/eigen"
	"github.com/segre-lab/segre/internal/sdp"
	"github.com/segre-lab/segre/internal/verified"
	"github.com/segre-lab/segre/rankone"
	"github.com/segre-lab/segre/subspace"
)

// Errors of Verify and Bound.
var (
	ErrCertificate = errors.New("sos: not a valid certificate")
	ErrTooLarge    = errors.New("sos: relaxation too large")
)

// Certificate is a symmetric mn×mn matrix K with T(K) = −K (see the package
// doc), stored full row-major.
type Certificate struct {
	M, N int
	K    []float64
}

// partner returns the T-image of the entry (a, b): ((i,l),(k,j)) for
// a = (i,j), b = (k,l).
func partner(a, b, n int) (int, int) {
	i, j := a/n, a%n
	k, l := b/n, b%n
	return i*n + l, k*n + j
}

// Verify returns a certified upper bound on h* for the stored subspace from
// the certificate c, or an error if c is malformed or not exactly
// T-antisymmetric and symmetric.
func Verify(w *subspace.Subspace, c Certificate) (float64, error) {
	m, n := w.Rows(), w.Cols()
	L := m * n
	if c.M != m || c.N != n || len(c.K) != L*L {
		return 1, fmt.Errorf("%w: shape %d×%d with %d entries for %d×%d", ErrCertificate, c.M, c.N, len(c.K), m, n)
	}
	for a := 0; a < L; a++ {
		for b := 0; b < L; b++ {
			v := c.K[a*L+b]
			if math.IsNaN(v) || math.IsInf(v, 0) || v != c.K[b*L+a] {
				return 1, fmt.Errorf("%w: entry (%d, %d) not finite or not symmetric", ErrCertificate, a, b)
			}
			pa, pb := partner(a, b, n)
			if c.K[pa*L+pb] != -v {
				return 1, fmt.Errorf("%w: entry (%d, %d) is not negated by the partial transpose", ErrCertificate, a, b)
			}
		}
	}
	p, delta := ProjectorBound(w)
	sum := mat.NewSymDense(L, nil)
	var fro float64
	for a := 0; a < L; a++ {
		for b := a; b < L; b++ {
			v := p.At(a, b) + c.K[a*L+b]
			sum.SetSym(a, b, v)
			if a == b {
				fro += float64(v * v)
			} else {
				fro += float64(2 * v * v)
			}
		}
	}
	// Each entry of P̂ + K is rounded once: the error matrix has entries
	// ≤ u|entry|, so norm ≤ u‖P̂ + K‖_F (upper-bounded below).
	round := accurate.MulUp(accurate.U, accurate.SqrtUp(accurate.UpperRel(fro, L*L+2)))
	ub := accurate.AddUp(accurate.AddUp(verified.MaxEigUpper(sum, topGuess(sum)), delta), round)
	return math.Min(ub, 1), nil
}

// topGuess estimates λmax of a symmetric matrix as the starting point of
// the verified test (any value gives a valid bound): the full
// decomposition up to order 256, Lanczos (eigen.Top) above, where the
// decomposition would cost seconds.
func topGuess(a *mat.SymDense) float64 {
	n := a.SymmetricDim()
	if n <= 256 {
		if v, _, ok := eigen.Sym(a, false); ok {
			return v[len(v)-1]
		}
		return math.NaN()
	}
	theta, _ := eigen.Top(eigen.SymApply(a), make([]float64, n), 0, 0, 1e-12)
	return theta
}

// Relaxation is the level-one SDP of w in the form of internal/sdp, with
// the bookkeeping to turn its dual into a certificate.
type Relaxation struct {
	Problem sdp.Problem
	m, n    int
	pairs   [][4]int // constraint i ≥ 1: entry (a, b) minus entry (a', b')
}

// LevelOne builds the level-one relaxation: maximise ⟨P̂, ρ⟩ subject to
// tr ρ = 1 and ρ_ab = ρ_T(ab) for every pair of entries exchanged by the
// partial transpose. Variables: the upper triangle of ρ (order mn).
func LevelOne(w *subspace.Subspace) (*Relaxation, error) {
	m, n := w.Rows(), w.Cols()
	L := m * n
	if L > 120 {
		return nil, fmt.Errorf("%w: m·n = %d (the dense solver handles m·n ≤ 120)", ErrTooLarge, L)
	}
	p, _ := ProjectorBound(w)
	r := &Relaxation{m: m, n: n}
	for a := 0; a < L; a++ {
		for b := a; b < L; b++ {
			if v := p.At(a, b); v != 0 {
				r.Problem.C = append(r.Problem.C, sdp.Entry{I: a, J: b, V: v})
			}
		}
	}
	tr := make([]sdp.Entry, L)
	for a := 0; a < L; a++ {
		tr[a] = sdp.Entry{I: a, J: a, V: 1}
	}
	r.Problem.Blocks = []int{L}
	r.Problem.A = append(r.Problem.A, tr)
	r.Problem.B = append(r.Problem.B, 1)
	r.pairs = append(r.pairs, [4]int{})
	for a := 0; a < L; a++ {
		for b := a; b < L; b++ {
			pa, pb := partner(a, b, n)
			if pa > pb {
				pa, pb = pb, pa
			}
			// One constraint per exchanged pair: keep it at its smaller entry.
			if pa < a || (pa == a && pb <= b) {
				continue
			}
			half := func(i, j int) float64 {
				if i == j {
					return 1
				}
				return 0.5
			}
			r.Problem.A = append(r.Problem.A, []sdp.Entry{{I: a, J: b, V: half(a, b)}, {I: pa, J: pb, V: -half(pa, pb)}})
			r.Problem.B = append(r.Problem.B, 0)
			r.pairs = append(r.pairs, [4]int{a, b, pa, pb})
		}
	}
	return r, nil
}

// Certificate turns dual multipliers y into a certificate. The dual
// constraint y₀I + Σ_{i≥1} y_iA_i − P̂ ⪰ 0 says λmax(P̂ + K) ≤ y₀ for
// K = −Σ_{i≥1} y_iA_i, which is built so that T(K) = −K and K = Kᵀ hold
// exactly.
func (r *Relaxation) Certificate(y []float64) Certificate {
	L := r.m * r.n
	k := make([]float64, L*L)
	for i := 1; i < len(r.pairs) && i < len(y); i++ {
		q := r.pairs[i]
		a, b, pa, pb := q[0], q[1], q[2], q[3]
		// A_i has +1 (diagonal) or +1/2 (off-diagonal, both halves) at (a, b)
		// and the negative at (pa, pb); the dual uses Σ y_i A_i.
		va := -y[i]
		if a != b {
			va = -y[i] / 2
		}
		vp := y[i]
		if pa != pb {
			vp = y[i] / 2
		}
		// Exact antisymmetry needs |va| = |vp|: off-diagonal pairs map to
		// off-diagonal pairs (the partial transpose preserves a ≠ b).
		k[a*L+b], k[b*L+a] = va, va
		k[pa*L+pb], k[pb*L+pa] = vp, vp
	}
	return Certificate{M: r.m, N: r.n, K: k}
}

// Bound is a Searcher that solves the level-one relaxation, verifies the
// certificate from its dual (Lower = √(1 − bound) on d*), and rounds the
// primal moment matrix to a witness (its top eigenvector reshaped to an m×n
// matrix, whose top singular pair is polished by alternating maximisation).
//
// The zero value is ready to use.
type Bound struct {
	// MaxIter bounds the interior-point iterations; zero means 100.
	MaxIter int
	// Progress, if set, is called at most every 200 ms with the solver's
	// iteration and, in Estimate, its current dual objective (an estimate
	// of the relaxation's value, not certified: only the certificate
	// verified at the end proves a bound).
	Progress func(rankone.Progress)
	// Keep, if non-nil, receives the certificate whose verification gave
	// Lower (left unchanged when none was verified), for proof files.
	Keep *Certificate
	// KeepComplex is Keep for a complex subspace, whose certificate is a
	// Hermitian matrix (see VerifyComplex).
	KeepComplex *ComplexCertificate
}

var _ rankone.Searcher = (*Bound)(nil)

// Name returns "sos level 1".
func (b *Bound) Name() string { return "sos level 1" }

// Search implements rankone.Searcher.
func (b *Bound) Search(ctx context.Context, w *subspace.Subspace) (rankone.Result, error) {
	if err := rankone.CheckSettings("Bound", rankone.Setting{Name: "MaxIter", Value: float64(b.MaxIter)}); err != nil {
		return rankone.TrivialResult(w, b.Name()), err
	}
	if w.Field() == subspace.Complex {
		return b.searchComplex(ctx, w)
	}
	begin := time.Now()
	m, n := w.Rows(), w.Cols()
	res := startResult(w, b.Name())
	rel, err := LevelOne(w)
	if err != nil {
		return res, err
	}
	sol, err := b.solve(ctx, rel.Problem, &res, 1)
	if sol == nil {
		return res, err
	}
	cert := rel.Certificate(sol.Y)
	if hb, verr := Verify(w, cert); verr == nil {
		if lo := rankone.DistanceLower(hb); lo > 0 {
			res.Lower, res.LowerBy = lo, "sos level 1"
			if b.Keep != nil {
				*b.Keep = cert
			}
		}
	}
	// Round the moment matrix to a point.
	if x, y, ok := round(sol.X[0], m, n); ok {
		keepBetter(ctx, w, &res, x, y)
	}
	// "Exact" is said only when the certified interval shows it: the
	// rounded witness meets the certified bound. A numerically rank-one
	// moment matrix alone is evidence, not proof.
	if res.LowerBy != "" && closed(res) {
		res.LowerBy = exactLabel
	}
	return finishResult(ctx, res, begin, err)
}

// solve runs the interior-point method on p with Bound's settings and
// throttled progress (the dual objective times scale as the estimate of
// h, in the Result's coordinates), and records its iterations and, when
// it did not reach its tolerance, the limit in res.
func (b *Bound) solve(ctx context.Context, p sdp.Problem, res *rankone.Result, scale float64) (*sdp.Solution, error) {
	var hook func(int, float64, float64, float64)
	if b.Progress != nil {
		gate := rankone.NewThrottle(b.Progress)
		hook = func(it int, _, dual, _ float64) {
			gate.Report(rankone.Progress{Searcher: b.Name(), Iteration: it, Estimate: dual * scale, Upper: res.Upper})
		}
	}
	sol, err := sdp.Solve(ctx, p, sdp.Settings{MaxIter: b.MaxIter, Progress: hook})
	if sol == nil {
		return nil, err
	}
	res.Iterations = sol.Iterations
	if sol.Status != sdp.Optimal {
		res.Status, res.Limit = rankone.LimitReached, rankone.IterationLimit
	}
	return sol, err
}

// startResult is the Result every SOS searcher starts from: the trivial
// witness, whose Upper is valid whatever happens next.
func startResult(w *subspace.Subspace, name string) rankone.Result {
	res := rankone.TrivialResult(w, name)
	res.Starts = 1
	return res
}

// keepBetter polishes a rounded point and keeps it if its certified Upper
// beats the current witness.
func keepBetter(ctx context.Context, w *subspace.Subspace, res *rankone.Result, x, y []float64) {
	px, py, u, st := rankone.Polish(ctx, w, &rankone.ALS{}, x, y)
	if u < res.Upper {
		res.X, res.Y, res.Upper, res.Value = px, py, u, st.Value
	}
}

// exactLabel is Bound's LowerBy when the certified interval closes.
const exactLabel = "sos level 1 (exact here: the certified interval closes)"

// closed reports whether the certified interval has closed to the relative
// width at which the SOS searchers report GapReached.
func closed(res rankone.Result) bool {
	return res.Upper-res.Lower <= 1e-9*math.Max(res.Upper, 1e-300)
}

// finishResult sets the final status (gap reached when the relaxation is
// exact here, cancelled on a done context) and the elapsed time.
func finishResult(ctx context.Context, res rankone.Result, begin time.Time, err error) (rankone.Result, error) {
	if closed(res) {
		res.Status = rankone.GapReached
	}
	res.Elapsed = time.Since(begin)
	if cerr := ctx.Err(); cerr != nil {
		res.Status = rankone.Cancelled
		return res, cerr
	}
	return res, err
}

// RankOne reports whether the moment matrix is numerically rank one
// (λ₂ ≤ tol·λ₁), in which case the relaxation is exact.
func RankOne(x *mat.SymDense, tol float64) bool {
	v, _, ok := eigen.Sym(x, false)
	if !ok {
		return false
	}
	if len(v) < 2 {
		return true
	}
	return v[len(v)-2] <= tol*v[len(v)-1]
}

func round(x *mat.SymDense, m, n int) ([]float64, []float64, bool) {
	_, vecs, ok := eigen.Sym(x, true)
	if !ok {
		return nil, nil, false
	}
	return topSingularPair(mat.Col(nil, m*n-1, vecs), m, n)
}

// topSingularPair returns the top singular vectors of the m×n matrix whose
// row-major entries are top (the moment matrix's top eigenvector read as a
// matrix: the rank-one point the relaxation suggests).
func topSingularPair(top []float64, m, n int) ([]float64, []float64, bool) {
	var svd mat.SVD
	if !svd.Factorize(mat.NewDense(m, n, top), mat.SVDThin) {
		return nil, nil, false
	}
	var u, v mat.Dense
	svd.UTo(&u)
	svd.VTo(&v)
	return mat.Col(nil, 0, &u), mat.Col(nil, 0, &v), true
}

// WriteSDPA writes the relaxation in the SDPA sparse format, so that any SDP
// solver can check it. Layout: one block of order mn; the variable is the
// moment matrix ρ with rows and columns indexed by (i, j) ↦ i·n + j + 1
// (1-based); matrix 0 is the objective P̂ (to be maximised, in the
// convention max tr(F₀X) s.t. tr(F_iX) = c_i, X ⪰ 0 that CSDP uses);
// constraint 1 is tr ρ = 1 and the others are ρ_ab − ρ_T(ab) = 0.
func (r *Relaxation) WriteSDPA(wr io.Writer) error {
	return writeSDPA(wr, fmt.Sprintf("level-one moment relaxation, %dx%d", r.m, r.n), r.Problem)
}

// writeSDPA writes p in the SDPA sparse format: a comment line with title,
// the number of constraints, the number of blocks and their orders, the
// right-hand sides, then one line "matrix block i j value" (1-based, upper
// triangle) per entry, matrix 0 being the objective.
func writeSDPA(wr io.Writer, title string, p sdp.Problem) error {
	bw := bufio.NewWriter(wr)
	fmt.Fprintf(bw, "\"%s\n%d\n%d\n", title, len(p.A), len(p.Blocks))
	for i, n := range p.Blocks {
		if i > 0 {
			bw.WriteByte(' ')
		}
		bw.WriteString(strconv.Itoa(n))
	}
	bw.WriteByte('\n')
	for i, b := range p.B {
		if i > 0 {
			bw.WriteByte(' ')
		}
		bw.WriteString(strconv.FormatFloat(b, 'g', -1, 64))
	}
	bw.WriteByte('\n')
	write := func(mat int, es []sdp.Entry) {
		for _, e := range es {
			fmt.Fprintf(bw, "%d %d %d %d %s\n", mat, e.Block+1, e.I+1, e.J+1, strconv.FormatFloat(e.V, 'g', -1, 64))
		}
	}
	write(0, p.C)
	for i, a := range p.A {
		write(i+1, a)
	}
	return bw.Flush()
}
