// Package searchtest is a conformance suite that any rankone.Searcher,
// bundled or a user's, can be run through from a test:
//
//	func TestMine(t *testing.T) {
//		searchtest.Run(t, func() rankone.Searcher { return &Mine{} }, searchtest.Options{})
//	}
//
// For every instance of suite.ClosedForms (and a rotated copy of each) it
// checks that the Result's Upper equals rankone.Verify at the returned
// witness, that the witness is a pair of unit vectors, that
// Lower ≤ d* ≤ Upper, that Accuracy holds when claimed, that a rerun gives a
// bit-for-bit identical Result, that every variant in SameAs agrees bit for
// bit, and that an already-cancelled context gives status Cancelled with
// ctx.Err() and still-valid bounds. Each property that fails is reported
// once, with the number of instances it failed on and the first of them.
//
// How a strategy passes, built on the rankone kit: return
// rankone.WitnessResult(w, name, x, y) for the witness it found (Upper is
// then Verify at the unit witness), set Lower only from a proven bound on
// h* through rankone.DistanceLower, name it in LowerBy, check ctx at least
// once per iteration and on cancellation return the best Result so far with
// Status rankone.Cancelled and ctx.Err(), draw random numbers from a source
// seeded by (Seed, work item), and spread work with rankone.ParallelFor,
// each item writing its own slot, merged in index order.
package searchtest

import (
	"context"
	"errors"
	"fmt"
	"math"
	"testing"

	"gonum.org/v1/gonum/blas/blas64"
	"gonum.org/v1/gonum/mat"

	"github.com/segre-lab/segre/rankone"
	"github.com/segre-lab/segre/rankone/suite"
	"github.com/segre-lab/segre/subspace"
)

// Options says what a Searcher claims.
type Options struct {
	// Accuracy, if positive, is the claim Upper ≤ d* + Accuracy on every
	// closed-form instance; the planted point must then also be recovered
	// up to sign. Zero makes no accuracy claim.
	Accuracy float64
	// SameAs are variants (for example other worker counts) that must
	// return bit-for-bit the same witness and bounds.
	SameAs []func() rankone.Searcher
	// Instances replaces suite.ClosedForms(testing.Short()) when non-nil.
	Instances []suite.Instance
}

// Run runs the suite; newSearcher returns a fresh Searcher for each call.
func Run(t testing.TB, newSearcher func() rankone.Searcher, opt Options) {
	t.Helper()
	insts := opt.Instances
	if insts == nil {
		insts = suite.ClosedForms(testing.Short())
	}
	tl := &tally{byProp: map[string]*failure{}}
	runs := 0
	for _, in := range insts {
		for _, inst := range []suite.Instance{in, suite.Rotated(in, 7)} {
			runs++
			tl.inst = inst.Name
			runOne(t, tl, newSearcher, opt, inst)
		}
	}
	for _, prop := range tl.order {
		f := tl.byProp[prop]
		t.Errorf("%s: failed on %d of %d instances; first on %s: %s", prop, f.count, runs, f.inst, f.msg)
	}
}

// tally collects failed properties so that each is reported once.
type tally struct {
	inst   string // the instance being run
	order  []string
	byProp map[string]*failure
}

type failure struct {
	count     int
	inst, msg string
	last      string // the last instance counted
}

// fail records that property prop failed on the current instance.
func (tl *tally) fail(prop, format string, args ...any) {
	f := tl.byProp[prop]
	if f == nil {
		f = &failure{inst: tl.inst, msg: fmt.Sprintf(format, args...)}
		tl.byProp[prop] = f
		tl.order = append(tl.order, prop)
	}
	if f.last != tl.inst {
		f.count++
		f.last = tl.inst
	}
}

// Slack returns the largest amount by which d* of the stored subspace can
// differ from the instance's d* for its exact basis.
//
// Derived: d(x, y) = ‖(I − P)v‖ for unit v = x⊗y, so |d₁* − d₂*| ≤ ‖P₁ − P₂‖₂.
// By Wedin's theorem (Wedin, BIT 12, 1972) the stored span, whose basis
// reproduces the unit-normalised input up to E (‖E‖_F ≤ rec·√r, rec from
// BackwardError), satisfies ‖P₁ − P₂‖ ≤ ‖E‖/(σ_k − ‖E‖) with σ_k the
// smallest nonzero singular value of the normalised input (gonum's SVD),
// and the loss of orthogonality of the stored vectors adds at most η.
// Dependent inputs (σ_k below the rank tolerance) give +Inf: no claim.
func Slack(t testing.TB, b subspace.Basis, w *subspace.Subspace) float64 {
	L := b.Rows * b.Cols
	a := mat.NewDense(L, b.Count, nil)
	for c := 0; c < b.Count; c++ {
		// The norm by gonum's scaled Nrm2 and a division per entry, so that
		// subnormal and huge inputs normalise without under- or overflow.
		col := b.Data[c*L : (c+1)*L]
		s := blas64.Nrm2(blas64.Vector{N: L, Data: col, Inc: 1})
		if s == 0 {
			continue // a zero matrix: New drops it, and so does the span
		}
		for l := 0; l < L; l++ {
			a.Set(l, c, col[l]/s)
		}
	}
	var svd mat.SVD
	if !svd.Factorize(a, mat.SVDNone) {
		t.Fatal("searchtest: gonum SVD failed")
	}
	sv := svd.Values(nil)
	k := w.Dim()
	if k == 0 || k > len(sv) {
		return math.Inf(1)
	}
	rec, _ := w.BackwardError()
	e := rec*math.Sqrt(float64(b.Count)) + 1e-15
	sk := sv[k-1]
	if sk <= 2*e {
		return math.Inf(1)
	}
	return e/(sk-e) + 2*w.OrthogonalityBound() + 1e-14
}

func runOne(t testing.TB, tl *tally, newSearcher func() rankone.Searcher, opt Options, inst suite.Instance) {
	w, err := subspace.New(context.Background(), inst.Basis, subspace.Options{})
	if err != nil {
		tl.fail("the instance builds", "subspace.New: %v", err)
		return
	}
	slack := Slack(t, inst.Basis, w)
	ctx := context.Background()
	res, err := newSearcher().Search(ctx, w)
	if err != nil {
		tl.fail("Search succeeds", "Search: %v", err)
		return
	}
	checkResult(tl, w, inst, res, slack)
	if res.Status == rankone.Cancelled {
		tl.fail("not cancelled without cause", "status %v on an uncancelled context", res.Status)
	}
	if opt.Accuracy > 0 {
		// Claimed accuracy, widened only by the stored-versus-exact slack.
		if res.Upper > inst.Optimum+opt.Accuracy+slack {
			tl.fail("claimed accuracy", "Upper = %.6g, want ≤ d* + %g = %.6g", res.Upper, opt.Accuracy, inst.Optimum+opt.Accuracy)
		}
		if inst.X0 != nil && inst.Family == "planted" {
			// Derived: for a planted instance with an isolated zero, a witness
			// with d ≤ Accuracy lies within O(Accuracy) of ±(x₀, y₀).
			ov := math.Abs(dot(res.X, inst.X0)) * math.Abs(dot(res.Y, inst.Y0))
			if ov < 1-math.Max(1e-6, 100*opt.Accuracy) {
				tl.fail("planted point recovered", "overlap %.12f", ov)
			}
		}
	}
	// A rerun is bit-for-bit identical (Elapsed aside).
	again, err := newSearcher().Search(ctx, w)
	if err != nil {
		tl.fail("rerun succeeds", "second Search: %v", err)
		return
	}
	same(tl, "rerun is identical", res, again)
	for i, v := range opt.SameAs {
		r, err := v().Search(ctx, w)
		if err != nil {
			tl.fail("variants succeed", "variant %d: %v", i, err)
			return
		}
		same(tl, "variants are identical", res, r)
	}
	// An already-cancelled context: status Cancelled, ctx.Err(), valid bounds.
	cctx, cancel := context.WithCancel(ctx)
	cancel()
	cr, err := newSearcher().Search(cctx, w)
	if !errors.Is(err, context.Canceled) {
		tl.fail("cancelled search returns ctx.Err()", "error %v, want context.Canceled", err)
	}
	if cr.Status != rankone.Cancelled {
		tl.fail("cancelled search says so", "status %v, want cancelled", cr.Status)
	}
	checkResult(tl, w, inst, cr, slack)
}

func checkResult(tl *tally, w *subspace.Subspace, inst suite.Instance, res rankone.Result, slack float64) {
	if len(res.X) != w.Rows() || len(res.Y) != w.Cols() {
		tl.fail("witness has the right lengths", "lengths %d, %d; want %d, %d", len(res.X), len(res.Y), w.Rows(), w.Cols())
		return
	}
	// Unit witness: normalised in floating point, so ‖x‖ = 1 to within a few
	// ulps times the length (common practice).
	for _, v := range [][]float64{res.X, res.Y} {
		if nv := math.Sqrt(dot(v, v)); math.Abs(nv-1) > 1e-12 {
			tl.fail("witness is unit", "norm %v, want 1", nv)
		}
	}
	u, err := rankone.Verify(w, res.X, res.Y)
	if err != nil {
		tl.fail("witness verifies", "Verify: %v", err)
		return
	}
	if u != res.Upper {
		tl.fail("Upper is Verify at the witness", "Upper = %v, Verify at the witness = %v", res.Upper, u)
	}
	if !(res.Lower >= 0 && res.Lower <= res.Upper) {
		tl.fail("0 ≤ Lower ≤ Upper", "Lower %v, Upper %v", res.Lower, res.Upper)
	}
	if res.Lower > 0 && res.LowerBy == "" {
		tl.fail("a Lower names its argument", "Lower = %v but LowerBy is empty", res.Lower)
	}
	if !math.IsNaN(inst.Optimum) {
		// The instance's d* (closed form) against the certified interval,
		// allowing the stored-versus-exact slack (see Slack).
		if res.Lower > inst.Optimum+slack {
			tl.fail("Lower ≤ d*", "Lower = %.17g exceeds d* = %.17g (slack %.3g)", res.Lower, inst.Optimum, slack)
		}
		if res.Upper < inst.Optimum-slack {
			tl.fail("Upper ≥ d*", "Upper = %.17g below d* = %.17g (slack %.3g)", res.Upper, inst.Optimum, slack)
		}
	}
}

func same(tl *tally, what string, a, b rankone.Result) {
	eq := func(x, y []float64) bool {
		if len(x) != len(y) {
			return false
		}
		for i := range x {
			if math.Float64bits(x[i]) != math.Float64bits(y[i]) {
				return false
			}
		}
		return true
	}
	if !eq(a.X, b.X) || !eq(a.Y, b.Y) || a.Upper != b.Upper || a.Lower != b.Lower || a.Status != b.Status {
		tl.fail(what, "Upper %v vs %v, Lower %v vs %v, status %v vs %v", a.Upper, b.Upper, a.Lower, b.Lower, a.Status, b.Status)
	}
}

func dot(a, b []float64) float64 {
	var s float64
	for i := range a {
		s += a[i] * b[i]
	}
	return s
}
