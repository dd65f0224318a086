// Command unmix recovers the components of an invented three-way
// measurement: a tasting panel rates K = 12 blends of three invented
// "base syrups", each blend scored on I = 9 flavour notes by J = 7 tasters.
// Each base contributes (note profile) ⊗ (taster sensitivity) ⊗ (amount in
// each blend), so the ratings array is a sum of three rank-one terms plus a
// little rating noise. Everything here is invented demo data.
//
//	go run ./examples/unmix [-noise 1e-3] [-seed 1]
//
// It prints the recovered components beside the true ones (cosine
// similarity after matching), the fit error, the certified distance of
// each recovered note×taster pattern to the span of the blend slices, and
// whether Kruskal's uniqueness condition holds.
package main

import (
	"context"
	"flag"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
	"os"

	"gonum.org/v1/gonum/mat"

	"github.com/segre-lab/segre/rankone/cpd"
)

func main() {
	os.Exit(run(os.Args[1:], os.Stdout, os.Stderr))
}

func run(args []string, out, errw io.Writer) int {
	fs := flag.NewFlagSet("unmix", flag.ContinueOnError)
	fs.SetOutput(io.Discard)
	noise := fs.Float64("noise", 1e-3, "relative rating noise")
	seed := fs.Uint64("seed", 1, "seed of the invented data")
	if err := fs.Parse(args); err != nil {
		fmt.Fprintf(errw, "unmix: %v\n", err)
		return 2
	}
	if !(*noise >= 0 && *noise < 1) {
		fmt.Fprintf(errw, "unmix: -noise must be in [0, 1), got %v\n", *noise)
		return 2
	}
	const notes, tasters, blends, bases = 9, 7, 12, 3
	rng := rand.New(rand.NewPCG(*seed, 7))
	a := mat.NewDense(notes, bases, nil)   // note profiles: bumps
	b := mat.NewDense(tasters, bases, nil) // taster sensitivities
	c := mat.NewDense(blends, bases, nil)  // amounts
	for s := 0; s < bases; s++ {
		centre := 1.5 + 3*float64(s)
		for i := 0; i < notes; i++ {
			a.Set(i, s, math.Exp(-(float64(i)-centre)*(float64(i)-centre)/3))
		}
		for j := 0; j < tasters; j++ {
			b.Set(j, s, 0.5+rng.Float64())
		}
		for k := 0; k < blends; k++ {
			c.Set(k, s, rng.Float64())
		}
	}
	t := cpd.Compose(a, b, c)
	var rms float64
	for _, v := range t.Data {
		rms += v * v
	}
	rms = math.Sqrt(rms / float64(len(t.Data)))
	for i := range t.Data {
		t.Data[i] += *noise * rms * rng.NormFloat64()
	}
	opt := cpd.Options{Seed: *seed}
	if *noise > 0 {
		opt.Rank = bases
	}
	d, err := cpd.Decompose(context.Background(), t, opt)
	if err != nil {
		fmt.Fprintf(errw, "unmix: %v\n", err)
		return 1
	}
	fmt.Fprintf(out, "ratings array %d notes × %d tasters × %d blends, noise %.1g, rank %d\n", notes, tasters, blends, *noise, bases)
	fmt.Fprintf(out, "relative fit error %.3g after %d refinement iterations; Kruskal uniqueness: %v\n\n", d.RelError, d.Iterations, d.Unique)
	fmt.Fprintf(out, "%-6s %-10s %12s %12s %12s %16s\n", "base", "recovered", "cos(notes)", "cos(taster)", "cos(amount)", "certified dist")
	for s := 0; s < bases; s++ {
		best, bi := -1.0, 0
		for u := 0; u < bases; u++ {
			if v := cosine(a.ColView(s), d.A.ColView(u)); v > best {
				best, bi = v, u
			}
		}
		fmt.Fprintf(out, "%-6d %-10d %12.6f %12.6f %12.6f %16.3g\n", s, bi, best,
			cosine(b.ColView(s), d.B.ColView(bi)), cosine(c.ColView(s), d.C.ColView(bi)), d.Distances[bi])
	}
	return 0
}

func cosine(x, y mat.Vector) float64 {
	return math.Abs(mat.Dot(x, y)) / (mat.Norm(x, 2) * mat.Norm(y, 2))
}
