package sdp

import (
	"context"
	"math"
	"testing"
)

// Lovász theta of the 5-cycle is √5 (Lovász, IEEE Trans. Inf. Theory 25,
// 1979): max ⟨J, X⟩ s.t. tr X = 1, X_ij = 0 on edges, X ⪰ 0.
func TestThetaC5(t *testing.T) {
	n := 5
	var c []Entry
	for i := 0; i < n; i++ {
		for j := i; j < n; j++ {
			c = append(c, Entry{I: i, J: j, V: 1})
		}
	}
	var tr []Entry
	for i := 0; i < n; i++ {
		tr = append(tr, Entry{I: i, J: i, V: 1})
	}
	p := Problem{Blocks: []int{n}, C: c, A: [][]Entry{tr}, B: []float64{1}}
	for i := 0; i < n; i++ {
		j := (i + 1) % n
		a, b := min(i, j), max(i, j)
		p.A = append(p.A, []Entry{{I: a, J: b, V: 0.5}})
		p.B = append(p.B, 0)
	}
	sol, err := Solve(context.Background(), p, Settings{})
	if err != nil || sol.Status != Optimal {
		t.Fatalf("status %v err %v", sol.Status, err)
	}
	if math.Abs(sol.Primal-math.Sqrt(5)) > 1e-7 || math.Abs(sol.Dual-math.Sqrt(5)) > 1e-7 {
		t.Errorf("theta(C5): primal %v dual %v, want √5", sol.Primal, sol.Dual)
	}
}

// Max-cut relaxation of the 5-cycle: max ¼⟨L, X⟩ s.t. X_ii = 1, X ⪰ 0,
// optimum (25 + 5√5)/8 (Goemans & Williamson, J. ACM 42, 1995).
func TestMaxCutC5(t *testing.T) {
	n := 5
	diag := make([]float64, n)
	var c []Entry
	for i := 0; i < n; i++ {
		j := (i + 1) % n
		diag[i]++
		diag[j]++
		c = append(c, Entry{I: min(i, j), J: max(i, j), V: -0.25})
	}
	for i := 0; i < n; i++ {
		c = append(c, Entry{I: i, J: i, V: diag[i] / 4})
	}
	p := Problem{Blocks: []int{n}, C: c}
	for i := 0; i < n; i++ {
		p.A = append(p.A, []Entry{{I: i, J: i, V: 1}})
		p.B = append(p.B, 1)
	}
	sol, err := Solve(context.Background(), p, Settings{})
	if err != nil || sol.Status != Optimal {
		t.Fatalf("status %v err %v", sol.Status, err)
	}
	want := (25 + 5*math.Sqrt(5)) / 8
	if math.Abs(sol.Primal-want) > 1e-7 || math.Abs(sol.Dual-want) > 1e-7 {
		t.Errorf("max-cut C5: primal %v dual %v, want %v", sol.Primal, sol.Dual, want)
	}
}
