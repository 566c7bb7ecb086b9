package hydraulic

import (
	"math"
	"reflect"
	"testing"
)

// A copy is its original field for field (reflect.DeepEqual sees the
// unexported conditions too), shares no memory with it, and warm-starts a
// solve exactly as the original does.
func TestCopyIntoIsTheSolution(t *testing.T) {
	net := twoLoop()
	s, err := NewSolver(net, Options{})
	if err != nil {
		t.Fatal(err)
	}
	sol, err := s.Solve(nil, nil)
	if err != nil {
		t.Fatal(err)
	}
	var old *Solution
	for range 2 { // into nothing, then into memory of the right size
		c := sol.CopyInto(old)
		if !reflect.DeepEqual(c, sol) {
			t.Fatal("copy differs from the solution")
		}
		c.Head[0] += 1
		if sol.Head[0] == c.Head[0] {
			t.Fatal("copy shares the solution's memory")
		}
		c.Head[0] -= 1
		old = c
	}
	a, err := s.Solve(nil, sol)
	if err != nil {
		t.Fatal(err)
	}
	b, err := s.Solve(nil, old)
	if err != nil {
		t.Fatal(err)
	}
	for i := range a.Head {
		if math.Float64bits(a.Head[i]) != math.Float64bits(b.Head[i]) {
			t.Fatalf("node %d: warm from the copy %v, from the original %v", i, b.Head[i], a.Head[i])
		}
	}
}
