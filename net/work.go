package net

import (
	"context"
	"runtime"
	"sync"
	"sync/atomic"
	"time"
)

// cellWork is one worker's state for evaluating cells: a copy of the run's
// side (its own evaluation count) and every buffer a cell's estimate and
// bound need, reused from cell to cell, so that a batch allocates nothing
// per cell but the children's warm starts it keeps. Each worker's cellWork
// is its own allocation, its small buffers carved from one slab with a
// cache line of padding at both ends, so that no two workers write to the
// same cache line.
type cellWork struct {
	_    [64]byte
	s    side
	c    []float64 // the cell's centre (d)
	full []float64 // the lifted centre (d+1) of a phase-reduced side
	form formWork
	_    [64]byte
}

// lineFloats is a cache line in float64s (64 bytes on the machines Go
// targets; a larger line costs only some false sharing, never a wrong
// result).
const lineFloats = 8

func newCellWork(sd side) *cellWork {
	ws := &cellWork{s: sd}
	slab := make([]float64, 2*lineFloats+2*sd.d+1)
	ws.c = slab[lineFloats : lineFloats+sd.d : lineFloats+sd.d]
	ws.full = slab[lineFloats+sd.d : lineFloats+2*sd.d+1 : lineFloats+2*sd.d+1]
	return ws
}

// lift is side.lift into ws's buffer: c itself, or c with the
// phase-reduction zero inserted.
func (ws *cellWork) lift(c []float64) []float64 {
	s := &ws.s
	if s.fixed == 0 {
		return c
	}
	z := s.fixed - 1
	full := ws.full[:len(c)+1]
	copy(full, c[:z])
	full[z] = 0
	copy(full[z+1:], c[z:])
	return full
}

// value is side.value with ws's buffers: the same estimate, bound and raw
// estimate, bit for bit, and the best exact-side vector in vec (its content
// on entry is the start).
func (ws *cellWork) value(c, vec []float64) (est, upper, raw float64) {
	s := &ws.s
	s.evals++
	c = ws.lift(c)
	var u float64
	switch {
	case s.form != nil:
		raw, u = s.form.maxEig(c, vec, &ws.form)
	case s.onX:
		raw, u = MaxEigH(s.w, c, vec)
	default:
		raw, u = MaxEigG(s.w, c, vec)
	}
	return raw / sumSqEst(c), s.normalised(c, u), raw
}

// cellPool runs the cells of each batch on len(work) workers: the calling
// goroutine as worker 0 and len(work)−1 helper goroutines that live as long
// as the pool (close ends them). Worker k uses work[k]. Workers claim runs
// of consecutive cells from one atomic counter (a share of what is left,
// at least one cell, so that they finish together); body must write only to
// slots of its own cell and to its cellWork, so the result does not depend
// on the number of workers or on who claims what.
//
// Between batches a helper spins for up to helperSpin before it parks, and
// the caller spins for up to callerSpin while the helpers finish: waking a
// parked goroutine on an idle processor costs tens of microseconds (a
// median of 90 µs on issue 16's 2-core machine), up to a tenth of a batch,
// while the serial work between two batches (merge, re-bounding, choosing)
// takes about 10–40 µs. Parking is the usual handshake (see await): a
// parked flag set before the last look at the state, and a one-slot channel
// that the waker sends on only if it cleared the flag itself.
type cellPool struct {
	work []*cellWork

	// The current batch, written by the caller before gen is advanced.
	ctx  context.Context
	n    int
	body func(ws *cellWork, i int)
	quit bool

	gen     atomic.Uint64 // batch generation
	next    atomic.Int64  // next cell to claim
	left    atomic.Int64  // helpers still on the batch
	skipped atomic.Bool   // a worker saw ctx done
	helpers []*poolHelper
	caller  poolHelper // the caller's park state while it waits
	wg      sync.WaitGroup
}

type poolHelper struct {
	_      [64]byte
	parked atomic.Bool
	wake   chan struct{}
	_      [64]byte
}

const (
	helperSpin = 300 * time.Microsecond
	callerSpin = 2 * time.Millisecond
)

func newCellPool(work []*cellWork) *cellPool {
	p := &cellPool{work: work, caller: poolHelper{wake: make(chan struct{}, 1)}}
	for k := 1; k < len(work); k++ {
		h := &poolHelper{wake: make(chan struct{}, 1)}
		p.helpers = append(p.helpers, h)
		p.wg.Add(1)
		go p.help(h, work[k])
	}
	return p
}

// run runs body(ws, i) for i = 0, …, n−1 and returns when all are done.
// Once ctx is done, the remaining cells are skipped (each worker finishes
// its current cell) and run reports false.
func (p *cellPool) run(ctx context.Context, n int, body func(ws *cellWork, i int)) bool {
	if len(p.helpers) == 0 || n <= 1 {
		for i := 0; i < n; i++ {
			if ctx.Err() != nil {
				return false
			}
			body(p.work[0], i)
		}
		return true
	}
	p.ctx, p.n, p.body = ctx, n, body
	p.next.Store(0)
	p.skipped.Store(false)
	p.left.Store(int64(len(p.helpers)))
	p.gen.Add(1)
	for _, h := range p.helpers {
		wakeUp(h)
	}
	p.claim(p.work[0])
	await(&p.caller, callerSpin, func() bool { return p.left.Load() == 0 })
	p.body = nil
	return !p.skipped.Load()
}

// close ends the helpers; the pool must not be used afterwards.
func (p *cellPool) close() {
	if len(p.helpers) == 0 {
		return
	}
	p.quit = true
	p.gen.Add(1)
	for _, h := range p.helpers {
		wakeUp(h)
	}
	p.wg.Wait()
}

// help is a helper's loop: wait for a new generation, claim cells, report.
func (p *cellPool) help(h *poolHelper, ws *cellWork) {
	defer p.wg.Done()
	var seen uint64
	for {
		await(h, helperSpin, func() bool { return p.gen.Load() != seen })
		seen = p.gen.Load()
		if p.quit {
			return
		}
		p.claim(ws)
		if p.left.Add(-1) == 0 {
			wakeUp(&p.caller)
		}
	}
}

// await returns once ready() holds: it spins for up to spin, then parks on
// h until a waker sends, and looks again, because a wake-up may be stale (a
// waker held up between its change and its wakeUp can reach a later park).
// Every send answers a park whose flag the sender cleared, and that park
// receives it, so no token is left over. The waker changes the state, then
// calls wakeUp; the waiter sets its flag, then looks at the state: with
// sequentially consistent atomics one of them sees the other's write, so no
// wake-up is lost.
func await(h *poolHelper, spin time.Duration, ready func() bool) {
	for !ready() {
		if spinUntil(spin, ready) {
			return
		}
		h.parked.Store(true)
		if ready() && h.parked.CompareAndSwap(true, false) {
			return
		}
		<-h.wake
	}
}

// wakeUp wakes h if it is parked (or about to park).
func wakeUp(h *poolHelper) {
	if h.parked.CompareAndSwap(true, false) {
		h.wake <- struct{}{}
	}
}

// claim evaluates runs of cells of the current batch until none is left.
func (p *cellPool) claim(ws *cellWork) {
	n, workers := p.n, len(p.work)
	for {
		size := int64(max(1, (n-int(p.next.Load()))/(4*workers)))
		end := int(p.next.Add(size))
		start := end - int(size)
		if start >= n {
			return
		}
		for i := start; i < min(end, n); i++ {
			if p.ctx.Err() != nil {
				p.skipped.Store(true)
				return
			}
			p.body(ws, i)
		}
	}
}

// spinUntil polls cond for up to d, yielding the processor now and then;
// it reports whether cond became true.
func spinUntil(d time.Duration, cond func() bool) bool {
	var start time.Time
	for i := 0; ; i++ {
		if cond() {
			return true
		}
		if i%64 == 63 {
			if start.IsZero() {
				start = time.Now()
			} else if time.Since(start) > d {
				return false
			}
			runtime.Gosched()
		}
	}
}
