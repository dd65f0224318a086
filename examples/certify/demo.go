package main

import (
	"math"

	"github.com/segre-lab/segre/subspace"
)

// The demo is an invented scenario, with invented numbers: a workshop tunes a
// 4×7 grid of heating elements (4 rows of a plate, 7 zones along it). The
// controller can only produce power patterns in the span of 9 "modes" it
// was built with. An engineer asks whether some pattern the controller can
// produce is (close to) separable — row profile times zone profile — since
// separable patterns are the ones the plate's calibration routine accepts.
// The answer is the certified distance from the mode span to the rank-one
// matrices.
const demoTitle = "9 heating-mode patterns on a 4×7 plate grid (invented scenario)"

func demoBasis() subspace.Basis {
	const r, m, n = 9, 4, 7
	d := make([]float64, 0, r*m*n)
	for t := 0; t < r; t++ {
		ft := float64(t + 1)
		for i := 0; i < m; i++ {
			for j := 0; j < n; j++ {
				fi, fj := float64(i), float64(j)
				v := math.Sin(0.9*ft*fi+0.4*fj*fj/ft) + 0.3*math.Cos(ft*(fi-fj)) - 0.05*ft*(fi-2)*(fj-3)/float64(r)
				d = append(d, v)
			}
		}
	}
	return subspace.Basis{Count: r, Rows: m, Cols: n, Data: d}
}
