package segre_test

import (
	"context"
	"fmt"

	"github.com/segre-lab/segre"
	"github.com/segre-lab/segre/rankone"
	"github.com/segre-lab/segre/subspace"
)

// The main job in one call: the antisymmetric 3×3 matrices contain no
// matrix of rank one, and their distance to the rank-one matrices is
// d* = 1/√2 (derived: ‖P_A(x yᵀ)‖² = (1 − (xᵀy)²)/2 is at most 1/2).
// The certified interval, printed outward at 6 digits, brackets it.
func ExampleCertifyBasis() {
	b := subspace.Basis{Count: 3, Rows: 3, Cols: 3, Data: []float64{
		0, 1, 0, -1, 0, 0, 0, 0, 0,
		0, 0, 1, 0, 0, 0, -1, 0, 0,
		0, 0, 0, 0, 0, 1, 0, -1, 0,
	}}
	_, rep, err := segre.CertifyBasis(context.Background(), b, segre.Options{})
	if err != nil {
		panic(err)
	}
	fmt.Printf("d* in [%s, %s]: %s\n", rankone.FormatLower(rep.Lower, 6), rankone.FormatUpper(rep.Upper, 6), rep.Stop)
	fmt.Println("input span proven:", rep.Input.Proven)
	// Output:
	// d* in [0.707106, 0.707107]: gap reached
	// input span proven: true
}
