package net_test

import (
	"context"
	"fmt"

	"github.com/segre-lab/segre/net"
	"github.com/segre-lab/segre/rankone"
	"github.com/segre-lab/segre/subspace"
)

// Branch-and-bound proves the global optimum: for the single matrix
// diag(1, 1/2), d* = (1/2)/√(1 + 1/4) = 0.4472135955 (Eckart–Young: the
// tail of the singular values over the norm), printed outward at 6 digits.
func ExampleBranchBound() {
	b := subspace.Basis{Count: 1, Rows: 2, Cols: 2, Data: []float64{1, 0, 0, 0.5}}
	w, err := subspace.New(context.Background(), b, subspace.Options{})
	if err != nil {
		panic(err)
	}
	res, err := (&net.BranchBound{Gap: 1e-9}).Search(context.Background(), w)
	if err != nil {
		panic(err)
	}
	fmt.Printf("d* in [%s, %s], %s\n", rankone.FormatLower(res.Lower, 6), rankone.FormatUpper(res.Upper, 6), res.Status)
	// Output:
	// d* in [0.447213, 0.447214], gap reached
}
