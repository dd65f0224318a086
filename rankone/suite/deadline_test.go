package suite_test

import (
	"context"
	"errors"
	"fmt"
	"math"
	"runtime"
	"slices"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/segre-lab/segre/net"
	"github.com/segre-lab/segre/rankone"
	"github.com/segre-lab/segre/rankone/suite"
	"github.com/segre-lab/segre/sos"
	"github.com/segre-lab/segre/subspace"
)

// A bundled strategy with an instance large enough that it is still working
// when it is cancelled a few milliseconds in.
type longCase struct {
	name string
	new  func() rankone.Searcher
	in   func() suite.Instance
}

// longCases lists every exported Searcher of the library. short picks
// smaller instances (the leak test under the race detector).
func longCases(short bool) []longCase {
	big := func() suite.Instance { return suite.Random(32, 32, 512, 1) }
	mid := func() suite.Instance { return suite.Random(4, 32, 64, 2) }
	sdp1 := func() suite.Instance { return suite.Random(10, 10, 50, 3) }
	sdp2 := func() suite.Instance { return suite.Random(5, 5, 12, 4) }
	if short {
		big = func() suite.Instance { return suite.Random(12, 12, 72, 1) }
		mid = func() suite.Instance { return suite.Random(3, 12, 18, 2) }
		sdp1 = func() suite.Instance { return suite.Random(4, 4, 8, 3) }
		sdp2 = func() suite.Instance { return suite.Random(3, 3, 4, 4) }
	}
	many := 1 << 20 // more starts than any deadline here allows
	return []longCase{
		{"flattening", func() rankone.Searcher { return rankone.Flattening{} }, big},
		// A verified Cholesky test of order 1500 (s·m = 2560 > n): seconds
		// of work that a deadline must cut short.
		{"flattening/order-1500", func() rankone.Searcher { return rankone.Flattening{} }, func() suite.Instance {
			if short {
				return suite.Random(12, 150, 20, 6)
			}
			return suite.Random(64, 1500, 40, 6)
		}},
		{"als", func() rankone.Searcher { return &rankone.ALS{MaxIter: 1 << 30} }, big},
		{"power", func() rankone.Searcher { return &rankone.Power{MaxIter: 1 << 30} }, big},
		{"trust-region", func() rankone.Searcher { return &rankone.TrustRegion{MaxIter: 1 << 30} }, big},
		{"multistart", func() rankone.Searcher { return &rankone.MultiStart{Starts: many} }, big},
		{"portfolio", func() rankone.Searcher {
			return &rankone.Portfolio{Members: []rankone.Searcher{rankone.Flattening{},
				&rankone.MultiStart{Starts: many, Workers: 1}, &rankone.MultiStart{Method: &rankone.ALS{}, Starts: many, Workers: 1}}}
		}, big},
		{"all-points", func() rankone.Searcher { return &rankone.AllPoints{Noisy: true} }, func() suite.Instance {
			if short {
				return suite.RankOneSpan(12, 12, 12, 5)
			}
			return suite.RankOneSpan(48, 48, 48, 5)
		}},
		{"net", func() rankone.Searcher { return &net.Exhaustive{Epsilon: 0.02} }, mid},
		{"branch-and-bound", func() rankone.Searcher { return &net.BranchBound{Gap: 1e-9} }, mid},
		{"branch-and-bound/antisymmetric", func() rankone.Searcher { return &net.BranchBound{Gap: 1e-9} }, func() suite.Instance { return suite.Antisymmetric(3) }},
		{"sos-level-1", func() rankone.Searcher { return &sos.Bound{} }, sdp1},
		{"sos-level-2", func() rankone.Searcher { return &sos.LevelTwo{} }, sdp2},
	}
}

// checkCancelled checks what a Search cut short by its context must return
// (the Searcher contract in DESIGN.md): valid bounds, status Cancelled and
// the context's error; or, if it finished first, a valid non-cancelled result.
func checkCancelled(in suite.Instance, res rankone.Result, err error, cancelled bool) error {
	if err != nil && !errors.Is(err, context.Canceled) && !errors.Is(err, context.DeadlineExceeded) {
		return fmt.Errorf("error %v", err)
	}
	if cancelled && (err == nil) != (res.Status != rankone.Cancelled) {
		return fmt.Errorf("status %v with error %v", res.Status, err)
	}
	if !(res.Upper <= 1) || !(res.Lower >= 0) || res.Lower > res.Upper {
		return fmt.Errorf("bounds [%v, %v]", res.Lower, res.Upper)
	}
	// The optimum is known only for some families; where it is, the
	// interval must contain it (never lie; Random has none).
	if !math.IsNaN(in.Optimum) && (res.Lower > in.Optimum || res.Upper < in.Optimum*(1-1e-9)) {
		return fmt.Errorf("bounds [%v, %v] miss the optimum %v", res.Lower, res.Upper, in.Optimum)
	}
	return nil
}

// BenchmarkCancelLatency measures, for every bundled Searcher, the time from
// cancelling its context to the return of Search. Iteration i cancels
// 2^(i mod 8) ms after the start (1 to 128 ms), so cancellation lands at
// different stages. Reported: the largest and the median latency (ms) over
// the runs still working when cancelled, and how many finished first.
//
//	go test ./rankone/suite -run X -bench CancelLatency -benchtime 32x
func BenchmarkCancelLatency(b *testing.B) {
	for _, c := range longCases(false) {
		b.Run(c.name, func(b *testing.B) {
			in := c.in()
			w, err := subspace.New(context.Background(), in.Basis, subspace.Options{})
			if err != nil {
				b.Fatal(err)
			}
			var lat []float64
			early := 0
			b.ResetTimer()
			for i := 0; i < b.N; i++ {
				ctx, cancel := context.WithCancel(context.Background())
				done := make(chan struct{})
				var res rankone.Result
				var serr error
				var end time.Time
				go func() {
					res, serr = c.new().Search(ctx, w)
					end = time.Now()
					close(done)
				}()
				select {
				case <-done:
					early++
					cancel()
				case <-time.After(time.Duration(1<<(i%8)) * time.Millisecond):
					at := time.Now()
					cancel()
					<-done
					lat = append(lat, end.Sub(at).Seconds()*1e3)
				}
				if err := checkCancelled(in, res, serr, false); err != nil {
					b.Fatalf("run %d: %v", i, err)
				}
			}
			b.StopTimer()
			if len(lat) > 0 {
				slices.Sort(lat)
				b.ReportMetric(lat[len(lat)-1], "ms-max-latency")
				b.ReportMetric(lat[len(lat)/2], "ms-median-latency")
			}
			b.ReportMetric(float64(early), "finished-first")
		})
	}
}

// goroutines returns the stacks of the live goroutines other than the
// caller's, for a leak report.
func goroutines() []string {
	buf := make([]byte, 1<<20)
	buf = buf[:runtime.Stack(buf, true)]
	var out []string
	for i, g := range strings.Split(string(buf), "\n\n") {
		if i > 0 && strings.TrimSpace(g) != "" {
			out = append(out, g)
		}
	}
	return out
}

// No goroutine outlives a Search, whether it runs to the end or is
// cancelled part way (a cancelled run here is given 0, 2 or 20 ms). A
// goroutine that has signalled completion may take a moment to exit, so
// the count is polled for up to two seconds before a leak is reported
// (a real leak is a goroutine blocked or working after Search returned,
// which polling does not hide).
func TestNoGoroutineOutlivesSearch(t *testing.T) {
	for _, c := range longCases(true) {
		t.Run(c.name, func(t *testing.T) {
			in := c.in()
			w, err := subspace.New(context.Background(), in.Basis, subspace.Options{})
			if err != nil {
				t.Fatal(err)
			}
			for _, after := range []time.Duration{0, 2 * time.Millisecond, 20 * time.Millisecond} {
				base := runtime.NumGoroutine()
				ctx, cancel := context.WithCancel(context.Background())
				var once sync.Once
				stop := func() { once.Do(cancel) }
				if after == 0 {
					stop()
				} else {
					timer := time.AfterFunc(after, stop)
					defer timer.Stop()
				}
				res, err := c.new().Search(ctx, w)
				stop()
				if err := checkCancelled(in, res, err, after == 0); err != nil {
					t.Errorf("cancelled after %v: %v", after, err)
				}
				deadline := time.Now().Add(2 * time.Second)
				for runtime.NumGoroutine() > base && time.Now().Before(deadline) {
					time.Sleep(time.Millisecond)
				}
				if n := runtime.NumGoroutine(); n > base {
					t.Fatalf("cancelled after %v: %d goroutines outlive Search:\n%s", after, n-base, strings.Join(goroutines(), "\n\n"))
				}
			}
		})
	}
}
