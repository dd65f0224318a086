package sos_test

import (
	"context"
	"fmt"

	"github.com/segre-lab/segre/rankone"
	"github.com/segre-lab/segre/sos"
	"github.com/segre-lab/segre/subspace"
)

// The level-one relaxation is exact on the antisymmetric 3×3 matrices:
// its verified certificate proves d* ≥ 1/√2 = 0.70710678, which the
// rounded moment matrix attains (d* = 1/√2, derived in rankone/suite).
func ExampleBound() {
	b := subspace.Basis{Count: 3, Rows: 3, Cols: 3, Data: []float64{
		0, 1, 0, -1, 0, 0, 0, 0, 0,
		0, 0, 1, 0, 0, 0, -1, 0, 0,
		0, 0, 0, 0, 0, 1, 0, -1, 0,
	}}
	w, err := subspace.New(context.Background(), b, subspace.Options{})
	if err != nil {
		panic(err)
	}
	res, err := (&sos.Bound{}).Search(context.Background(), w)
	if err != nil {
		panic(err)
	}
	fmt.Printf("d* in [%s, %s]\n", rankone.FormatLower(res.Lower, 6), rankone.FormatUpper(res.Upper, 6))
	// Output:
	// d* in [0.707106, 0.707107]
}
