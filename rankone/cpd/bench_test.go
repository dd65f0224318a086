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

// BenchmarkDecomposeComplex reports the time of DecomposeComplex on complex
// arrays with m = n = p = r ∈ {10, 50} and complex noise σ ∈ {0, 1e-6}
// relative to the entries' RMS; "ok" as in BenchmarkDecompose (complex
// cosines, up to a complex scalar).
func BenchmarkDecomposeComplex(b *testing.B) {
	for _, r := range []int{10, 50} {
		for _, sigma := range []float64{0, 1e-6} {
			rng := rand.New(rand.NewPCG(uint64(r), 2))
			a, bb, c := randComplexFactors(rng, r, r, r, r)
			t := ComposeComplex(a, bb, c)
			var rms float64
			for _, v := range t.Data {
				rms += real(v)*real(v) + imag(v)*imag(v)
			}
			rms = math.Sqrt(rms / float64(len(t.Data)))
			for i := range t.Data {
				t.Data[i] += complex(sigma*rms*rng.NormFloat64()/math.Sqrt2, sigma*rms*rng.NormFloat64()/math.Sqrt2)
			}
			opt := Options{Seed: 1}
			if sigma > 0 {
				opt.Rank = r
			}
			b.Run(fmt.Sprintf("r%d/noise%g", r, sigma), func(b *testing.B) {
				var d *ComplexDecomposition
				for b.Loop() {
					var err error
					d, err = DecomposeComplex(context.Background(), t, opt)
					if err != nil {
						b.Fatal(err)
					}
				}
				tol := 1 - 1e-6 - 10*sigma
				ok := 0.0
				if d.RelError <= 2*sigma+1e-9 && matchedComplex(a, d.A) >= tol && matchedComplex(bb, d.B) >= tol {
					ok = 1
				}
				b.ReportMetric(ok, "ok")
				b.ReportMetric(d.RelError, "relerr")
			})
		}
	}
}
