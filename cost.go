package segre

import (
	"math"
	"time"

	"github.com/segre-lab/segre/sos"
	"github.com/segre-lab/segre/subspace"
)

// The cost model of Certify's ladder: the predicted wall time of each
// bound from its size, a power law a·N^p in the size N that drives the
// bound's cost, fitted to BenchmarkCostModel's measurements on this
// project's 2-core machine (Gaussian subspaces of dimension mn/2; the
// figures, the command and the date are in the README's section on
// Certify). A prediction only decides whether a bound is worth starting
// with the time left; a wrong one wastes time or skips a bound, it never
// changes what is proven (every bound is checked as always, and a bound
// stopped by the deadline keeps what it has proven, or returns the trivial
// bound).

// powerLaw is a·N^p seconds.
type powerLaw struct{ a, p float64 }

func (c powerLaw) at(n int) time.Duration {
	s := c.a * math.Pow(float64(n), c.p)
	if s > 1e6 {
		s = 1e6
	}
	return time.Duration(s * float64(time.Second))
}

var (
	// costLevelOne: the interior-point level one, N = m·n (SDP order).
	costLevelOne = powerLaw{3.8e-9, 4.27}
	// costLevelOneComplex: the complex (PPT) level one, N = m·n over C.
	costLevelOneComplex = powerLaw{4.7e-7, 3.84}
	// costFirstOrderStep: one iteration of the first-order level one (the
	// eigenpairs of one sign of a matrix of order N = m·n; anchored at
	// 32×32, 0.4 s an iteration, sos.BenchmarkFirstOrder).
	costFirstOrderStep = powerLaw{1.19e-8, 2.5}
	// costLevelTwo: the interior-point level two, N = m·n(n+1)/2.
	costLevelTwo = powerLaw{6.8e-11, 5.13}
	// costLevelTwoStep: one iteration of the first-order level two,
	// N = m·n(n+1)/2.
	costLevelTwoStep = powerLaw{1.4e-8, 2.46}
	// costTwoCopy: the two-copy eigenvalue bound, N = the order of its
	// matrix (sos.EigenBoundOrder).
	costTwoCopy = powerLaw{7.3e-11, 3.1}
)

// costBlockForm: the set-up of branch-and-bound (net.NewBlockForm, one
// product of N = d²·p²·k multiply-adds for the sphere side's dimension d,
// the other side p and k stored vectors, not interruptible), measured at
// 64×64 with k = 1024: 3.3 s.
var costBlockForm = powerLaw{2e-10, 1}

// firstOrderProbe is the number of first-order iterations
// BenchmarkCostModel times. The ladder starts the first-order level one
// when one iteration fits in the time left: it never starts an iteration
// that would end after the deadline, and keeps the best bound it has
// verified by then.
const firstOrderProbe = 20

func predictLevelOne(w *subspace.Subspace) time.Duration {
	if w.Field() == subspace.Complex {
		cm, cn := w.ComplexShape()
		return costLevelOneComplex.at(cm * cn)
	}
	return costLevelOne.at(w.Rows() * w.Cols())
}

func predictFirstOrderStep(w *subspace.Subspace) time.Duration {
	return costFirstOrderStep.at(w.Rows() * w.Cols())
}

func predictLevelTwo(w *subspace.Subspace) time.Duration {
	m, n := w.Rows(), w.Cols()
	return costLevelTwo.at(m * n * (n + 1) / 2)
}

func predictLevelTwoStep(w *subspace.Subspace) time.Duration {
	m, n := w.Rows(), w.Cols()
	return costLevelTwoStep.at(m * n * (n + 1) / 2)
}

func predictTwoCopy(w *subspace.Subspace) time.Duration {
	order, _ := sos.EigenBoundOrder(w)
	return costTwoCopy.at(order)
}

func predictBranchBoundSetup(w *subspace.Subspace) time.Duration {
	d, p := w.Rows(), w.Cols()
	if p < d {
		d, p = p, d
	}
	return costBlockForm.at(d * d * p * p * w.Stored().Count())
}
