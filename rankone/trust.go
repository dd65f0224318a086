package rankone

import (
	"context"
	"math"

	"github.com/segre-lab/segre/subspace"
)

// TrustRegion is the Riemannian trust-region method (Absil, Baker,
// Gallivan, "Trust-region methods on Riemannian manifolds", Found. Comput.
// Math. 7, 2007) on the product of spheres S^{m−1} × S^{n−1}, minimising
// f = d² = 1 − h with the exact Riemannian Hessian, inner problems solved by
// truncated conjugate gradients (Steihaug–Toint), retraction by
// normalisation. Local convergence is superlinear (quadratic with the exact
// Hessian at a nondegenerate maximum; Absil et al. 2007, Thm 4.13).
//
// Derivation of the oracles. With v = x⊗y, M = P_W(x yᵀ) and h = ⟨v, P_W v⟩:
// ∇_x h = 2My, ∇_y h = 2Mᵀx; for a direction (ẋ, ẏ) and U = P_W(ẋyᵀ + xẏᵀ),
// the Euclidean Hessian is ∇²h[ẋ, ẏ] = (2Mẏ + 2Uy, 2Mᵀẋ + 2Uᵀx). On the unit
// sphere, Hess f(x)[ξ] = P_x(∇²f ξ) − (xᵀ∇f)ξ (Absil, Mahony, Sepulchre,
// "Optimization Algorithms on Matrix Manifolds", 2008, §5.5), applied factor
// by factor with f = −h (xᵀ∇_x h = yᵀ∇_y h = 2h):
// Hess f[(ẋ, ẏ)] = (−P_x(∇²_x h) + 2hẋ, −P_y(∇²_y h) + 2hẏ).
// The objective values compared in the acceptance ratio are d² computed as
// residuals ‖v − M‖², so the ratio stays meaningful when d is tiny.
//
// The zero value is ready to use.
type TrustRegion struct {
	// MaxIter bounds the outer iterations; zero means 200.
	MaxIter int
	// MaxInner bounds the conjugate-gradient steps per iteration; zero means
	// min(m+n, 50).
	MaxInner int
	// GradTol stops the method when the Riemannian gradient norm falls to GradTol;
	// zero means 1e-12.
	GradTol float64
	// Progress, if set, is called at most every 200 ms.
	Progress func(Progress)
}

var _ Searcher = (*TrustRegion)(nil)
var _ Local = (*TrustRegion)(nil)

// Name returns "trust-region".
func (t *TrustRegion) Name() string { return "trust-region" }

// Search runs the method once from the spectral start.
func (t *TrustRegion) Search(ctx context.Context, w *subspace.Subspace) (Result, error) {
	return searchLocal(ctx, w, t)
}

// Refine implements Local. Each outer iteration solves the trust-region
// subproblem by truncated conjugate gradients (tcg), then tests the
// candidate step (trRun.step); it stops when the gradient norm reaches
// GradTol, at MaxIter, or when no more progress is possible in floating
// point.
func (t *TrustRegion) Refine(ctx context.Context, w *subspace.Subspace, x, y []float64) (Stats, error) {
	if err := t.check(); err != nil {
		return Stats{}, err
	}
	m, n := len(x), len(y)
	r := newTRRun(w, x, y, orDefault(t.MaxInner, min(m+n, 50)))
	maxIter := orDefault(t.MaxIter, 200)
	tol := orDefaultF(t.GradTol, 1e-12)
	gate := NewThrottle(t.Progress)
	st := Stats{Status: LimitReached}
	defer func() {
		copy(x, r.cur.pt.x)
		copy(y, r.cur.pt.y)
	}()
	for it := 0; it < maxIter; it++ {
		gn := math.Sqrt(pairDot(r.cur.grad, r.cur.grad))
		st.Gradient = gn
		st.Value = r.cur.h
		gate.Report(Progress{Searcher: t.Name(), Iteration: it, Value: r.cur.h, Upper: 1})
		if gn <= tol {
			st.Status = Converged
			break
		}
		if err := ctx.Err(); err != nil {
			st.Status = Cancelled
			st.Evaluations = r.o.evals
			return st, err
		}
		st.Iterations = it + 1
		r.cg.solve(ctx, r.o, r.cur, r.delta)
		if !r.step() {
			// No more progress is possible in floating point.
			st.Status = floorStatus(gn)
			break
		}
	}
	st.Value = r.cur.h
	st.Evaluations = r.o.evals
	return st, nil
}

// trPoint is a point of the sphere pair with its cost and gradient data.
type trPoint struct {
	pt    pair      // (x, y), unit
	grad  pair      // Riemannian gradient of f = −h, tangent
	mat   []float64 // M = P_W(x yᵀ)
	h, f  float64   // h and f = d² (residual form)
	phase bool      // a complex subspace: work in the horizontal space (see horizontal)
}

func newTRPoint(m, n int) *trPoint {
	return &trPoint{pt: newPair(m, n), grad: newPair(m, n), mat: make([]float64, m*n)}
}

// eval sets p's cost data at p.pt: h, ∇h and M from the oracle, f = d² as
// the residual ‖x⊗y − M‖², and the Riemannian gradient of f = −h.
func (p *trPoint) eval(o *oracle) {
	x, y := p.pt.x, p.pt.y
	m, n := len(x), len(y)
	e := newPair(m, n) // ∇h
	p.h = o.Gradient(e.x, e.y, x, y, p.mat)
	if p.phase {
		p.f = complexCost(x, y, p.mat)
	} else {
		var f float64
		for i := 0; i < m; i++ {
			for j := 0; j < n; j++ {
				r := x[i]*y[j] - p.mat[i*n+j]
				f += r * r
			}
		}
		p.f = f
	}
	// grad f = −P(∇h)
	negGradient(p.grad, p.pt, e)
	p.horizontal(p.grad)
}

// complexCost is the cost of a complex subspace's point in a form without
// cancellation (derived here). On W” the residual R = X⊗Y − M has
// ‖R‖² = d”² = (1 + d²)/2, in which d² below 1e-16 is lost. But
// X⊗Y = NᵀN(X⊗Y) + (I − NᵀN)(X⊗Y) and M = NᵀPN(X⊗Y) (P the projector of
// W_R, N the co-isometry of package subspace), so
// NR = (I − P)N(X⊗Y) and ‖NR‖² = d²/2, with NR = (R_rr − R_ii,
// R_ri + R_ir)/√2 on the four m×n blocks of R. It returns d²/2 =
// d”² − 1/2: the cost of the real problem on W” less a constant, so the
// trust region's ratios of decreases are unchanged and its test of
// relative progress sees d² itself. x, y have lengths 2m, 2n.
func complexCost(x, y, mat []float64) float64 {
	m, n := len(x)/2, len(y)/2
	N := 2 * n
	var f float64
	for i := 0; i < m; i++ {
		for j := 0; j < n; j++ {
			rr := x[i]*y[j] - mat[i*N+j]
			ri := x[i]*y[n+j] - mat[i*N+n+j]
			ir := x[m+i]*y[j] - mat[(m+i)*N+j]
			ii := x[m+i]*y[n+j] - mat[(m+i)*N+n+j]
			a, b := rr-ii, ri+ir
			f += a*a + b*b
		}
	}
	return f / 2
}

// euclidHessian writes ∇²h[(dx, dy)] at p into hd; u is scratch of length
// mn. With U = P_W(dx yᵀ + x dyᵀ): ∇²_x h = 2(M dy + U y) and
// ∇²_y h = 2(Mᵀdx + Uᵀx).
func euclidHessian(o *oracle, p *trPoint, d, hd pair, u []float64) {
	x, y, dx, dy, hx, hy := p.pt.x, p.pt.y, d.x, d.y, hd.x, hd.y
	m, n := len(x), len(y)
	for i := 0; i < m; i++ {
		for j := 0; j < n; j++ {
			u[i*n+j] = dx[i]*y[j] + x[i]*dy[j]
		}
	}
	o.Project(u, u)
	// ∇²_x h = 2(M dy + U y), ∇²_y h = 2(Mᵀdx + Uᵀx)
	for i := 0; i < m; i++ {
		var s float64
		for j := 0; j < n; j++ {
			s += p.mat[i*n+j]*dy[j] + u[i*n+j]*y[j]
		}
		hx[i] = 2 * s
	}
	for j := 0; j < n; j++ {
		hy[j] = 0
	}
	for i := 0; i < m; i++ {
		a, b := dx[i], x[i]
		row, urow := p.mat[i*n:(i+1)*n], u[i*n:(i+1)*n]
		for j := 0; j < n; j++ {
			hy[j] += 2 * (row[j]*a + urow[j]*b)
		}
	}
}

// hess writes Hess f[d] at p into hd (f = −h, d tangent); u is scratch of
// length mn. xᵀ∇_x h = yᵀ∇_y h = 2h because h is quadratic in each factor.
func hess(o *oracle, p *trPoint, d, hd pair, u []float64) {
	euclidHessian(o, p, d, hd, u)
	negHessian(hd, p.pt, d, 2*p.h)
	p.horizontal(hd)
}

// tcg is the truncated conjugate-gradient method of Steihaug and Toint
// with its workspace: at a point p it approximately minimises the model
// m(η) = ⟨g, η⟩ + ½⟨η, Hess f η⟩ over tangent η with ‖η‖ ≤ Δ, where g is the
// Riemannian gradient. It starts from η = 0 and stops on negative
// curvature or at the boundary (stepping to ‖η‖ = Δ), when the residual
// has fallen to ‖r₀‖·min(‖r₀‖, 0.1) (superlinear local convergence), after
// maxInner steps, or when ctx is done.
type tcg struct {
	maxInner  int
	eta, heta pair      // the step η and Hess f[η]
	r         pair      // residual r = g + Hess f[η]
	d, hd     pair      // CG direction d and Hess f[d]
	u         []float64 // scratch of the Hessian, length mn
}

func newTCG(m, n, maxInner int) tcg {
	return tcg{maxInner: maxInner, eta: newPair(m, n), heta: newPair(m, n), r: newPair(m, n),
		d: newPair(m, n), hd: newPair(m, n), u: make([]float64, m*n)}
}

// solve leaves the step η in c.eta and Hess f[η] in c.heta.
func (c *tcg) solve(ctx context.Context, o *oracle, p *trPoint, delta float64) {
	// Truncated CG on the model ⟨g, η⟩ + ½⟨η, Hess η⟩, ‖η‖ ≤ Δ.
	c.eta.zero()
	c.heta.zero()
	c.r.set(p.grad)
	negate(c.d, c.r)
	rr := pairDot(c.r, c.r)
	r0 := math.Sqrt(rr)
	for j := 0; j < c.maxInner; j++ {
		if ctx.Err() != nil {
			break
		}
		hess(o, p, c.d, c.hd, c.u)
		kappa := pairDot(c.d, c.hd)
		ee := pairDot(c.eta, c.eta)
		ed := pairDot(c.eta, c.d)
		ddn := pairDot(c.d, c.d)
		alpha := rr / kappa
		if kappa <= 0 || ee+2*alpha*ed+alpha*alpha*ddn >= delta*delta {
			tau := boundaryStep(ee, ed, ddn, delta)
			c.eta.addScaled(tau, c.d)
			c.heta.addScaled(tau, c.hd)
			break
		}
		c.eta.addScaled(alpha, c.d)
		c.heta.addScaled(alpha, c.hd)
		c.r.addScaled(alpha, c.hd)
		projectTangent(c.r, p.pt)
		p.horizontal(c.r)
		rrNew := pairDot(c.r, c.r)
		// The residual target r0·min(r0, 0.1) gives superlinear
		// convergence; it is floored at 1e-6·r0 (still a fast linear rate),
		// since below a gradient of about 1e-6 the target r0² falls under
		// the rounding of the Hessian products, and CG then wanders along
		// directions of rounding-level curvature (seen on complex
		// subspaces: a step of 0.17 at a gradient of 8e-11, rejected).
		if math.Sqrt(rrNew) <= r0*math.Max(math.Min(r0, 0.1), 1e-3) {
			break
		}
		beta := rrNew / rr
		rr = rrNew
		// d ← −r + βd
		for i := range c.d.x {
			c.d.x[i] = -c.r.x[i] + beta*c.d.x[i]
		}
		for i := range c.d.y {
			c.d.y[i] = -c.r.y[i] + beta*c.d.y[i]
		}
	}
}

// boundaryStep returns the τ > 0 with ‖η + τd‖ = Δ, given ee = ‖η‖² < Δ²,
// ed = ⟨η, d⟩ and ddn = ‖d‖²: the positive root of
// ddn·τ² + 2ed·τ + ee − Δ² = 0.
func boundaryStep(ee, ed, ddn, delta float64) float64 {
	// Step to the boundary along d: ‖η + τd‖ = Δ, τ > 0.
	return (-ed + math.Sqrt(ed*ed+ddn*(delta*delta-ee))) / ddn
}

// negate sets dst = −a.
func negate(dst, a pair) {
	for i := range dst.x {
		dst.x[i] = -a.x[i]
	}
	for j := range dst.y {
		dst.y[j] = -a.y[j]
	}
}

// trDeltaMax is the largest trust-region radius; runs start at trDeltaMax/8.
const trDeltaMax = 2.0

// trRun is the state of one Refine run: the current and candidate points,
// the inner solver, the trust-region radius Δ and the count of consecutive
// iterations without progress.
type trRun struct {
	o          *oracle
	cur, cand  *trPoint
	cg         tcg
	delta      float64
	noProgress int
}

// newTRRun starts a run at (x, y), evaluated.
func newTRRun(w *subspace.Subspace, x, y []float64, maxInner int) *trRun {
	m, n := len(x), len(y)
	r := &trRun{o: &oracle{w: w}, cur: newTRPoint(m, n), cand: newTRPoint(m, n),
		cg: newTCG(m, n, maxInner), delta: trDeltaMax / 8}
	complexField := w.Field() == subspace.Complex && m%2 == 0 && n%2 == 0
	r.cur.phase, r.cand.phase = complexField, complexField
	copy(r.cur.pt.x, x)
	copy(r.cur.pt.y, y)
	r.cur.eval(r.o)
	return r
}

// step tests the inner solver's step η: it evaluates the candidate R(η),
// compares the actual decrease of f with the model's in the ratio ρ,
// updates Δ (quartered when ρ < 1/4, doubled up to trDeltaMax when
// ρ > 3/4 and the step reached the boundary) and accepts the candidate
// when ρ > 0.1 and f did not increase. It reports false when no more
// progress is possible: Δ < 1e-15, or ten iterations in a row without a
// relative decrease of f by 1e-12.
func (r *trRun) step() bool {
	eta, heta := r.cg.eta, r.cg.heta
	// Model decrease and the candidate R(η).
	dec := -(pairDot(r.cur.grad, eta) + 0.5*pairDot(eta, heta))
	retract(r.cand.pt, r.cur.pt, eta)
	r.cand.eval(r.o)
	step := math.Sqrt(pairDot(eta, eta))
	rho := (r.cur.f - r.cand.f) / dec
	if !(dec > 0) {
		rho = -1
	}
	switch {
	case rho < 0.25:
		r.delta /= 4
	case rho > 0.75 && step >= 0.99*r.delta:
		r.delta = math.Min(2*r.delta, trDeltaMax)
	}
	if rho > 0.1 && r.cand.f <= r.cur.f {
		if r.cand.f < r.cur.f*(1-1e-12) {
			r.noProgress = 0
		} else {
			r.noProgress++
		}
		r.cur, r.cand = r.cand, r.cur
	} else {
		r.noProgress++
	}
	return !(r.delta < 1e-15 || r.noProgress >= 10)
}

func (t *TrustRegion) check() error {
	return CheckSettings("TrustRegion", []Setting{{"MaxIter", float64(t.MaxIter)}, {"MaxInner", float64(t.MaxInner)}, {"GradTol", float64(t.GradTol)}}...)
}

// horizontal removes from the tangent vector v its component along the
// phase direction ω = (Jx, −Jy)/√2 of a complex subspace's realified
// coordinates, J(re, im) = (−im, re) (the derivative of (e^{iθ}x, e^{−iθ}y)
// at θ = 0; ‖Jx‖ = ‖x‖ = 1). h is constant along the phase orbit, so its
// gradient is orthogonal to ω and its Hessian has ω in its kernel: without
// the projection the truncated CG meets zero curvature there and stops at
// the trust-region boundary. For a real subspace it does nothing.
func (p *trPoint) horizontal(v pair) {
	if !p.phase {
		return
	}
	x, y := p.pt.x, p.pt.y
	m, n := len(x)/2, len(y)/2
	// v ← v − (v·ω̃)ω̃/‖ω̃‖² for the unnormalised ω̃ = (Jx, −Jy), ‖ω̃‖² = 2.
	var c float64
	for i := 0; i < m; i++ {
		c += v.x[i]*(-x[m+i]) + v.x[m+i]*x[i]
	}
	for j := 0; j < n; j++ {
		c -= v.y[j]*(-y[n+j]) + v.y[n+j]*y[j]
	}
	c /= 2
	for i := 0; i < m; i++ {
		v.x[i] -= c * (-x[m+i])
		v.x[m+i] -= c * x[i]
	}
	for j := 0; j < n; j++ {
		v.y[j] += c * (-y[n+j])
		v.y[n+j] += c * y[j]
	}
}
