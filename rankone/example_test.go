package rankone_test

import (
	"context"
	"fmt"
	"time"

	"github.com/segre-lab/segre/rankone"
	"github.com/segre-lab/segre/subspace"
)

// The antisymmetric 3×3 matrices: the nearest rank-one matrix is at
// distance √½ (x ⊥ y), and the flattening bound happens not to prove it.
func Example() {
	b := subspace.Basis{Count: 3, Rows: 3, Cols: 3, Data: []float64{
		0, 1, 0, -1, 0, 0, 0, 0, 0,
		0, 0, 1, 0, 0, 0, -1, 0, 0,
		0, 0, 0, 0, 0, 1, 0, -1, 0,
	}}
	w, err := subspace.New(context.Background(), b, subspace.Options{})
	if err != nil {
		fmt.Println(err)
		return
	}
	p := &rankone.Portfolio{Budget: 2 * time.Second}
	res, err := p.Search(context.Background(), w)
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("dimension %d\n", w.Dim())
	fmt.Printf("d* ≤ %.6f (certified by the witness)\n", res.Upper)
	fmt.Printf("d* ≥ %.6f\n", res.Lower)
	// Output:
	// dimension 3
	// d* ≤ 0.707107 (certified by the witness)
	// d* ≥ 0.000000
}

// A planted rank-one point is recovered to rounding level, and Verify
// certifies any candidate the caller brings.
func ExampleVerify() {
	x, y := []float64{1, 2}, []float64{3, -1, 1}
	b := subspace.Basis{Count: 2, Rows: 2, Cols: 3, Data: []float64{
		3, -1, 1, 6, -2, 2, // x yᵀ
		1, 0, 0, 0, 0, 1,
	}}
	w, _ := subspace.New(context.Background(), b, subspace.Options{})
	u, _ := rankone.Verify(w, x, y)
	fmt.Println(u < 1e-14)
	// Output: true
}
