package segre

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"slices"
	"sync"
	"time"

	"github.com/segre-lab/segre/internal/accurate"
	"github.com/segre-lab/segre/net"
	"github.com/segre-lab/segre/proof"
	"github.com/segre-lab/segre/rankone"
	"github.com/segre-lab/segre/sos"
	"github.com/segre-lab/segre/subspace"
)

// maxBranchBoundSide is the largest sphere dimension (net.SideDimension:
// min(m, n), or 2·min(m, n) − 1 for a complex subspace) for which branch-and-bound
// joins (measured on this project's 2-core machine, Gaussian subspaces of
// dimension mn/2, gap 1e-6: min side 3 with max side 32 takes 0.6 s, min
// side 4 with max side 64 about 40 s; each further dimension multiplies
// the cells by far more, so at 5 it runs until the budget and reports the
// Lower it has proved by then).
const maxBranchBoundSide = 5

// maxLadderBranchBoundSide is the largest sphere dimension for which
// branch-and-bound is on the ladder: each split of a cell makes 2^(D−1)
// cells, so beyond about 12 not even one level of refinement below the
// flattening bound fits in any budget users run (and at 32 the search
// refuses: 2^31 cells per split exceed its frontier limit).
const maxLadderBranchBoundSide = 12

// maxSOSSize is the largest m·n for which the interior-point level one
// is on the ladder (the cost model then decides whether it fits in the
// time left; measured: m·n = 64 in 0.15 s, m·n = 100 in 1.9 s); above it
// the first-order form takes its place.
const maxSOSSize = 100

// maxLevelTwoOrder is the largest order m·n(n+1)/2 of the interior-point
// level two on the ladder (6×6 is order 126, measured 4.1 s; 4×8 is 144);
// the cost model decides whether it fits in the time left. Level two is on
// the ladder because level one is weak exactly where it is needed
// (PPT-invariant projectors such as the UPB complements, where level one
// proves nothing).
const maxLevelTwoOrder = 150

// maxComplexSOSSize is the largest m·n of a complex subspace for which the
// level-one (PPT) relaxation joins: (mn)² + 1 constraints, measured at
// 5×5 (626 constraints) about 1 s and at 4×4 0.25 s on this project's
// machine (sos.BenchmarkLevelOneComplex).
const maxComplexSOSSize = 25

// Plan returns the members Certify may run on w with these options, in
// the order their outcomes are reported. First those that run side by side
// from the start: the flattening bound, the three local methods from
// Options.Starts starts each, and branch-and-bound when its sphere is small
// (net.SideDimension ≤ 5). Then the ladder of bounds, run one after the
// other while the gap is open, each only when the cost model predicts it
// fits in the time left (see Certify): the level-one relaxation (its
// interior-point form up to m·n = 100 for a real subspace, or 25 for a
// complex one; for a real subspace, the first-order form up to
// m·n = 1024 when the interior-point one is too large or does not fit in
// the time left), then for a real subspace the two-copy eigenvalue bound
// (only when the interior-point level two does not fit), the level-two
// relaxation (interior point up to order m·n(n+1)/2 = 150, the first-order
// form up to 1500 when that is too large or does not fit), and last
// branch-and-bound on a larger sphere (dimension up to 12), which proves
// what it can by the deadline. When Options.Members is set, Plan
// returns it and Certify runs all of it side by side.
func Plan(w *subspace.Subspace, opt Options) []rankone.Searcher {
	if opt.Members != nil {
		return opt.Members
	}
	conc, lad := planned(w, opt)
	for _, st := range lad {
		conc = append(conc, st.s)
	}
	return conc
}

// rung is one bound of Certify's ladder.
type rung struct {
	s rankone.Searcher
	// predict is the predicted time to run it (for an anytime bound, to
	// its first useful step).
	predict time.Duration
	// skipIf, when set, is checked with the time left and the names of
	// the rungs that ran, just before the rung would start; a non-empty
	// answer skips it with that reason (not for lack of budget).
	skipIf func(left time.Duration, ran map[string]bool) string
}

// planned splits Plan into the members that run side by side from the
// start and the ladder.
func planned(w *subspace.Subspace, opt Options) (conc []rankone.Searcher, lad []rung) {
	st, seed := opt.starts(), opt.Seed
	conc = []rankone.Searcher{
		rankone.Flattening{},
		&rankone.MultiStart{Method: &rankone.TrustRegion{}, Starts: st, Seed: seed, Workers: 1},
		&rankone.MultiStart{Method: &rankone.ALS{}, Starts: st, Seed: seed + 1, Workers: 1},
		&rankone.MultiStart{Method: &rankone.Power{}, Starts: st, Seed: seed + 2, Workers: 1},
	}
	small := net.SideDimension(w) <= maxBranchBoundSide
	if small {
		conc = append(conc, &net.BranchBound{Gap: opt.gap()})
	}
	real := w.Field() == subspace.Real
	m, n := w.Rows(), w.Cols()
	L := m * n
	switch {
	case !real:
		if cm, cn := w.ComplexShape(); cm*cn <= maxComplexSOSSize {
			lad = append(lad, rung{s: &sos.Bound{}, predict: predictLevelOne(w)})
		}
	case L <= maxSOSSize:
		// The interior-point form when it fits; else the first-order one,
		// which keeps what it has proven at the deadline.
		ipm := &sos.Bound{}
		lad = append(lad, rung{s: ipm, predict: predictLevelOne(w)},
			rung{s: &sos.FirstOrder{}, predict: predictFirstOrderStep(w), skipIf: func(_ time.Duration, ran map[string]bool) string {
				if ran[ipm.Name()] {
					return "not needed: the interior-point level one ran"
				}
				return ""
			}})
	case L <= sos.MaxFirstOrderSize: // the first-order form's own limit
		lad = append(lad, rung{s: &sos.FirstOrder{}, predict: predictFirstOrderStep(w)})
	}
	if real {
		two := predictLevelTwo(w)
		fits2 := m*n*(n+1)/2 <= maxLevelTwoOrder
		l2 := &sos.LevelTwo{}
		if _, ok := sos.EigenBoundOrder(w); ok {
			lad = append(lad, rung{s: &sos.TwoCopy{}, predict: predictTwoCopy(w), skipIf: func(left time.Duration, _ map[string]bool) string {
				if fits2 && two <= left {
					return "level two, stronger, fits in the time left"
				}
				return ""
			}})
		}
		if fits2 {
			lad = append(lad, rung{s: l2, predict: two})
		}
		if order := m * n * (n + 1) / 2; order <= sos.MaxLevelTwoFirstOrder {
			lad = append(lad, rung{s: &sos.LevelTwoFirstOrder{}, predict: predictLevelTwoStep(w), skipIf: func(_ time.Duration, ran map[string]bool) string {
				if ran[l2.Name()] {
					return "not needed: the interior-point level two ran"
				}
				return ""
			}})
		}
	}
	if d := net.SideDimension(w); !small && d <= maxLadderBranchBoundSide {
		lad = append(lad, rung{s: &net.BranchBound{Gap: opt.gap()}, predict: predictBranchBoundSetup(w)})
	}
	return conc, lad
}

// hooked sets a member's progress callback when it has one of the known
// kinds (members given in Options.Members keep theirs if already set).
func hooked(s rankone.Searcher, fn func(rankone.Progress)) {
	switch m := s.(type) {
	case *rankone.MultiStart:
		if m.Progress == nil {
			m.Progress = fn
		}
	case *net.BranchBound:
		if m.Progress == nil {
			m.Progress = fn
		}
	case *net.Exhaustive:
		if m.Progress == nil {
			m.Progress = fn
		}
	case *sos.Bound:
		if m.Progress == nil {
			m.Progress = fn
		}
	case *sos.FirstOrder:
		if m.Progress == nil {
			m.Progress = fn
		}
	case *sos.LevelTwoFirstOrder:
		if m.Progress == nil {
			m.Progress = fn
		}
	}
}

// Certify returns a certified interval on d* for the subspace w (see the
// package doc). It returns an error only for invalid options or when the
// caller's context ends the search (then with the best valid bounds so far
// and Stop = Cancelled); a member that fails is reported in Members and
// contributes nothing.
//
// Budgeted escalation. The members of Plan that start at once (the
// flattening, the local searches, branch-and-bound on a small sphere) run
// side by side; beside them one goroutine climbs the ladder of bounds in
// order (level one, the two-copy bound, level two, branch-and-bound on a
// larger sphere). A rung starts only while the gap is open and when the
// cost model (cost.go: a power law in the size that drives each bound,
// fitted to BenchmarkCostModel) predicts it fits in the time left; the
// first-order forms and branch-and-bound keep what they have proven at the
// deadline, so they start whenever their first step fits. A rung not
// started is reported with Member.Skipped saying why. So Certify returns
// before its budget only when the gap is met or when every bound that
// applies has run to its end (Stop = NothingMore); a bound skipped for lack
// of time makes the stop BudgetSpent.
func Certify(ctx context.Context, w *subspace.Subspace, opt Options) (Report, error) {
	if err := opt.check(); err != nil {
		return Report{}, err
	}
	begin := time.Now()
	conc, lad := opt.Members, []rung(nil)
	if conc == nil {
		conc, lad = planned(w, opt)
	}
	members := slices.Clone(conc)
	for _, st := range lad {
		members = append(members, st.s)
	}
	var cover *net.Cover
	var cert, certFirst *sos.Certificate
	var zcert *sos.ComplexCertificate
	var l2cert, l2first *sos.LevelTwoCertificate
	if opt.Proof {
		for _, s := range members {
			switch mb := s.(type) {
			case *net.BranchBound:
				if mb.Record == nil {
					cover = &net.Cover{}
					mb.Record = cover
				}
			case *sos.Bound:
				if mb.Keep == nil {
					cert = &sos.Certificate{}
					mb.Keep = cert
				}
				if mb.KeepComplex == nil {
					zcert = &sos.ComplexCertificate{}
					mb.KeepComplex = zcert
				}
			case *sos.FirstOrder:
				if mb.Keep == nil {
					certFirst = &sos.Certificate{}
					mb.Keep = certFirst
				}
			case *sos.LevelTwo:
				if mb.Keep == nil {
					l2cert = &sos.LevelTwoCertificate{}
					mb.Keep = l2cert
				}
			case *sos.LevelTwoFirstOrder:
				if mb.Keep == nil {
					l2first = &sos.LevelTwoCertificate{}
					mb.Keep = l2first
				}
			}
		}
	}
	rctx, cancelBudget := context.WithTimeout(ctx, opt.budget())
	defer cancelBudget()
	sctx, stopMembers := context.WithCancel(rctx)
	defer stopMembers()

	m := &merger{gap: opt.gap(), lower: 0, upper: 1, progress: opt.Progress, begin: begin, stop: stopMembers,
		complex: w.Field() == subspace.Complex}
	m.report(Progress{Phase: Searching}, true)
	outs := make([]Member, len(members))
	run := func(i int, s rankone.Searcher) {
		r, err := s.Search(sctx, w)
		outs[i] = Member{Name: rankone.NameOf(s), Result: r, Err: err}
		if err == nil || isContextErr(err) {
			m.final(r)
		}
	}
	var wg sync.WaitGroup
	for i, s := range members {
		hooked(s, func(p rankone.Progress) { m.member(p) })
		if i >= len(conc) {
			continue
		}
		wg.Add(1)
		go func() {
			defer wg.Done()
			run(i, s)
		}()
	}
	// The ladder: one bound at a time beside the searches, each started
	// only while the gap is open and when the cost model predicts it fits
	// in the time left (see Certify).
	var budgetSkipped bool
	deadline, _ := rctx.Deadline()
	wg.Add(1)
	go func() {
		defer wg.Done()
		ran := map[string]bool{}
		for j, st := range lad {
			i := len(conc) + j
			skip := ""
			left := time.Until(deadline)
			if st.skipIf != nil {
				skip = st.skipIf(left, ran) // not needed: says so even when time is short
			}
			switch {
			case skip != "":
			case m.isMet():
				skip = "not started: the interval had met the gap"
			case sctx.Err() != nil:
				skip = "not started: the search had ended"
				budgetSkipped = budgetSkipped || ctx.Err() == nil
			case st.predict > left:
				skip = fmt.Sprintf("not started: predicted %s, %s left", roundDuration(st.predict), roundDuration(left))
				budgetSkipped = true
			}
			if skip != "" {
				outs[i] = Member{Name: rankone.NameOf(st.s), Result: rankone.TrivialResult(w, rankone.NameOf(st.s)), Skipped: skip}
				continue
			}
			run(i, st.s)
			if outs[i].Err == nil {
				ran[rankone.NameOf(st.s)] = true // a refusal leaves the next form its turn
			}
		}
	}()
	wg.Wait()

	entries := make([]rankone.Entry, len(outs))
	for i := range outs {
		o := &outs[i]
		if o.Err != nil && isContextErr(o.Err) && ctx.Err() == nil {
			// Stopped by Certify itself (gap reached or budget spent):
			// the result is valid, the error is ours, not the member's.
			o.Stopped = m.met
			o.Err = nil
			if !m.met && o.Result.Status == rankone.Cancelled {
				o.Result.Status = rankone.LimitReached // the budget ran out
			}
		}
		entries[i] = rankone.Entry{Name: o.Name, Result: o.Result, Err: o.Err}
	}
	merged := rankone.Merge(w, entries)
	if m.met && ctx.Err() == nil && merged.X != nil {
		// The interval met the gap, which is relative on h*: members were
		// stopped, and a witness of a tiny distance may still be far from
		// the rounding level. One short polish by alternating maximisation (its Upper is
		// Verify's, kept only if better) costs milliseconds.
		pctx, cancel := context.WithTimeout(ctx, polishTime(opt.budget()))
		px, py := append([]float64(nil), merged.X...), append([]float64(nil), merged.Y...)
		(&rankone.ALS{}).Refine(pctx, w, px, py)
		cancel()
		// Better by the field's own certified distance (for a complex
		// subspace the realified Upper cannot see a tiny distance improve).
		dist := rankone.Verify
		if w.Field() == subspace.Complex {
			dist = rankone.VerifyComplex
		}
		u0, err0 := dist(w, merged.X, merged.Y)
		if u1, err := dist(w, px, py); err == nil && (err0 != nil || u1 < u0) {
			if pu, err := rankone.Verify(w, px, py); err == nil {
				merged.X, merged.Y, merged.Upper = px, py, pu
				merged.FoundBy += " (polished)"
			}
		}
	}
	rep := Report{Lower: merged.Lower, Upper: merged.Upper, X: merged.X, Y: merged.Y,
		FoundBy: merged.FoundBy, LowerBy: merged.LowerBy, Members: outs, Elapsed: time.Since(begin)}
	if opt.Proof && ctx.Err() == nil {
		ev := proof.Evidence{W: w, InputSHA256: opt.inputHash, X: rep.X, Y: rep.Y, Cover: cover}
		if cert != nil && cert.K != nil {
			ev.Certificate = cert
		} else if certFirst != nil && certFirst.K != nil {
			ev.Certificate = certFirst // the interior-point level one did not run
		}
		if zcert != nil && zcert.Z != nil {
			ev.ComplexCertificate = zcert
		}
		if l2cert != nil && l2cert.K != nil {
			ev.LevelTwo = l2cert
		} else if l2first != nil && l2first.K != nil {
			ev.LevelTwo = l2first // the interior-point level two did not run
		}
		for _, o := range outs {
			if o.Name == (&sos.TwoCopy{}).Name() && o.Err == nil && o.Result.Lower > 0 {
				ev.TwoCopy = true
			}
		}
		rep.Proof, rep.ProofError = proof.Build(ctx, ev)
	}
	if w.Field() == subspace.Complex {
		complexReport(w, &rep)
	}
	rep.ValueLower, rep.ValueUpper = rankone.Result{Lower: rep.Lower, Upper: rep.Upper}.ValueBounds()
	rep.Gap = relGapUpper(rep.ValueLower, rep.ValueUpper)
	switch {
	case rep.Gap <= opt.gap():
		rep.Stop = GapReached
	case ctx.Err() != nil:
		rep.Stop = Cancelled
	case rctx.Err() != nil || budgetSkipped:
		rep.Stop = BudgetSpent
	default:
		rep.Stop = NothingMore
	}
	m.mu.Lock()
	m.lower, m.upper, m.complex = rep.Lower, rep.Upper, false // already complex
	m.mu.Unlock()
	m.report(Progress{Phase: Done}, true)
	if rep.Stop == Cancelled {
		return rep, ctx.Err()
	}
	return rep, nil
}

// roundDuration rounds d for a message: to 10 ms below a second, else to
// 100 ms.
func roundDuration(d time.Duration) time.Duration {
	if d < time.Second {
		return d.Round(10 * time.Millisecond)
	}
	return d.Round(100 * time.Millisecond)
}

// isMet reports whether the merged interval has met the gap.
func (m *merger) isMet() bool {
	m.mu.Lock()
	defer m.mu.Unlock()
	return m.met
}

func isContextErr(err error) bool {
	return errors.Is(err, context.Canceled) || errors.Is(err, context.DeadlineExceeded)
}

// relGapUpper returns an upper bound on (hi − lo)/hi (0 when hi ≤ 0).
func relGapUpper(lo, hi float64) float64 {
	if hi <= 0 {
		return 0
	}
	return accurate.Up(accurate.Up(hi-lo) / hi)
}

// merger keeps the merged certified interval while members run, reports
// it, and stops the members when it meets the gap.
type merger struct {
	mu           sync.Mutex
	gap          float64
	lower, upper float64
	met          bool
	progress     func(Progress)
	begin, last  time.Time
	stop         context.CancelFunc
	complex      bool // the bounds are of the realified subspace: report and test complex ones
}

// member takes a member's progress report. rankone.Progress carries
// certified bounds by contract (Upper ≥ d at the member's witness, Lower
// proven), so they may tighten the merged interval.
func (m *merger) member(p rankone.Progress) {
	m.mu.Lock()
	m.tighten(p.Lower, p.Upper)
	m.mu.Unlock()
	m.report(Progress{Phase: Searching, Member: p}, false)
}

// final takes a member's finished Result (only from a member that did not
// fail).
func (m *merger) final(r rankone.Result) {
	m.mu.Lock()
	up := r.Upper
	if r.X == nil {
		up = 1
	}
	m.tighten(r.Lower, up)
	m.mu.Unlock()
	m.report(Progress{Phase: Searching}, false)
}

// tighten merges bounds; m.mu must be held.
func (m *merger) tighten(lo, up float64) {
	if up < m.upper {
		m.upper = up
	}
	m.lower = math.Max(m.lower, lo)
	l, u := m.bounds()
	hlo, hhi := rankone.Result{Lower: l, Upper: u}.ValueBounds()
	if !m.met && relGapUpper(hlo, hhi) <= m.gap {
		m.met = true
		m.stop()
	}
}

// report calls the progress callback, throttled to one call every 200 ms
// unless force is set.
func (m *merger) report(p Progress, force bool) {
	if m.progress == nil {
		return
	}
	m.mu.Lock()
	now := time.Now()
	if !force && now.Sub(m.last) < 200*time.Millisecond {
		m.mu.Unlock()
		return
	}
	m.last = now
	p.Lower, p.Upper = m.bounds()
	p.Elapsed = now.Sub(m.begin)
	m.mu.Unlock()
	m.progress(p)
}

// CertifyBasis orthonormalises the matrices of b (with Options.Subspace),
// proves how far the stored basis is from their span, and certifies as
// Certify does; Report.Input gives the interval for the span of b as given.
// b is not modified, unless Options.Subspace.Reload is set: then New
// factors b.Data in place (see subspace.Options.Reload) and the input
// span is proven from the matrices Reload reads again. Errors from the
// orthonormalisation (bad input) are returned as they are (see package
// subspace for the sentinels).
func CertifyBasis(ctx context.Context, b subspace.Basis, opt Options) (*subspace.Subspace, Report, error) {
	if err := opt.check(); err != nil {
		return nil, Report{}, err
	}
	begin := time.Now()
	phase := func(p Phase) {
		if opt.Progress != nil {
			opt.Progress(Progress{Phase: p, Upper: 1, Elapsed: time.Since(begin)})
		}
	}
	phase(Orthonormalising)
	w, err := subspace.New(ctx, b, opt.Subspace)
	if err != nil {
		return nil, Report{}, err
	}
	phase(ProvingInputSpan)
	var th float64
	var terr error
	if opt.Subspace.Reload != nil { // b.Data now holds the stored basis: read the input again
		th, terr = subspace.InputDistanceReload(ctx, b.Count, opt.Subspace.Reload, w)
	} else {
		th, terr = subspace.InputDistance(ctx, b, w)
	}
	if ctx.Err() != nil {
		return w, Report{Upper: 1, Stop: Cancelled}, ctx.Err()
	}
	rep, err := Certify(ctx, w, opt)
	rep.Input = inputSpan(w, rep, th, terr)
	return w, rep, err
}

// CertifyFile reads a basis from a .npy or text file (subspace.ReadInput,
// within Options.Subspace.MaxBytes) and certifies it as CertifyBasis does,
// or as CertifyComplex does when the data are complex or Options.Complex
// is set. The file is not modified.
func CertifyFile(ctx context.Context, path string, opt Options) (*subspace.Subspace, Report, error) {
	if err := opt.check(); err != nil {
		return nil, Report{}, err
	}
	if opt.Progress != nil {
		opt.Progress(Progress{Phase: Reading, Upper: 1})
	}
	in, err := subspace.ReadInput(path, opt.Subspace.MaxBytes)
	if err != nil {
		return nil, Report{}, err
	}
	if opt.Proof {
		if opt.inputHash, err = fileHash(path); err != nil {
			return nil, Report{}, err
		}
	}
	if in.Field == subspace.Complex || opt.Complex {
		return CertifyComplex(ctx, in.AsComplex(), opt)
	}
	if opt.Subspace.Reload == nil {
		// Our own copy of the file's numbers: factor it in place and read
		// the file again, checked, where the input is needed after
		// (subspace.ReloadNPY; .npy in C order only).
		if reload, closeFile, err := subspace.ReloadNPY(path, in.Real); err == nil {
			defer closeFile()
			opt.Subspace.Reload = reload
		}
	}
	return CertifyBasis(ctx, in.Real, opt)
}

// bounds returns the merged interval on d*, translated to the complex
// distance for a complex subspace (certified: rankone.ComplexLower and
// ComplexUpper round outward); m.mu must be held.
func (m *merger) bounds() (lo, up float64) {
	if !m.complex {
		return m.lower, m.upper
	}
	return rankone.ComplexLower(m.lower), rankone.ComplexUpper(m.upper)
}

// complexReport turns the merged Result of the realified subspace W” into
// the complex report: Lower from the real Lower (d² = 2d”² − 1), Upper the
// smaller of the translated real Upper and VerifyComplex at the witness
// (which has no cancellation for tiny distances), and the complex witness.
func complexReport(w *subspace.Subspace, rep *Report) {
	up := rankone.ComplexUpperAt(w, rep.X, rep.Y, rep.Upper)
	// A member's witness may prove a smaller complex Upper through its
	// translated real Upper than the merged one does (the merge ranks by
	// VerifyComplex): take the best, with its own witness.
	for _, mb := range rep.Members {
		if mb.Err == nil && mb.Result.X != nil {
			if u := rankone.ComplexUpperAt(w, mb.Result.X, mb.Result.Y, mb.Result.Upper); u < up {
				up, rep.X, rep.Y, rep.Upper, rep.FoundBy = u, mb.Result.X, mb.Result.Y, mb.Result.Upper, mb.Name
			}
		}
	}
	rep.Lower, rep.Upper = rankone.ComplexLower(rep.Lower), up
	if rep.Lower > rep.Upper { // cannot happen when both are proven; keep the report proper
		rep.Lower = 0
	}
	if rep.Lower == 0 {
		rep.LowerBy = ""
	}
	rep.Field = subspace.Complex
	rep.XC, rep.YC = subspace.ComplexWitness(rep.X, rep.Y)
	for i := range rep.Members {
		r := &rep.Members[i].Result
		u := rankone.ComplexUpperAt(w, r.X, r.Y, r.Upper)
		r.Lower, r.Upper = rankone.ComplexLower(r.Lower), u
	}
}

// CertifyComplex builds the subspace spanned over C by the complex matrices
// of cb (subspace.NewComplex, with Options.Subspace), proves how far the
// stored basis is from their span, and certifies as Certify does; the
// Report's bounds and witness (XC, YC) are complex. cb is not modified.
func CertifyComplex(ctx context.Context, cb subspace.ComplexBasis, opt Options) (*subspace.Subspace, Report, error) {
	if err := opt.check(); err != nil {
		return nil, Report{}, err
	}
	begin := time.Now()
	if opt.Progress != nil {
		opt.Progress(Progress{Phase: Orthonormalising, Upper: 1, Elapsed: time.Since(begin)})
	}
	w, err := subspace.NewComplex(ctx, cb, opt.Subspace)
	if err != nil {
		return nil, Report{}, err
	}
	if opt.Progress != nil {
		opt.Progress(Progress{Phase: ProvingInputSpan, Upper: 1, Elapsed: time.Since(begin)})
	}
	th, terr := subspace.ComplexInputDistance(ctx, cb, w)
	if ctx.Err() != nil {
		return w, Report{Upper: 1, Stop: Cancelled}, ctx.Err()
	}
	rep, err := Certify(ctx, w, opt)
	rep.Input = inputSpan(w, rep, th, terr)
	return w, rep, err
}

// inputSpan widens the report's interval by the proven distance th to the
// input's span, or says why it cannot (terr).
func inputSpan(w *subspace.Subspace, rep Report, th float64, terr error) *InputSpan {
	in := &InputSpan{}
	switch {
	case terr == nil:
		in.Proven, in.Distance = true, th
		in.Lower, in.Upper = rankone.Widen(rep.Lower, rep.Upper, th)
	case errors.Is(terr, subspace.ErrDependent):
		kept, left := w.RankGap()
		in.Note = fmt.Sprintf("the input matrices are numerically dependent (rank %d at tolerance %.2g; last pivot kept %.2g, first left out %.2g): the interval holds for the stored basis only",
			w.ComplexDim(), w.RankTol(), kept, left)
	default:
		in.Note = "not proven (" + terr.Error() + "): the interval holds for the stored basis only"
	}
	return in
}

// polishTime is the time allowed for the final polish: a tenth of the
// budget, at most 200 ms.
func polishTime(budget time.Duration) time.Duration {
	return min(budget/10, 200*time.Millisecond)
}

// fileHash returns the hex SHA-256 of the file at path, streamed.
func fileHash(path string) (string, error) {
	f, err := os.Open(path)
	if err != nil {
		return "", err
	}
	defer f.Close()
	h := sha256.New()
	if _, err := io.Copy(h, f); err != nil {
		return "", err
	}
	return hex.EncodeToString(h.Sum(nil)), nil
}
