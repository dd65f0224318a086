package cpd_test

import (
	"context"
	"fmt"

	"github.com/segre-lab/segre/rankone/cpd"
)

// A 2×2×2 tensor with two terms, e1⊗e1⊗(1, 1) + e2⊗e2⊗(1, −1) (invented
// data): the decomposition recovers two terms and fits exactly (to
// rounding), and Kruskal's condition (k-ranks 2 + 2 + 2 ≥ 2·2 + 2) proves
// them unique.
func ExampleDecompose() {
	// Data[(i·N + j)·P + k] = T[i][j][k].
	t := cpd.Tensor{M: 2, N: 2, P: 2, Data: []float64{
		1, 1, // T[0][0][·]
		0, 0, // T[0][1][·]
		0, 0, // T[1][0][·]
		1, -1, // T[1][1][·]
	}}
	d, err := cpd.Decompose(context.Background(), t, cpd.Options{})
	if err != nil {
		panic(err)
	}
	_, r := d.A.Dims()
	fmt.Println("terms:", r, "fit error below 1e-12:", d.RelError < 1e-12, "unique:", d.Unique)
	// Output:
	// terms: 2 fit error below 1e-12: true unique: true
}

// A 2×2×2 complex array with two terms, e1⊗e1⊗(1, i) + e2⊗e2⊗(1, −i)
// (invented data): the complex decomposition recovers two terms and fits
// exactly (to rounding); Kruskal's condition holds.
func ExampleDecomposeComplex() {
	t := cpd.ComplexTensor{M: 2, N: 2, P: 2, Data: []complex128{
		1, 1i, // T[0][0][·]
		0, 0, // T[0][1][·]
		0, 0, // T[1][0][·]
		1, -1i, // T[1][1][·]
	}}
	d, err := cpd.DecomposeComplex(context.Background(), t, cpd.Options{})
	if err != nil {
		panic(err)
	}
	_, r := d.A.Dims()
	fmt.Println("terms:", r, "fit error below 1e-12:", d.RelError < 1e-12, "unique:", d.Unique)
	// Output:
	// terms: 2 fit error below 1e-12: true unique: true
}
