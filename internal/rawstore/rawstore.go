// Package rawstore lets the module's own bound builders (rankone, net, sos)
// read a Subspace's stored vectors and an Operator's factor without copying
// them. Package subspace registers the accessors when it is initialised.
// The slices returned belong to the Subspace: they must never be modified.
// Users' bound builders read the same data, copied, through
// subspace.Stored; this package is internal so that only the module's own
// code, which keeps the rule, can take the shortcut.
package rawstore

var (
	vectors func(w any) []float64
	factor  func(op any) Factor
)

// Factor is an Operator's factored form: the s×p matrix Z (row t is
// Q_t y, or Q_tᵀ x), whether the stored vectors span W⊥, and the shift
// ‖y‖² (or ‖x‖²) used then.
type Factor struct {
	Z          []float64
	S, P       int
	Complement bool
	Shift      float64
}

// Register installs the accessors; package subspace calls it once.
func Register(v func(any) []float64, f func(any) Factor) {
	vectors, factor = v, f
}

// Vectors returns the stored vectors of w (a *subspace.Subspace), s rows
// of length m·n, without copying.
func Vectors(w any) []float64 { return vectors(w) }

// FactorOf returns the factor of op (a *subspace.Operator) without copying.
func FactorOf(op any) Factor { return factor(op) }
