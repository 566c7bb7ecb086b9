package hydraulic

import (
	"math"
	"testing"

	"plumbline/model/netgen"
	"plumbline/model/network"
)

// TestGeneratedNetworksBalance solves towns from model/netgen and checks
// the two physical laws that need no reference: continuity at every
// junction to 1e-6 L/s and energy round every independent loop.
func TestGeneratedNetworksBalance(t *testing.T) {
	cases := []netgen.Options{
		{Junctions: 300, Seed: 1},
		{Junctions: 2500, Seed: 7, Zones: 3, Tank: true},
		{Junctions: 800, Seed: 3, Headloss: network.DarcyWeisbach},
	}
	for _, o := range cases {
		net, err := netgen.Town(o)
		if err != nil {
			t.Fatal(err)
		}
		s, sol := mustSolve(t, net, nil)
		t.Logf("town %d junctions seed %d: %d iterations, imbalance %.2g L/s", o.Junctions, o.Seed, sol.Iterations, sol.MaxImbalance)
		checkBalance(t, s, sol, 1e-6)
		checkLoops(t, s, sol, 1e-5)
		for i := range sol.Head {
			if math.IsNaN(sol.Head[i]) {
				t.Fatalf("NaN head at %s", net.Nodes[i].ID)
			}
		}
	}
	net, err := netgen.DemoTown()
	if err != nil {
		t.Fatal(err)
	}
	s, sol := mustSolve(t, net, nil)
	counts := map[LinkState]int{}
	for _, st := range sol.State {
		counts[st]++
	}
	t.Logf("demo town: %d iterations, states %v", sol.Iterations, counts)
	checkBalance(t, s, sol, 1e-6)
	checkLoops(t, s, sol, 1e-5)
}

// TestSparseAgainstDense solves the same networks with model/sparse and
// with gonum's dense Cholesky: the heads must agree to rounding.
func TestSparseAgainstDense(t *testing.T) {
	for _, net := range []*network.Network{grid(9, 7, true, network.HazenWilliams), sensNet(true), twoLoop()} {
		a, err := NewSolver(net, Options{})
		if err != nil {
			t.Fatal(err)
		}
		b, err := NewSolver(net, Options{dense: true})
		if err != nil {
			t.Fatal(err)
		}
		sa, err := a.Solve(nil, nil)
		if err != nil {
			t.Fatal(err)
		}
		sb, err := b.Solve(nil, nil)
		if err != nil {
			t.Fatal(err)
		}
		for i := range sa.Head {
			near(t, "head "+net.Nodes[i].ID+" sparse vs dense", sa.Head[i], sb.Head[i], 1e-8)
		}
		if sa.Iterations != sb.Iterations {
			t.Errorf("iterations sparse %d, dense %d", sa.Iterations, sb.Iterations)
		}
	}
}

// TestNoAllocationPerIteration: a cold solve (many iterations) and a warm
// solve (few) allocate the same: only the Solution, never inside the
// Newton loop.
func TestNoAllocationPerIteration(t *testing.T) {
	net := grid(20, 20, true, network.HazenWilliams)
	s, err := NewSolver(net, Options{})
	if err != nil {
		t.Fatal(err)
	}
	base, err := s.Solve(nil, nil)
	if err != nil {
		t.Fatal(err)
	}
	warm, _ := s.Solve(nil, base)
	if base.Iterations <= warm.Iterations {
		t.Fatalf("cold %d iterations, warm %d: need a difference to measure", base.Iterations, warm.Iterations)
	}
	cold := testing.AllocsPerRun(5, func() { s.Solve(nil, nil) })
	hot := testing.AllocsPerRun(5, func() { s.Solve(nil, base) })
	if cold != hot {
		t.Errorf("allocations: cold solve (%d iterations) %v, warm solve (%d iterations) %v: the iteration loop allocates", base.Iterations, cold, warm.Iterations, hot)
	}
}

// TestWarmEqualsCold: a warm start changes the path, not the answer.
func TestWarmEqualsCold(t *testing.T) {
	net, err := netgen.Town(netgen.Options{Junctions: 600, Seed: 5, Tank: true, Zones: 2})
	if err != nil {
		t.Fatal(err)
	}
	s, base := mustSolve(t, net, nil)
	c := &Conditions{Demand: make([]float64, len(net.Nodes))}
	for i := range net.Nodes {
		c.Demand[i] = 1.3 * net.Nodes[i].Demand
	}
	warm, err := s.Solve(c, base)
	if err != nil {
		t.Fatal(err)
	}
	cold, err := s.Solve(c, nil)
	if err != nil {
		t.Fatal(err)
	}
	if warm.Iterations >= cold.Iterations {
		t.Errorf("warm start took %d iterations, cold %d", warm.Iterations, cold.Iterations)
	}
	for i := range net.Nodes {
		near(t, "head at "+net.Nodes[i].ID+" warm vs cold", warm.Head[i], cold.Head[i], 1e-5)
	}
}
