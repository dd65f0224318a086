package sdp

import (
	"context"
	"errors"
	"math"
	"math/rand/v2"
	"runtime"
	"testing"
)

// theta5 and maxcut5 are the problems of TestThetaC5 and TestMaxCutC5 (the
// Lovász theta of the 5-cycle, √5, and its max-cut relaxation,
// (25 + 5√5)/8), with their entries in block blk.
func theta5(blk int) Problem {
	n := 5
	p := Problem{Blocks: []int{n}}
	tr := []Entry{}
	for i := 0; i < n; i++ {
		for j := i; j < n; j++ {
			p.C = append(p.C, Entry{Block: blk, I: i, J: j, V: 1})
		}
		tr = append(tr, Entry{Block: blk, I: i, J: i, V: 1})
	}
	p.A, p.B = append(p.A, tr), append(p.B, 1)
	for i := 0; i < n; i++ {
		j := (i + 1) % n
		p.A = append(p.A, []Entry{{Block: blk, I: min(i, j), J: max(i, j), V: 0.5}})
		p.B = append(p.B, 0)
	}
	return p
}

func maxcut5(blk int) Problem {
	n := 5
	p := Problem{Blocks: []int{n}}
	for i := 0; i < n; i++ {
		j := (i + 1) % n
		p.C = append(p.C, Entry{Block: blk, I: min(i, j), J: max(i, j), V: -0.25}, Entry{Block: blk, I: i, J: i, V: 0.5})
		p.A = append(p.A, []Entry{{Block: blk, I: i, J: i, V: 1}})
		p.B = append(p.B, 1)
	}
	return p
}

// join puts p and q side by side: q's entries moved to block len(p.Blocks)
// (asBlocks) or shifted by p's order inside one block of the summed order.
func join(p, q Problem, asBlocks bool) Problem {
	shift := func(e Entry) Entry {
		if asBlocks {
			e.Block += len(p.Blocks)
		} else {
			e.Block, e.I, e.J = 0, e.I+p.Blocks[0], e.J+p.Blocks[0]
		}
		return e
	}
	out := Problem{C: append([]Entry(nil), p.C...), A: append([][]Entry(nil), p.A...), B: append(append([]float64(nil), p.B...), q.B...)}
	if asBlocks {
		out.Blocks = append(append([]int(nil), p.Blocks...), q.Blocks...)
	} else {
		out.Blocks = []int{p.Blocks[0] + q.Blocks[0]}
	}
	for _, e := range q.C {
		out.C = append(out.C, shift(e))
	}
	for _, a := range q.A {
		var row []Entry
		for _, e := range a {
			row = append(row, shift(e))
		}
		out.A = append(out.A, row)
	}
	return out
}

// Two independent problems in two blocks have the sum of their optima,
// √5 + (25 + 5√5)/8 (the published values of TestThetaC5 and
// TestMaxCutC5; the blocks do not interact), and the same two problems in
// one block of order 10 (zero between them) have the same optimum
// (derived: a block-diagonal X is feasible for the one-block problem, and
// the diagonal blocks of any feasible X are feasible for the two-block
// one, with the same objective). The same equivalence holds with a
// constraint coupling the blocks, 5·(X₁)₀₀ − (X₂)₀₀ = 0 (feasible:
// X₁ = I/5, X₂ = I), whose optimum is not known in closed form: there the
// two forms are compared with each other.
func TestTwoBlocks(t *testing.T) {
	want := math.Sqrt(5) + (25+5*math.Sqrt(5))/8
	coupled := map[bool]float64{}
	for _, asBlocks := range []bool{true, false} {
		p := join(theta5(0), maxcut5(0), asBlocks)
		sol, err := Solve(context.Background(), p, Settings{})
		if err != nil || sol.Status != Optimal {
			t.Fatalf("blocks=%v: status %v err %v", asBlocks, sol.Status, err)
		}
		if math.Abs(sol.Primal-want) > 1e-7 || math.Abs(sol.Dual-want) > 1e-7 {
			t.Errorf("blocks=%v: primal %v dual %v, want %v", asBlocks, sol.Primal, sol.Dual, want)
		}
		if len(sol.X) != len(p.Blocks) || len(sol.Z) != len(p.Blocks) || sol.X[len(sol.X)-1].SymmetricDim() != p.Blocks[len(p.Blocks)-1] {
			t.Errorf("blocks=%v: solution blocks do not match the problem's", asBlocks)
		}
		second := Entry{Block: 1, I: 0, J: 0, V: -1}
		if !asBlocks {
			second = Entry{I: 5, J: 5, V: -1}
		}
		p.A = append(p.A, []Entry{{I: 0, J: 0, V: 5}, second})
		p.B = append(p.B, 0)
		sol, err = Solve(context.Background(), p, Settings{})
		if err != nil || sol.Status != Optimal {
			t.Fatalf("coupled, blocks=%v: status %v err %v", asBlocks, sol.Status, err)
		}
		if sol.Primal > want+1e-7 {
			t.Errorf("coupled, blocks=%v: %v above the uncoupled optimum %v", asBlocks, sol.Primal, want)
		}
		coupled[asBlocks] = sol.Primal
	}
	// Both solves stop at a relative gap of 1e-9 (Settings' default).
	if math.Abs(coupled[true]-coupled[false]) > 1e-7 {
		t.Errorf("coupled: two blocks %v, one block %v", coupled[true], coupled[false])
	}
}

// randomSparse is a feasible and bounded random SDP with one block of
// order n and k ≤ n(n−1)/2 sparse constraints: tr X = 1, then k−1
// constraints v_t X_{u_t} + w_t X_{u_{t+1}} = 0 over distinct off-diagonal
// positions u_0, …, u_{k−1} in random order (linearly independent: each
// adds a new position; and independent of the trace, which has no
// off-diagonal entry), so X₀ = I/n is strictly feasible; a random
// objective.
func randomSparse(n, k int, seed uint64) Problem {
	rng := rand.New(rand.NewPCG(seed, 1))
	p := Problem{Blocks: []int{n}}
	tr := []Entry{}
	var pos [][2]int
	for i := 0; i < n; i++ {
		tr = append(tr, Entry{I: i, J: i, V: 1})
		for j := i; j < n; j++ {
			p.C = append(p.C, Entry{I: i, J: j, V: rng.NormFloat64()})
			if j > i {
				pos = append(pos, [2]int{i, j})
			}
		}
	}
	rng.Shuffle(len(pos), func(a, b int) { pos[a], pos[b] = pos[b], pos[a] })
	p.A, p.B = append(p.A, tr), append(p.B, 1)
	for t := 0; len(p.A) < k; t++ {
		u, w := pos[t], pos[t+1]
		p.A = append(p.A, []Entry{{I: u[0], J: u[1], V: rng.NormFloat64()}, {I: w[0], J: w[1], V: rng.NormFloat64()}})
		p.B = append(p.B, 0)
	}
	return p
}

// The result does not depend on the number of goroutines: the Schur
// complement's rows and its factorisation's column strips are split
// between GOMAXPROCS workers (k = 400 is enough for both to split), and
// every number is bit for bit the same with 1, 2 and 3.
func TestSameResultAnyWorkers(t *testing.T) {
	p := randomSparse(30, 400, 3)
	var ref *Solution
	defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(0))
	for _, procs := range []int{1, 2, 3} {
		runtime.GOMAXPROCS(procs)
		sol, err := Solve(context.Background(), p, Settings{})
		if err != nil {
			t.Fatal(err)
		}
		if ref == nil {
			ref = sol
			if sol.Status != Optimal {
				t.Fatalf("status %v", sol.Status)
			}
			continue
		}
		same := sol.Primal == ref.Primal && sol.Dual == ref.Dual && sol.Iterations == ref.Iterations
		for i := range sol.Y {
			same = same && sol.Y[i] == ref.Y[i]
		}
		for b := range sol.X {
			x, rx := sol.X[b].RawSymmetric().Data, ref.X[b].RawSymmetric().Data
			for i := range x {
				same = same && x[i] == rx[i]
			}
		}
		if !same {
			t.Errorf("GOMAXPROCS=%d: a different result than with 1", procs)
		}
	}
}

// Inconsistent problems are refused with ErrShape and problems whose dense
// storage would not fit in memory with ErrTooLarge, never a panic.
func TestCheckRefuses(t *testing.T) {
	good := theta5(0)
	cases := map[string]func(p *Problem){
		"no blocks":       func(p *Problem) { p.Blocks = nil },
		"zero order":      func(p *Problem) { p.Blocks = []int{0} },
		"negative order":  func(p *Problem) { p.Blocks = []int{-5} },
		"block index":     func(p *Problem) { p.A[1][0].Block = 1 },
		"negative block":  func(p *Problem) { p.C[0].Block = -1 },
		"lower triangle":  func(p *Problem) { p.A[1][0].I, p.A[1][0].J = 1, 0 },
		"outside block":   func(p *Problem) { p.C[0].J = 5 },
		"NaN entry":       func(p *Problem) { p.A[0][0].V = math.NaN() },
		"Inf objective":   func(p *Problem) { p.C[0].V = math.Inf(1) },
		"NaN rhs":         func(p *Problem) { p.B[0] = math.NaN() },
		"rhs count":       func(p *Problem) { p.B = p.B[1:] },
		"negative column": func(p *Problem) { p.C[0].I = -1 },
	}
	for name, spoil := range cases {
		p := join(good, Problem{Blocks: []int{1}}, true) // deep-enough copy
		p.Blocks = p.Blocks[:1]
		spoil(&p)
		if _, err := Solve(context.Background(), p, Settings{}); !errors.Is(err, ErrShape) {
			t.Errorf("%s: err %v", name, err)
		}
	}
	for name, blocks := range map[string][]int{"one huge block": {1 << 30}, "many blocks": {1 << 14, 1 << 14, 1 << 14, 1 << 14, 1 << 14}} {
		p := Problem{Blocks: blocks, A: [][]Entry{{{I: 0, J: 0, V: 1}}}, B: []float64{1}}
		if _, err := Solve(context.Background(), p, Settings{}); !errors.Is(err, ErrTooLarge) {
			t.Errorf("%s: err %v", name, err)
		}
	}
}
