package subspace_test

import (
	"context"
	"fmt"

	"github.com/segre-lab/segre/subspace"
)

// Building a subspace: two of the three matrices span the same line, so
// the numerical dimension is 2 (the rank decision), and the stored basis
// is W itself (2 ≤ mn/2). The certified residual of x yᵀ with x = y = e₁,
// which lies in W, is at rounding level.
func ExampleNew() {
	b := subspace.Basis{Count: 3, Rows: 2, Cols: 2, Data: []float64{
		1, 0, 0, 0,
		2, 0, 0, 0,
		0, 1, 1, 0,
	}}
	w, err := subspace.New(context.Background(), b, subspace.Options{})
	if err != nil {
		panic(err)
	}
	fmt.Println("dimension", w.Dim(), "stores the complement:", w.StoresComplement())
	fmt.Println("residual of e1 e1ᵀ below 1e-15:", w.ResidualBound([]float64{1, 0}, []float64{1, 0}) < 1e-15)
	// Output:
	// dimension 2 stores the complement: false
	// residual of e1 e1ᵀ below 1e-15: true
}
