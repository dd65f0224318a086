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

// trPoint is a point with its gradient data.
type trPoint struct {
	x, y   []float64
	gx, gy []float64 // Riemannian gradient of f = −h, tangent
	mat    []float64 // M = P_W(x yᵀ)
	h, f   float64   // h and f = d² (residual form)
}

func (t *TrustRegion) eval(o *oracle, p *trPoint) {
	m, n := len(p.x), len(p.y)
	ex, ey := make([]float64, m), make([]float64, n)
	p.h = o.Gradient(ex, ey, p.x, p.y, p.mat)
	var f float64
	for i := 0; i < m; i++ {
		for j := 0; j < n; j++ {
			r := p.x[i]*p.y[j] - p.mat[i*n+j]
			f += r * r
		}
	}
	p.f = f
	// grad f = −P(∇h)
	cx, cy := dotv(ex, p.x), dotv(ey, p.y)
	for i := range ex {
		p.gx[i] = -(ex[i] - cx*p.x[i])
	}
	for j := range ey {
		p.gy[j] = -(ey[j] - cy*p.y[j])
	}
}

func newTRPoint(m, n int) *trPoint {
	return &trPoint{x: make([]float64, m), y: make([]float64, n), gx: make([]float64, m),
		gy: make([]float64, n), mat: make([]float64, m*n)}
}

// hess writes Hess f[(dx, dy)] at p into (hx, hy); u is scratch of length mn.
func hess(o *oracle, p *trPoint, dx, dy, hx, hy, u []float64) {
	m, n := len(p.x), len(p.y)
	for i := 0; i < m; i++ {
		for j := 0; j < n; j++ {
			u[i*n+j] = dx[i]*p.y[j] + p.x[i]*dy[j]
		}
	}
	o.Project(u, u)
	// ∇²_x h = 2(M dy + U y), ∇²_y h = 2(Mᵀdx + Uᵀx)
	for i := 0; i < m; i++ {
		var s float64
		for j := 0; j < n; j++ {
			s += p.mat[i*n+j]*dy[j] + u[i*n+j]*p.y[j]
		}
		hx[i] = 2 * s
	}
	for j := 0; j < n; j++ {
		hy[j] = 0
	}
	for i := 0; i < m; i++ {
		a, b := dx[i], p.x[i]
		row, urow := p.mat[i*n:(i+1)*n], u[i*n:(i+1)*n]
		for j := 0; j < n; j++ {
			hy[j] += 2 * (row[j]*a + urow[j]*b)
		}
	}
	cx, cy := dotv(hx, p.x), dotv(hy, p.y)
	for i := range hx {
		hx[i] = -(hx[i] - cx*p.x[i]) + 2*p.h*dx[i]
	}
	for j := range hy {
		hy[j] = -(hy[j] - cy*p.y[j]) + 2*p.h*dy[j]
	}
}

func project(v, x []float64) {
	c := dotv(v, x)
	axpy(-c, x, v)
}

// Refine implements Local.
func (t *TrustRegion) Refine(ctx context.Context, w *subspace.Subspace, x, y []float64) (Stats, error) {
	if err := t.check(); err != nil {
		return Stats{}, err
	}
	o := &oracle{w: w}
	m, n := len(x), len(y)
	maxIter := orDefault(t.MaxIter, 200)
	maxInner := orDefault(t.MaxInner, min(m+n, 50))
	tol := orDefaultF(t.GradTol, 1e-12)
	gate := NewThrottle(t.Progress)
	const deltaMax = 2.0
	delta := deltaMax / 8

	cur, cand := newTRPoint(m, n), newTRPoint(m, n)
	copy(cur.x, x)
	copy(cur.y, y)
	t.eval(o, cur)
	st := Stats{Status: LimitReached}
	ex, ey := make([]float64, m), make([]float64, n) // step η
	rx, ry := make([]float64, m), make([]float64, n) // residual r = g + Hη
	dx, dy := make([]float64, m), make([]float64, n) // CG direction
	hdx, hdy := make([]float64, m), make([]float64, n)
	hex, hey := make([]float64, m), make([]float64, n) // Hη
	u := make([]float64, m*n)
	noProgress := 0
	defer func() {
		copy(x, cur.x)
		copy(y, cur.y)
	}()
	for it := 0; it < maxIter; it++ {
		gn := math.Sqrt(dotv(cur.gx, cur.gx) + dotv(cur.gy, cur.gy))
		st.Gradient = gn
		st.Value = cur.h
		gate.Report(Progress{Searcher: t.Name(), Iteration: it, Value: cur.h, Upper: 1})
		if gn <= tol {
			st.Status = Converged
			break
		}
		if err := ctx.Err(); err != nil {
			st.Status = Cancelled
			st.Evaluations = o.evals
			return st, err
		}
		st.Iterations = it + 1
		// Truncated CG on the model ⟨g, η⟩ + ½⟨η, Hess η⟩, ‖η‖ ≤ Δ.
		clear(ex)
		clear(ey)
		clear(hex)
		clear(hey)
		copy(rx, cur.gx)
		copy(ry, cur.gy)
		for i := range dx {
			dx[i] = -rx[i]
		}
		for j := range dy {
			dy[j] = -ry[j]
		}
		rr := dotv(rx, rx) + dotv(ry, ry)
		r0 := math.Sqrt(rr)
		for j := 0; j < maxInner; j++ {
			if ctx.Err() != nil {
				break
			}
			hess(o, cur, dx, dy, hdx, hdy, u)
			kappa := dotv(dx, hdx) + dotv(dy, hdy)
			ee := dotv(ex, ex) + dotv(ey, ey)
			ed := dotv(ex, dx) + dotv(ey, dy)
			ddn := dotv(dx, dx) + dotv(dy, dy)
			alpha := rr / kappa
			if kappa <= 0 || ee+2*alpha*ed+alpha*alpha*ddn >= delta*delta {
				// Step to the boundary along d: ‖η + τd‖ = Δ, τ > 0.
				tau := (-ed + math.Sqrt(ed*ed+ddn*(delta*delta-ee))) / ddn
				axpy(tau, dx, ex)
				axpy(tau, dy, ey)
				axpy(tau, hdx, hex)
				axpy(tau, hdy, hey)
				break
			}
			axpy(alpha, dx, ex)
			axpy(alpha, dy, ey)
			axpy(alpha, hdx, hex)
			axpy(alpha, hdy, hey)
			axpy(alpha, hdx, rx)
			axpy(alpha, hdy, ry)
			project(rx, cur.x)
			project(ry, cur.y)
			rrNew := dotv(rx, rx) + dotv(ry, ry)
			if math.Sqrt(rrNew) <= r0*math.Min(r0, 0.1) {
				break
			}
			beta := rrNew / rr
			rr = rrNew
			for i := range dx {
				dx[i] = -rx[i] + beta*dx[i]
			}
			for i := range dy {
				dy[i] = -ry[i] + beta*dy[i]
			}
		}
		// Model decrease and the candidate R(η).
		dec := -(dotv(cur.gx, ex) + dotv(cur.gy, ey) + 0.5*(dotv(ex, hex)+dotv(ey, hey)))
		for i := range ex {
			cand.x[i] = cur.x[i] + ex[i]
		}
		for j := range ey {
			cand.y[j] = cur.y[j] + ey[j]
		}
		scale(cand.x, 1/norm(cand.x))
		scale(cand.y, 1/norm(cand.y))
		t.eval(o, cand)
		step := math.Sqrt(dotv(ex, ex) + dotv(ey, ey))
		rho := (cur.f - cand.f) / dec
		if !(dec > 0) {
			rho = -1
		}
		switch {
		case rho < 0.25:
			delta /= 4
		case rho > 0.75 && step >= 0.99*delta:
			delta = math.Min(2*delta, deltaMax)
		}
		if rho > 0.1 && cand.f <= cur.f {
			if cand.f < cur.f*(1-1e-12) {
				noProgress = 0
			} else {
				noProgress++
			}
			cur, cand = cand, cur
		} else {
			noProgress++
		}
		if delta < 1e-15 || noProgress >= 10 {
			// No more progress is possible in floating point.
			st.Status = floorStatus(gn)
			break
		}
	}
	st.Value = cur.h
	st.Evaluations = o.evals
	return st, nil
}

func (t *TrustRegion) check() error {
	return CheckSettings("TrustRegion", []Setting{{"MaxIter", float64(t.MaxIter)}, {"MaxInner", float64(t.MaxInner)}, {"GradTol", float64(t.GradTol)}}...)
}
