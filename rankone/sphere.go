package rankone

// The geometry of the sphere pair S^{m−1} × S^{n−1} ⊂ R^m × R^n with the
// metric of the ambient space, as the trust-region method uses it. It knows
// nothing of the subspace: the cost and its Euclidean derivatives come from
// the oracle (trust.go), and the solver composes the two.
//
// At a point x of a unit sphere the tangent space is {ξ : xᵀξ = 0}, the
// orthogonal projection onto it is P_x ξ = ξ − (xᵀξ)x, and the retraction is
// R_x(ξ) = (x + ξ)/‖x + ξ‖. On the product every operation acts factor by
// factor and the inner product is the sum of the two factors' ones.

// pair is a point of the sphere pair, or a vector tangent to it, or an
// ambient vector: its two factors, of lengths m and n.
type pair struct{ x, y []float64 }

func newPair(m, n int) pair { return pair{x: make([]float64, m), y: make([]float64, n)} }

// pairDot returns the product inner product ⟨a, b⟩ = aₓᵀbₓ + a_yᵀb_y.
func pairDot(a, b pair) float64 { return dotv(a.x, b.x) + dotv(a.y, b.y) }

// zero sets a = 0.
func (a pair) zero() {
	clear(a.x)
	clear(a.y)
}

// set copies b into a.
func (a pair) set(b pair) {
	copy(a.x, b.x)
	copy(a.y, b.y)
}

// addScaled sets a ← a + s·d.
func (a pair) addScaled(s float64, d pair) {
	axpy(s, d.x, a.x)
	axpy(s, d.y, a.y)
}

// project sets v ← P_x v = v − (vᵀx)x for a unit vector x.
func project(v, x []float64) {
	c := dotv(v, x)
	axpy(-c, x, v)
}

// projectTangent sets v ← P_p v, the projection onto the tangent space of
// the sphere pair at p, factor by factor.
func projectTangent(v, p pair) {
	project(v.x, p.x)
	project(v.y, p.y)
}

// retract sets dst = R_p(ξ) = ((pₓ + ξₓ)/‖pₓ + ξₓ‖, (p_y + ξ_y)/‖p_y + ξ_y‖),
// the retraction by normalisation. dst must not alias p or ξ.
func retract(dst, p, xi pair) {
	for i := range xi.x {
		dst.x[i] = p.x[i] + xi.x[i]
	}
	for j := range xi.y {
		dst.y[j] = p.y[j] + xi.y[j]
	}
	scale(dst.x, 1/norm(dst.x))
	scale(dst.y, 1/norm(dst.y))
}

// negGradient sets g to the Riemannian gradient at p of f = −h, given the
// Euclidean gradient e = ∇h: on a Riemannian submanifold the gradient is the
// tangent projection of the ambient one, so grad f = −P_p(e).
func negGradient(g, p, e pair) {
	cx, cy := dotv(e.x, p.x), dotv(e.y, p.y)
	for i := range e.x {
		g.x[i] = -(e.x[i] - cx*p.x[i])
	}
	for j := range e.y {
		g.y[j] = -(e.y[j] - cy*p.y[j])
	}
}

// negHessian turns hv = ∇²h[ξ], the Euclidean Hessian of h at p applied to
// the tangent vector ξ, into Hess f(p)[ξ] for f = −h, in place. On the unit
// sphere Hess f(x)[ξ] = P_x(∇²f ξ) − (xᵀ∇f)ξ (the projected ambient Hessian
// plus the Weingarten term; Absil, Mahony, Sepulchre 2008, §5.5), so with
// f = −h, factor by factor, Hess f[ξ] = −P_x(∇²h ξ) + (xᵀ∇h)ξ. The caller
// passes w = xᵀ∇_x h = yᵀ∇_y h, the same for both factors (2h for an h
// homogeneous of degree two in each factor).
func negHessian(hv, p, xi pair, w float64) {
	cx, cy := dotv(hv.x, p.x), dotv(hv.y, p.y)
	for i := range hv.x {
		hv.x[i] = -(hv.x[i] - cx*p.x[i]) + w*xi.x[i]
	}
	for j := range hv.y {
		hv.y[j] = -(hv.y[j] - cy*p.y[j]) + w*xi.y[j]
	}
}
