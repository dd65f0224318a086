package subspace

import "time"

// progress throttles Options.Progress: it accumulates the work done (in
// floating-point operations, an estimate) and reports the fraction of the
// estimated total at most every progressEvery.
type progress struct {
	fn    func(float64)
	total float64
	done  float64
	last  time.Time
}

const progressEvery = 200 * time.Millisecond

func newProgress(fn func(float64), total float64) *progress {
	return &progress{fn: fn, total: total, last: time.Now()}
}

// add records flops more operations done and reports when due. The
// fraction never exceeds 1 (the total is an estimate made before the rank
// is known).
func (p *progress) add(flops float64) {
	if p.fn == nil {
		return
	}
	p.done += flops
	if now := time.Now(); now.Sub(p.last) >= progressEvery {
		p.last = now
		p.fn(min(1, p.done/p.total))
	}
}

// finish reports 1.
func (p *progress) finish() {
	if p.fn != nil {
		p.fn(1)
	}
}

// newWork estimates New's floating-point operations for rr unit columns of
// length L at full rank k = min(rr, L): the blocked factorisation and the
// forming of Q (each Σ over blocks of 4·qrNB·(L−j)·(rows left)), the
// reconstruction (rr·k·L) and the Gram matrix of the stored vectors (s²·L).
func newWork(rr, L int) float64 {
	k := min(rr, L)
	var w float64
	for j := 0; j < k; j += qrNB {
		nb := float64(min(qrNB, k-j))
		w += 4 * nb * float64(L-j) * float64(rr-j)
		w += 4 * nb * float64(L-j) * float64(k-j)
	}
	s := float64(min(k, L-k))
	return w + float64(rr)*float64(k)*float64(L) + s*s*float64(L)
}
