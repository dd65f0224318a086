package subspace

import (
	"context"
	"fmt"
	"math/rand/v2"
	"runtime"
	"testing"
	"time"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
	"gonum.org/v1/gonum/mat"
)

var benchShapes = []struct{ k, m, n int }{{64, 64, 64}, {256, 32, 32}, {32, 256, 256}}

// BenchmarkContraction reports bytes of stored basis streamed per second
// (MB/s) for each contraction, beside a plain blas64.Gemv over the same
// s×mn array in the same benchmark. Each contraction streams the basis once,
// except Project (twice); SetBytes counts that.
func BenchmarkContraction(b *testing.B) {
	for _, sh := range benchShapes {
		rng := rand.New(rand.NewPCG(1, uint64(sh.k)))
		w, err := New(context.Background(), randBasis(rng, sh.k, sh.m, sh.n), Options{})
		if err != nil {
			b.Fatal(err)
		}
		if w.comp {
			b.Fatal("benchmark shapes must store W")
		}
		bytes := int64(w.s * sh.m * sh.n * 8)
		x, y := randUnit(rng, sh.m), randUnit(rng, sh.n)
		L := sh.m * sh.n
		v := make([]float64, L)
		kron(v, x, y)
		c := make([]float64, w.s)
		name := fmt.Sprintf("k%d_m%d_n%d", sh.k, sh.m, sh.n)
		b.Run(name+"/gemv", func(b *testing.B) {
			b.SetBytes(bytes)
			g := w.stored()
			for b.Loop() {
				blas64.Gemv(blas.NoTrans, 1, g, blas64.Vector{N: L, Data: v, Inc: 1}, 0, blas64.Vector{N: w.s, Data: c, Inc: 1})
			}
		})
		b.Run(name+"/value", func(b *testing.B) {
			b.SetBytes(bytes)
			for b.Loop() {
				w.Value(x, y)
			}
		})
		b.Run(name+"/G", func(b *testing.B) {
			b.SetBytes(bytes)
			var g mat.SymDense
			for b.Loop() {
				w.G(&g, y)
			}
		})
		b.Run(name+"/H", func(b *testing.B) {
			b.SetBytes(bytes)
			var h mat.SymDense
			for b.Loop() {
				w.H(&h, x)
			}
		})
		b.Run(name+"/Gop", func(b *testing.B) {
			b.SetBytes(bytes)
			for b.Loop() {
				w.GOperator(y)
			}
		})
		b.Run(name+"/Hop", func(b *testing.B) {
			b.SetBytes(bytes)
			for b.Loop() {
				w.HOperator(x)
			}
		})
		b.Run(name+"/applyG", func(b *testing.B) {
			b.SetBytes(bytes)
			dst := make([]float64, sh.m)
			for b.Loop() {
				w.ApplyG(dst, y, x)
			}
		})
		b.Run(name+"/applyH", func(b *testing.B) {
			b.SetBytes(bytes)
			dst := make([]float64, sh.n)
			for b.Loop() {
				w.ApplyH(dst, x, y)
			}
		})
		b.Run(name+"/project", func(b *testing.B) {
			b.SetBytes(2 * bytes)
			dst := make([]float64, L)
			for b.Loop() {
				w.Project(dst, v)
			}
		})
	}
}

// BenchmarkNewMemory reports the bytes New allocates per call as a multiple
// of the input size (x-input), for k = 256 matrices of 64×64. Total
// allocation bounds the peak from above. Target: at most 3.
func BenchmarkNewMemory(b *testing.B) {
	rng := rand.New(rand.NewPCG(2, 2))
	in := randBasis(rng, 256, 64, 64)
	input := float64(len(in.Data) * 8)
	var total uint64
	var ms runtime.MemStats
	b.ReportAllocs()
	for b.Loop() {
		runtime.ReadMemStats(&ms)
		before := ms.TotalAlloc
		if _, err := New(context.Background(), in, Options{}); err != nil {
			b.Fatal(err)
		}
		runtime.ReadMemStats(&ms)
		total += ms.TotalAlloc - before
	}
	b.ReportMetric(float64(total)/float64(b.N)/input, "x-input")
}

// BenchmarkNewCancelLatency reports the time from cancelling NewContext's
// context to its return, on a 1500-matrix 48×48 Gaussian basis (about 5 s
// to orthonormalise here), cancelled 2^(i mod 8)·10 ms into the run.
//
//	go test ./subspace -run X -bench NewCancelLatency -benchtime 8x
func BenchmarkNewCancelLatency(b *testing.B) {
	rng := rand.New(rand.NewPCG(1, 2))
	bs := randBasis(rng, 1500, 48, 48)
	var worst float64
	for i := 0; i < b.N; i++ {
		ctx, cancel := context.WithCancel(context.Background())
		done := make(chan time.Time, 1)
		go func() {
			New(ctx, bs, Options{})
			done <- time.Now()
		}()
		time.Sleep(time.Duration(10<<(i%8)) * time.Millisecond)
		at := time.Now()
		cancel()
		end := <-done
		worst = max(worst, end.Sub(at).Seconds()*1e3)
	}
	b.ReportMetric(worst, "ms-max-latency")
}
