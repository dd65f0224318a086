package sdp

import (
	"context"
	"testing"
)

// Infeasible and unbounded problems are reported, not looped on.
// Primal infeasible (derived): X ⪰ 0 forces X_00 ≥ 0, but X_00 = −1 is asked.
// Dual infeasible (primal unbounded, derived): maximise X_01 subject only to
// X_00 = 1; X = [[1, t], [t, t²]] is PSD for every t.
func TestInfeasibleDetected(t *testing.T) {
	cases := []struct {
		name string
		p    Problem
	}{
		{"primal-infeasible", Problem{Blocks: []int{2}, C: []Entry{{I: 0, J: 0, V: 1}}, A: [][]Entry{{{I: 0, J: 0, V: 1}}}, B: []float64{-1}}},
		{"unbounded", Problem{Blocks: []int{2}, C: []Entry{{I: 0, J: 1, V: 0.5}}, A: [][]Entry{{{I: 0, J: 0, V: 1}}}, B: []float64{1}}},
	}
	for _, c := range cases {
		sol, err := Solve(context.Background(), c.p, Settings{MaxIter: 200})
		if err != nil {
			t.Fatal(err)
		}
		if sol.Status == Optimal {
			t.Errorf("%s: reported optimal (primal %v, dual %v)", c.name, sol.Primal, sol.Dual)
		}
		if sol.Status != Infeasible {
			t.Errorf("%s: status %v after %d iterations, want infeasible", c.name, sol.Status, sol.Iterations)
		}
	}
}
