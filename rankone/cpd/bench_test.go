package cpd

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"testing"
)

// BenchmarkDecompose reports the time of Decompose and of the many-start ALS
// baseline (2 random starts, at most 300 iterations) on the same tensors,
// m = n = p = r ∈ {10, 50, 100}, noise σ ∈ {0, 1e-6, 1e-3} relative to the
// entries' RMS. "ok" is 1 when the fit error is within 2σ + 1e-9 and every
// true component is matched with cosine ≥ 1 − 1e-6 − 10σ (success), else 0.
func BenchmarkDecompose(b *testing.B) {
	for _, r := range []int{10, 50, 100} {
		for _, sigma := range []float64{0, 1e-6, 1e-3} {
			rng := rand.New(rand.NewPCG(uint64(r), 1))
			a, bb, c := randFactors(rng, r, r, r, r)
			t := Compose(a, bb, c)
			var rms float64
			for _, v := range t.Data {
				rms += v * v
			}
			rms = math.Sqrt(rms / float64(len(t.Data)))
			for i := range t.Data {
				t.Data[i] += sigma * rms * rng.NormFloat64()
			}
			opt := Options{Seed: 1}
			if sigma > 0 {
				opt.Rank = r
			}
			ok := func(d *Decomposition) float64 {
				tol := 1 - 1e-6 - 10*sigma
				if d == nil || d.RelError > 2*sigma+1e-9 || matched(a, d.A) < tol || matched(bb, d.B) < tol {
					return 0
				}
				return 1
			}
			name := fmt.Sprintf("r%d/noise%g", r, sigma)
			b.Run(name+"/segre", func(b *testing.B) {
				var d *Decomposition
				for b.Loop() {
					var err error
					d, err = Decompose(context.Background(), t, opt)
					if err != nil {
						b.Fatal(err)
					}
				}
				b.ReportMetric(ok(d), "ok")
				b.ReportMetric(d.RelError, "relerr")
			})
			b.Run(name+"/als", func(b *testing.B) {
				var d *Decomposition
				for b.Loop() {
					d, _ = FitALS(context.Background(), t, r, 2, 1, 300)
				}
				b.ReportMetric(ok(d), "ok")
				b.ReportMetric(d.RelError, "relerr")
			})
		}
	}
}
