package rankone

import (
	"context"
	"math"

	"github.com/segre-lab/segre/subspace"
)

// Power is the alternating power step, the higher-order power method of
// De Lathauwer, De Moor, Vandewalle (SIAM J. Matrix Anal. Appl. 21, 2000)
// for the basis tensor: x ← G(y)x/‖G(y)x‖, then y ← H(x)y/‖H(x)y‖.
// Since G(y)x = Σ_t c_t Q_t y with c_t = xᵀQ_t y, the step is also one power
// iteration on the matrix P_W(x yᵀ), i.e. an alternating projection between
// W and the rank-one matrices. G(y) is positive semidefinite, so each step
// does not decrease the Rayleigh quotient xᵀG(y)x (h is monotone). Each step
// costs one pass over the basis and no eigen-solve; convergence is linear.
//
// The zero value is ready to use.
type Power struct {
	// MaxIter bounds the iterations (one x and one y step each); zero means 5000.
	MaxIter int
	// GradTol stops the method when the Riemannian gradient norm of h falls to
	// GradTol; zero means 1e-12.
	GradTol float64
	// Progress, if set, is called at most every 200 ms.
	Progress func(Progress)
}

var _ Searcher = (*Power)(nil)
var _ Local = (*Power)(nil)

// Name returns "power".
func (p *Power) Name() string { return "power" }

// Search runs the method once from the spectral start.
func (p *Power) Search(ctx context.Context, w *subspace.Subspace) (Result, error) {
	return searchLocal(ctx, w, p)
}

// Refine implements Local.
func (p *Power) Refine(ctx context.Context, w *subspace.Subspace, x, y []float64) (Stats, error) {
	if err := p.check(); err != nil {
		return Stats{}, err
	}
	o := &oracle{w: w}
	maxIter := orDefault(p.MaxIter, 5000)
	tol := orDefaultF(p.GradTol, 1e-12)
	gate := NewThrottle(p.Progress)
	gx, gy := make([]float64, len(x)), make([]float64, len(y))
	st := Stats{Status: LimitReached}
	sl := stall{patience: 50}
	var h float64
	for it := 0; it < maxIter; it++ {
		if err := ctx.Err(); err != nil {
			return st.cancelled(o, x, y, err)
		}
		st.Iterations = it + 1
		o.ApplyG(gx, y, x)
		ggx := 2 * tangentNorm(gx, x)
		nx := norm(gx)
		if nx == 0 {
			st.Status = Converged // G(y)x = 0: h(x, y) = 0 and x is stationary
			break
		}
		copy(x, gx)
		scale(x, 1/nx)
		o.ApplyH(gy, x, y)
		h = dotv(gy, y)
		ggy := 2 * tangentNorm(gy, y)
		ny := norm(gy)
		if ny == 0 {
			st.Status = Converged
			break
		}
		copy(y, gy)
		scale(y, 1/ny)
		gate.Report(Progress{Searcher: p.Name(), Iteration: it + 1, Value: h, Upper: 1})
		if st.settle(math.Hypot(ggx, ggy), tol, &sl) {
			break
		}
	}
	st.Value = h
	st.Evaluations = o.evals
	return st, nil
}

func (p *Power) check() error {
	return CheckSettings("Power", []Setting{{"MaxIter", float64(p.MaxIter)}, {"GradTol", float64(p.GradTol)}}...)
}
