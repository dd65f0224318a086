package subspace

import (
	"math"
	"math/rand/v2"
	"sync"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
)

// The rank-revealing factorisation of New: Householder QR with column
// pivoting, blocked so that nearly all of its work is matrix products
// (gemm.go), run on all cores.
//
// Layout. The matrix factored is A = [a_0 … a_{rr−1}] (L×rr), column i
// stored as row i of the row-major rr×L array a. Step j makes the
// reflector H_j = I − β_j v_j v_jᵀ (v_j zero before entry j) that maps the
// pivot column's part from entry j on to R_jj·e_j; as in LAPACK, v_j
// overwrites row j from entry j on and R's column i sits in row i before
// its diagonal.
//
// Pivoting. Greedy column pivoting (P. Businger and G. H. Golub, "Linear
// least squares solutions by Householder transformations", Numer. Math. 7,
// 1965) picks at every step the column with the largest remaining norm,
// which forces a pass over the whole trailing matrix per step: half the
// work of LAPACK's blocked version (G. Quintana-Ortí, X. Sun and C. H.
// Bischof, "A BLAS-3 version of the QR factorization with column
// pivoting", SIAM J. Sci. Comput. 19, 1998) is such matrix–vector passes,
// and they bound its speed by the memory bandwidth. Here a block of qrNB
// pivots is chosen at once from a random sketch Y = ΩA (Ω: p×L Gaussian,
// p = qrNB + qrOver) by greedy pivoting on the small p×rr matrix Y, as in
// J. A. Duersch and M. Gu, "Randomized QR with column pivoting", SIAM J.
// Sci. Comput. 39(4), 2017 (and P.-G. Martinsson, G. Quintana-Ortí, N.
// Heavner and R. van de Geijn, "Householder QR factorization with
// randomization for column pivoting (HQRRP)", SIAM J. Sci. Comput. 39(2),
// 2017): ‖Ωx‖² ≈ p‖x‖² for every fixed x with high probability, so the
// sketch's pivots nearly maximise the volume of the block. The chosen
// columns (the panel) are factored with greedy pivoting among themselves
// on their true norms, the rest of the matrix is updated by the panel's
// block reflector I − V T Vᵀ (R. Schreiber and C. Van Loan, "A
// storage-efficient WY representation for products of Householder
// transformations", SIAM J. Sci. Stat. Comput. 10, 1989) in three
// products, and the sketch is updated without a new pass over A (Duersch
// and Gu, §4): if A'_P = Q₁R₁₁ are the panel's columns and A'_T = Q₁R₁₂ +
// Q₂Ã_T the rest, then (ΩQ₂)Ã_T = Y_T − (Y_P R₁₁⁻¹)R₁₂, a sketch of the
// new trailing matrix by ΩQ₂, itself Gaussian since Q₂ has orthonormal
// columns. When at most qrPanelMax columns remain (from the start when
// rr ≤ qrPanelMax, or when the matrix has at most qrNB rows) the panel is
// every remaining column: plain greedy pivoting.
//
// The rank rule (Options.RankTol) is kept exactly, whatever the sketch
// chose: after every block the norms of the trailing columns are
// recomputed from the updated matrix (not downdated), the panel always
// contains the column of largest such norm, and the factorisation stops
// when that largest norm is at most tol. A column is kept only when its
// remaining norm exceeded tol at its own step (its |R_jj|), and every
// column left out lies within tol of the span of those kept (its remaining
// norm is its distance to that span, in the computed factorisation). The
// randomness changes which columns are chosen first, never this promise;
// Ω comes from a fixed seed, so New is deterministic.
const (
	qrNB       = 64     // reflectors per block
	qrOver     = 8      // sketch rows beyond the block size
	qrPanelMax = qrNB   // at most this many remaining columns: one greedy panel
	qrSeed     = 0x5e9e // seed of the sketch
)

// qrBlk is one block reflector: H_j0 ⋯ H_{j0+nb−1} = I − V T Vᵀ with V
// the nb reflectors (rows j0.. of the factored array) and T upper
// triangular nb×nb.
type qrBlk struct {
	j0, nb int
	t      []float64
}

// qrFactors describes a pivoted Householder QR of the rr×L row array a
// (rows are the columns of the L×rr matrix being factored).
type qrFactors struct {
	rr, k  int
	perm   []int     // perm[j] = copied column in pivot position j
	diag   []float64 // R_jj
	beta   []float64 // H_j = I − beta_j v_j v_jᵀ, v_j stored in row j from entry j
	rsave  []float64 // R's first k columns, saved by saveR for the reconstruction (see there)
	sc     scratch   // the factorisation's product buffers, reused by formQ and complement
	left   float64   // norm of the first column left out by the rank decision (0: none)
	blocks []qrBlk
}

// qrRun is the state of one factorisation.
type qrRun struct {
	a        []float64
	rr, L    int
	tol      float64
	stop     func() bool
	g        *gemmPool
	f        *qrFactors
	nrm, ref []float64 // remaining norms (exact at a block's start) and their reference for the downdate
	p        int       // sketch rows (0: no sketch)
	y        []float64 // rr×p: row i is the sketch of row i's trailing part
	done     func(flops float64)
	sc       scratch
}

// scratch holds the buffers a factorisation reuses from block to block,
// each grown to the largest size asked for.
type scratch struct {
	wm, w2, tri, gr, z, qs, omega, out, c, c0, d []float64
	taken                                        []bool
	pos, at                                      []int
}

// grow returns (*b)[:n], reallocating when it is too short. The contents
// are not cleared.
func grow(b *[]float64, n int) []float64 {
	if cap(*b) < n {
		*b = make([]float64, n)
	}
	return (*b)[:n]
}

func growInt(b *[]int, n int) []int {
	if cap(*b) < n {
		*b = make([]int, n)
	}
	return (*b)[:n]
}

// pivotedQR factors a in place with the rank rule of tol (see the comment
// at the top of this file) and returns the factors. stop is checked
// between blocks and inside the products; when it reports true the
// factorisation ends early (the caller discards it).
func pivotedQR(a []float64, rr, L int, tol float64, stop func() bool) *qrFactors {
	return factorQR(a, rr, L, tol, stop, newGemmPool(max(rr, L)), nil)
}

// factorQR is pivotedQR with the caller's product pool and a progress
// callback (flops done since the last call; nil for none).
func factorQR(a []float64, rr, L int, tol float64, stop func() bool, g *gemmPool, done func(float64)) *qrFactors {
	k := min(rr, L)
	q := &qrRun{a: a, rr: rr, L: L, tol: tol, stop: stop, g: g, done: done,
		f: &qrFactors{rr: rr, perm: make([]int, rr),
			diag: make([]float64, 0, k), beta: make([]float64, 0, k)},
		nrm: make([]float64, rr), ref: make([]float64, rr)}
	for i := range q.f.perm {
		q.f.perm[i] = i
	}
	q.run()
	q.f.k = len(q.f.diag)
	q.f.sc = scratch{wm: q.sc.wm, w2: q.sc.w2} // the block products' buffers, the largest
	return q.f
}

func (q *qrRun) report(flops float64) {
	if q.done != nil {
		q.done(flops)
	}
}

func (q *qrRun) run() {
	rr, L, f := q.rr, q.L, q.f
	steps := min(rr, L)
	q.norms(0)
	if rr > qrPanelMax && steps > qrNB {
		q.initSketch()
	}
	j := 0
	for j < steps && !q.stop() {
		b := min(qrNB, steps-j)
		nt := rr - j
		pr := nt // rows of the panel
		if nt > qrPanelMax && q.p > 0 {
			q.choose(j, b)
			pr = b
		}
		bp, xn := q.panel(j, pr, b)
		if bp == 0 {
			f.left = xn
			break
		}
		if !q.block(j, bp, pr) {
			return
		}
		q.report(4 * float64(bp) * float64(L-j) * float64(nt))
		j += bp
		if j == steps {
			break
		}
		if mx := q.norms(j); mx <= q.tol {
			f.left = mx
			break
		}
		if q.p > 0 && rr-j > qrPanelMax {
			q.checkSketch(j)
		}
	}
	f.k = len(f.diag)
}

// norms sets nrm and ref of rows [j, rr) to the norms of their parts from
// entry j on, computed afresh, and returns the largest.
func (q *qrRun) norms(j int) float64 {
	L := q.L
	parallelRows(q.rr-j, q.g.workers, L-j, func(i0, i1 int) {
		for i := j + i0; i < j+i1; i++ {
			q.nrm[i] = norm2(q.a[i*L+j : (i+1)*L])
			q.ref[i] = q.nrm[i]
		}
	})
	var mx float64
	for _, v := range q.nrm[j:] {
		mx = math.Max(mx, v)
	}
	return mx
}

// norm2 returns the Euclidean norm of x: a plain sum of squares, or
// gonum's scaled Nrm2 when that sum is out of the safe range.
func norm2(x []float64) float64 {
	var s0, s1, s2, s3 float64
	i := 0
	for ; i+4 <= len(x); i += 4 {
		v := x[i : i+4 : i+4]
		s0 += v[0] * v[0]
		s1 += v[1] * v[1]
		s2 += v[2] * v[2]
		s3 += v[3] * v[3]
	}
	for ; i < len(x); i++ {
		s0 += x[i] * x[i]
	}
	s := (s0 + s1) + (s2 + s3)
	if s < 0x1p-900 || s > 0x1p900 {
		return blas64.Nrm2(blas64.Vector{N: len(x), Data: x, Inc: 1})
	}
	return math.Sqrt(s)
}

// parallelRows runs f over [0, n) in fixed chunks of about 2^18/cost
// rows each (cost: the work of one row), on up to workers goroutines. The chunks do not depend on the
// number of workers.
func parallelRows(n, workers, cost int, f func(i0, i1 int)) {
	chunk := max(1, (1<<18)/max(1, cost))
	if workers <= 1 || n <= chunk {
		f(0, n)
		return
	}
	var wg sync.WaitGroup
	var mu sync.Mutex
	next := 0
	for w := 0; w < workers; w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for {
				mu.Lock()
				i0 := next
				next += chunk
				mu.Unlock()
				if i0 >= n {
					return
				}
				f(i0, min(n, i0+chunk))
			}
		}()
	}
	wg.Wait()
}

// swapRows exchanges columns x and y of the factorisation (rows of a, with
// their norms, sketch and original index).
func (q *qrRun) swapRows(x, y int) {
	if x == y {
		return
	}
	L := q.L
	blas64.Swap(blas64.Vector{N: L, Data: q.a[x*L:], Inc: 1}, blas64.Vector{N: L, Data: q.a[y*L:], Inc: 1})
	q.nrm[x], q.nrm[y] = q.nrm[y], q.nrm[x]
	q.ref[x], q.ref[y] = q.ref[y], q.ref[x]
	q.f.perm[x], q.f.perm[y] = q.f.perm[y], q.f.perm[x]
	if q.p > 0 {
		p := q.p
		for t := 0; t < p; t++ {
			q.y[x*p+t], q.y[y*p+t] = q.y[y*p+t], q.y[x*p+t]
		}
	}
}

// initSketch forms the sketch Y = AΩᵀ.
func (q *qrRun) initSketch() {
	q.p = qrNB + qrOver
	q.y = make([]float64, q.rr*q.p)
	q.resketch(0)
}

// sketchCols is the width of the column slices in which Ω is drawn.
const sketchCols = 512

// resketch recomputes the sketch of rows [j, rr) from their parts from
// entry j on, with the columns j.. of Ω. Ω (p×L, standard Gaussian) is
// never stored whole: its columns [c0, c0+sketchCols) are drawn from a
// generator seeded by (qrSeed, c0), so the same Ω comes back every time,
// and Y accumulates the slices' products in order.
func (q *qrRun) resketch(j int) {
	p, L := q.p, q.L
	ys := q.y[j*p : q.rr*p]
	clear(ys)
	for c0 := j / sketchCols * sketchCols; c0 < L; c0 += sketchCols {
		c1 := min(L, c0+sketchCols)
		om := grow(&q.sc.omega, p*(c1-c0))
		rng := rand.New(rand.NewPCG(qrSeed, uint64(c0)))
		for i := range om {
			om[i] = rng.NormFloat64()
		}
		lo := max(j, c0)
		q.g.mul(q.rr-j, p, c1-lo, false, operand{q.a[j*L+lo:], L, false}, operand{om[lo-c0:], c1 - c0, true}, ys, p, q.stop)
	}
	q.report(2 * float64(p) * float64(L-j) * float64(q.rr-j))
}

// checkSketch compares the sketch of rows [j, rr) with their true norms
// and draws it afresh when the two disagree by more than a factor of 4 in
// total (E‖Ωx‖² = p‖x‖² for Gaussian Ω; the update formula loses accuracy
// when R₁₁ is ill-conditioned, and this is where that shows).
func (q *qrRun) checkSketch(j int) {
	p := q.p
	var sy, sn float64
	for i := j; i < q.rr; i++ {
		sn += q.nrm[i] * q.nrm[i]
		for _, v := range q.y[i*p : (i+1)*p] {
			sy += v * v
		}
	}
	e := float64(p) * sn
	if !(sy <= 4*e && sy >= e/4) {
		q.resketch(j)
	}
}

// choose picks b of the rows [j, rr) by greedy pivoting on their sketches
// (classical Gram–Schmidt, twice, on the chosen sketches; the others'
// remaining sketch norms downdated), makes sure the row of largest true
// norm is among them, and moves them to rows [j, j+b) in the order chosen.
func (q *qrRun) choose(j, b int) {
	p, nt, sc := q.p, q.rr-j, &q.sc
	ys := q.y[j*p : q.rr*p]
	c, c0, d := grow(&sc.c, nt), grow(&sc.c0, nt), grow(&sc.d, nt)
	for i := range c {
		c[i] = dot(ys[i*p:(i+1)*p], ys[i*p:(i+1)*p])
		c0[i] = c[i]
	}
	if cap(sc.taken) < nt {
		sc.taken = make([]bool, nt)
	}
	taken := sc.taken[:nt]
	clear(taken)
	sel := growInt(&sc.at, nt+b)[nt : nt : nt+b]
	qs := grow(&sc.qs, b*p)
	yg := blas64.General{Rows: nt, Cols: p, Stride: p, Data: ys}
	for s := 0; s < b; s++ {
		best, bv := -1, 0.0
		for i, v := range c {
			if !taken[i] && v > bv {
				best, bv = i, v
			}
		}
		if best < 0 {
			break
		}
		taken[best] = true
		sel = append(sel, best)
		r := qs[s*p : (s+1)*p]
		copy(r, ys[best*p:(best+1)*p])
		for range 2 {
			for t := 0; t < s; t++ {
				qt := qs[t*p : (t+1)*p]
				h := dot(qt, r)
				for u := range r {
					r[u] -= h * qt[u]
				}
			}
		}
		nr := math.Sqrt(dot(r, r))
		if !(nr > 0) {
			clear(r)
			continue
		}
		for u := range r {
			r[u] /= nr
		}
		blas64.Gemv(blas.NoTrans, 1, yg, blas64.Vector{N: p, Data: r, Inc: 1}, 0, blas64.Vector{N: nt, Data: d, Inc: 1})
		for i, v := range d {
			if taken[i] {
				continue
			}
			c[i] -= v * v
			if c[i] <= 1e-12*c0[i] {
				c[i] = 0 // in the span of the chosen sketches, as far as the sketch can tell
			}
		}
	}
	// The row of largest true norm, then (if the sketch ran out) the
	// largest remaining true norms fill the block.
	g := 0
	for i := range nt {
		if q.nrm[j+i] > q.nrm[j+g] {
			g = i
		}
	}
	if !taken[g] {
		if len(sel) == b {
			taken[sel[b-1]] = false
			sel = sel[:b-1]
		}
		taken[g] = true
		sel = append(sel, g)
	}
	for len(sel) < b {
		best := -1
		for i := range nt {
			if !taken[i] && (best < 0 || q.nrm[j+i] > q.nrm[j+best]) {
				best = i
			}
		}
		taken[best] = true
		sel = append(sel, best)
	}
	// Move them: pos[i] is where local row i is now, at[x] which local row
	// is at local position x.
	pos, at := growInt(&sc.pos, nt), sc.at[:nt]
	for i := range pos {
		pos[i], at[i] = i, i
	}
	for s, i := range sel {
		x := pos[i]
		q.swapRows(j+s, j+x)
		o := at[s]
		at[s], at[x] = i, o
		pos[i], pos[o] = s, x
	}
}

// panel factors rows [j, j+pr) with greedy pivoting on their remaining
// norms (downdated as in LAPACK's xLAQP2 and recomputed when cancellation
// makes the downdate unreliable), at most b steps. It stops early, before
// making a reflector, when the pivot's remaining norm xn is at most tol,
// and returns the number of reflectors made and that xn.
func (q *qrRun) panel(j, pr, b int) (int, float64) {
	a, L, f := q.a, q.L, q.f
	tol3z := math.Sqrt(0x1p-52)
	for i := 0; i < b; i++ {
		jj := j + i
		pv := jj
		for t := jj + 1; t < j+pr; t++ {
			if q.nrm[t] > q.nrm[pv] {
				pv = t
			}
		}
		q.swapRows(jj, pv)
		x := a[jj*L+jj : (jj+1)*L]
		xn := blas64.Nrm2(blas64.Vector{N: len(x), Data: x, Inc: 1})
		if xn <= q.tol {
			return i, xn
		}
		// H = I − beta·v vᵀ with v = x − alpha·e₁, alpha = −sign(x₀)‖x‖, so that
		// Hx = alpha·e₁ and vᵀv = 2‖x‖(‖x‖ + |x₀|) without cancellation.
		x0 := x[0]
		alpha := -math.Copysign(xn, x0)
		x[0] = x0 - alpha
		beta := 1 / (xn * (xn + math.Abs(x0)))
		f.diag = append(f.diag, alpha)
		f.beta = append(f.beta, beta)
		rest := j + pr - jj - 1
		if rest == 0 {
			continue
		}
		// The rows after the pivot: w = rows·v, rows −= beta·w vᵀ, and their
		// norms downdated. Each row's update is its own, so the rows are
		// split among the workers when there is enough of them.
		// (Row by row, so that a row's result does not depend on the split.)
		update := func(t0, t1 int) {
			for t := t0; t < t1; t++ {
				row := a[t*L+jj : (t+1)*L]
				rowAxpy(-beta*rowDot(row, x), x, row)
				q.downdate(t, jj, tol3z)
			}
		}
		if parts := min(q.g.workers, rest/8); parts > 1 && rest*(L-jj) >= 1<<15 {
			var wg sync.WaitGroup
			for p := 0; p < parts; p++ {
				t0, t1 := jj+1+rest*p/parts, jj+1+rest*(p+1)/parts
				wg.Add(1)
				go func() {
					defer wg.Done()
					update(t0, t1)
				}()
			}
			wg.Wait()
		} else {
			update(jj+1, j+pr)
		}
	}
	return b, 0
}

// downdate updates the remaining norm of row t after step jj: ‖x'‖² =
// ‖x‖² − x_jj², as a factor of the old norm, recomputed when the factor
// has lost too much (relative to the last recomputation) to be trusted
// (LAPACK's xLAQP2 test with tol3z = √u).
func (q *qrRun) downdate(t, jj int, tol3z float64) {
	a, L := q.a, q.L
	if q.nrm[t] == 0 {
		return
	}
	r := math.Abs(a[t*L+jj]) / q.nrm[t]
	r = math.Max(0, (1+r)*(1-r))
	r2 := r * (q.nrm[t] / q.ref[t]) * (q.nrm[t] / q.ref[t])
	if r2 <= tol3z {
		if jj+1 < L {
			q.nrm[t] = blas64.Nrm2(blas64.Vector{N: L - jj - 1, Data: a[t*L+jj+1 : (t+1)*L], Inc: 1})
		} else {
			q.nrm[t] = 0
		}
		q.ref[t] = q.nrm[t]
	} else {
		q.nrm[t] *= math.Sqrt(r)
	}
}

// The block operations read the reflectors V of a block in place: rows
// j0..j0+nb−1 of the factored array from entry j0 on (row stride L), the
// entries before each reflector's first entry being zero. During the
// factorisation those entries hold R₁₁ (saved, zeroed and restored by
// block); clearJunk zeroes them for good once R is no longer needed there
// (saved by saveR, or not wanted).

// blockT returns T of the block reflector of the nb reflectors v (w
// entries each, row stride ld) with factors beta: H_0 ⋯ H_{nb−1} =
// I − V T Vᵀ, T upper triangular, by the forward recurrence T_ii = β_i,
// T[0:i, i] = −β_i T[0:i, 0:i]·(V[:, 0:i]ᵀ v_i) (Schreiber and Van Loan
// 1989).
func blockT(g *gemmPool, v []float64, nb, w, ld int, beta []float64, sc *scratch) []float64 {
	gr := grow(&sc.gr, nb*nb)
	clear(gr)
	g.mul(nb, nb, w, false, operand{v, ld, false}, operand{v, ld, true}, gr, nb, nil)
	t := make([]float64, nb*nb)
	h := grow(&sc.z, nb)
	for i := 0; i < nb; i++ {
		t[i*nb+i] = beta[i]
		for s := 0; s < i; s++ {
			h[s] = -beta[i] * gr[s*nb+i]
		}
		for s := 0; s < i; s++ {
			var sum float64
			for u := s; u < i; u++ {
				sum += t[s*nb+u] * h[u]
			}
			t[s*nb+i] = sum
		}
	}
	return t
}

// applyBlock applies the block reflector I − V T Vᵀ (trans: its transpose
// I − V Tᵀ Vᵀ) to the m rows of c (row stride ldc) from their entry 0 on,
// over w entries, in three products: W = C·Vᵀ, W₂ = W·Tᵀ (trans: W·T),
// C ← C − W₂·V (row by row, c ← c − V·(T or Tᵀ)·Vᵀc). V has row stride
// ldv.
func applyBlock(g *gemmPool, v []float64, ldv int, t []float64, nb, w int, trans bool, c []float64, m, ldc int, stop func() bool, sc *scratch) bool {
	if m == 0 {
		return true
	}
	wm := grow(&sc.wm, m*nb)
	clear(wm)
	if !g.mul(m, nb, w, false, operand{c, ldc, false}, operand{v, ldv, true}, wm, nb, stop) {
		return false
	}
	w2 := grow(&sc.w2, m*nb)
	clear(w2)
	g.mul(m, nb, nb, false, operand{wm, nb, false}, operand{t, nb, !trans}, w2, nb, nil)
	return g.mul(m, w, nb, true, operand{w2, nb, false}, operand{v, ldv, false}, c, ldc, stop)
}

// block finishes a panel of bp reflectors made at rows [j, j+bp) of a
// panel of pr rows: it records the block reflector, applies its transpose
// to the rows after the panel and updates the sketch of every row after
// the reflectors. It returns false when stopped.
func (q *qrRun) block(j, bp, pr int) bool {
	a, L, sc := q.a, q.L, &q.sc
	w := L - j
	// R₁₁ sits before the reflectors' first entries: keep it aside.
	tri := grow(&sc.tri, bp*bp)
	for s := 0; s < bp; s++ {
		row := a[(j+s)*L+j : (j+s)*L+j+s]
		copy(tri[s*bp:s*bp+s], row) // tri[s·bp + u] = R₁₁[u][s], u < s
		clear(row)
	}
	defer func() {
		for s := 0; s < bp; s++ {
			copy(a[(j+s)*L+j:(j+s)*L+j+s], tri[s*bp:s*bp+s])
		}
	}()
	v := a[j*L+j:]
	t := blockT(q.g, v, bp, w, L, q.f.beta[j:j+bp], sc)
	q.f.blocks = append(q.f.blocks, qrBlk{j0: j, nb: bp, t: t})
	if rest := q.rr - j - pr; rest > 0 {
		if !applyBlock(q.g, v, L, t, bp, w, true, a[(j+pr)*L+j:], rest, L, q.stop, sc) {
			return false
		}
	}
	if q.p == 0 || q.rr-j-bp <= qrPanelMax {
		return true
	}
	// Z = Y_P R₁₁⁻¹ (row s of z is column s of Z), then Y_T −= R₁₂ᵀ·Z.
	p := q.p
	z := grow(&sc.z, bp*p)
	for s := 0; s < bp; s++ {
		zs := z[s*p : (s+1)*p]
		copy(zs, q.y[(j+s)*p:(j+s+1)*p])
		for u := 0; u < s; u++ {
			r := tri[s*bp+u] // R₁₁[u][s]
			zu := z[u*p : (u+1)*p]
			for x := range zs {
				zs[x] -= r * zu[x]
			}
		}
		d := q.f.diag[j+s]
		for x := range zs {
			zs[x] /= d
		}
	}
	rest := q.rr - j - bp
	q.g.mul(rest, p, bp, true, operand{a[(j+bp)*L+j:], L, false}, operand{z, p, false}, q.y[(j+bp)*p:], p, nil)
	return true
}

// saveR copies the first k columns of R out of the factored array a, the
// part that forming Q in place overwrites, into f.rsave, for the
// reconstruction (subspace.go). They are stored the way reconstruction
// reads them: for each chunk [c0, c1) of reconChunk(rr) columns (c0 < k),
// the rows c0..w−1 of Rᵀ (w = min(c1, k)) as a dense (w − c0)×w block, row
// j holding R's column j: R_0j … R_{j−1,j} (row j of a before its
// diagonal), R_jj, then zeros. That is about k²/2 + reconChunk(rr)·k/2
// words instead of the rr·k of a full Rᵀ, and each chunk is one operand
// of a product, read in place. The other columns j ≥ k of R (present
// when the rank decision left columns out) are not copied: they are the
// first k entries of row j of a, which forming Q (rows 0..k−1 only) and
// the complement leave alone.
func (f *qrFactors) saveR(a []float64, L int) {
	k, chunk := f.k, reconChunk(f.rr)
	n := 0
	for c0 := 0; c0 < k; c0 += chunk {
		w := min(c0+chunk, k)
		n += (w - c0) * w
	}
	f.rsave = make([]float64, n)
	off := 0
	for c0 := 0; c0 < k; c0 += chunk {
		w := min(c0+chunk, k)
		for j := c0; j < w; j++ {
			row := f.rsave[off+(j-c0)*w : off+(j-c0+1)*w]
			copy(row[:j], a[j*L:j*L+j])
			row[j] = f.diag[j]
		}
		off += (w - c0) * w
	}
}

// clearJunk zeroes the entries before the diagonal of rows 0..k−1 of a
// (R's first k columns, saved by saveR when needed), so that each row
// holds its reflector alone.
func (f *qrFactors) clearJunk(a []float64, L int) {
	for t := 0; t < f.k; t++ {
		clear(a[t*L : t*L+t])
	}
}

// formQ overwrites rows 0..k−1 of a with the first k columns of
// H_0 H_1 ⋯ H_{k−1}, block by block from the last (the blocked form of
// LAPACK's xORGQR): the rows after block B (already columns of Q, zero
// before B's last entry) are multiplied by I − V_B T_B V_Bᵀ, then B's own
// rows become (I − V_B T_B V_Bᵀ)e_t = e_t − V_B T_B (V_Bᵀe_t), written over
// V_B in slices of columns (each slice of the result needs only the same
// slice of V_B). It returns early, leaving a unusable, when stop reports
// true.
func (f *qrFactors) formQ(a []float64, L int, stop func() bool) {
	f.formQWith(newGemmPool(max(f.rr, L)), a, L, stop, nil)
}

func (f *qrFactors) formQWith(g *gemmPool, a []float64, L int, stop func() bool, done func(float64)) {
	k := f.k
	f.clearJunk(a, L)
	// The products' intermediates grow by a block's rows from block to
	// block: sized once for the largest (the rows after the first block;
	// the factorisation's, reused, are usually large enough already), so
	// that the blocks do not leave a trail of ever larger buffers (about
	// k² words in all) for the garbage collector.
	sc := &f.sc
	if len(f.blocks) > 0 {
		m := k - f.blocks[0].nb // the rows after the first block, the most
		grow(&sc.wm, m*qrNB)
		grow(&sc.w2, m*qrNB)
	}
	for bi := len(f.blocks) - 1; bi >= 0; bi-- {
		if stop() {
			return
		}
		bl := f.blocks[bi]
		j0, nb := bl.j0, bl.nb
		w := L - j0
		v := a[j0*L+j0:]
		if m := k - j0 - nb; m > 0 && !applyBlock(g, v, L, bl.t, nb, w, false, a[(j0+nb)*L+j0:], m, L, stop, sc) {
			return
		}
		// W_own = E·Vᵀ (W_own[i][s] = V_s[i]) and W₂ = W_own·Tᵀ.
		wo := grow(&sc.wm, nb*nb)
		for i := 0; i < nb; i++ {
			for s := 0; s < nb; s++ {
				wo[i*nb+s] = v[s*L+i]
			}
		}
		w2 := grow(&sc.w2, nb*nb)
		clear(w2)
		g.mul(nb, nb, nb, false, operand{wo, nb, false}, operand{bl.t, nb, true}, w2, nb, nil)
		for c0 := 0; c0 < w; c0 += formCols {
			cw := min(formCols, w-c0)
			out := grow(&sc.out, nb*cw)
			clear(out)
			for i := 0; i < nb; i++ {
				if c0 <= i && i < c0+cw {
					out[i*cw+i-c0] = 1
				}
			}
			g.mul(nb, cw, nb, true, operand{w2, nb, false}, operand{v[c0:], L, false}, out, cw, nil)
			for i := 0; i < nb; i++ {
				copy(v[i*L+c0:i*L+c0+cw], out[i*cw:(i+1)*cw])
			}
		}
		if done != nil {
			done(4 * float64(nb) * float64(w) * float64(k-j0))
		}
	}
}

// formCols is the width of the column slices in which formQ writes a
// block's own columns of Q.
const formCols = 512

// complement returns the last L−k columns of H_0 ⋯ H_{k−1}, an orthonormal
// basis of the orthogonal complement of the first k, as rows; the
// reflectors are read from a (call it before formQ). It returns early,
// with an unusable result, when stop reports true.
func (f *qrFactors) complement(g *gemmPool, a []float64, L int, stop func() bool, done func(float64)) []float64 {
	k := f.k
	s := L - k
	out := make([]float64, s*L)
	for t := 0; t < s; t++ {
		out[t*L+k+t] = 1
	}
	f.clearJunk(a, L)
	sc := &f.sc
	for bi := len(f.blocks) - 1; bi >= 0 && s > 0; bi-- {
		if stop() {
			return out
		}
		bl := f.blocks[bi]
		if !applyBlock(g, a[bl.j0*L+bl.j0:], L, bl.t, bl.nb, L-bl.j0, false, out[bl.j0:], s, L, stop, sc) {
			return out
		}
		if done != nil {
			done(4 * float64(bl.nb) * float64(L-bl.j0) * float64(s))
		}
	}
	return out
}
