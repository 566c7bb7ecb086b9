package hydraulic

import (
	"math"
	"testing"

	"plumbline/model/network"
)

func TestSinglePipeClosedForm(t *testing.T) {
	// Reservoir at 50 m, one Hazen-Williams pipe, one junction taking
	// 20 L/s: H = 50 − h(0.02 m³/s) = 50 − 3.819 m (hand value in
	// TestHazenWilliamsHandbook), energy equation of the pipe.
	net := newBuilder().reservoir("R", 50).junction("J", 0, 20).pipe("P", "R", "J", 1000, 200, 100).net()
	_, sol := mustSolve(t, net, nil)
	near(t, "flow", sol.Flow[0], 20, 1e-9)
	near(t, "head", sol.Head[1], 50-3.819, 0.001)
	near(t, "head vs law", sol.Head[1], 50-HazenWilliamsLoss(0.02, 1000, 0.2, 100), 1e-4)
	near(t, "pressure", sol.Pressure[1], sol.Head[1], 0)
	near(t, "reservoir supply", sol.Demand[0], -20, 1e-9)
	near(t, "velocity", sol.Velocity[0], 0.02/(math.Pi*0.01), 1e-9)
	if !sol.Converged || sol.State[0] != Open {
		t.Errorf("converged %v state %v", sol.Converged, sol.State[0])
	}
}

func TestSinglePipeDarcyWeisbach(t *testing.T) {
	net := newBuilder().reservoir("R", 50).junction("J", 0, 15).pipe("P", "R", "J", 800, 150, 0.26).net()
	net.Headloss = network.DarcyWeisbach
	_, sol := mustSolve(t, net, nil)
	// Energy equation with the Darcy-Weisbach law (Colebrook friction).
	want := 50 - DarcyWeisbachLoss(0.015, 800, 0.15, 0.26e-3, network.DefaultViscosity)
	near(t, "head", sol.Head[1], want, 1e-4)
}

func TestSeriesAndParallel(t *testing.T) {
	// Series: losses add (energy equation link by link).
	net := newBuilder().reservoir("R", 60).junction("A", 5, 4).junction("B", 3, 6).
		pipe("P1", "R", "A", 500, 150, 120).pipe("P2", "A", "B", 400, 100, 100).net()
	_, sol := mustSolve(t, net, nil)
	hA := 60 - HazenWilliamsLoss(0.010, 500, 0.15, 120)
	hB := hA - HazenWilliamsLoss(0.006, 400, 0.10, 100)
	near(t, "series head A", sol.Head[1], hA, 1e-4)
	near(t, "series head B", sol.Head[2], hB, 1e-4)
	// Parallel: equal head loss, flows split as Q_i ∝ (C_i^1.852
	// D_i^4.8704/L_i)^(1/1.852) (Hazen-Williams), sum = demand.
	net = newBuilder().reservoir("R", 40).junction("J", 0, 30).
		pipe("P1", "R", "J", 600, 200, 130).pipe("P2", "R", "J", 900, 150, 90).net()
	_, sol = mustSolve(t, net, nil)
	k := func(l, d, c float64) float64 { return math.Pow(math.Pow(c, 1.852)*math.Pow(d, 4.8704)/l, 1/1.852) }
	k1, k2 := k(600, 0.2, 130), k(900, 0.15, 90)
	near(t, "parallel Q1", sol.Flow[0], 30*k1/(k1+k2), 1e-3)
	near(t, "parallel Q2", sol.Flow[1], 30*k2/(k1+k2), 1e-3)
	near(t, "parallel equal loss", sol.Headloss[0], sol.Headloss[1], 1e-9)
}

func TestGridBalance(t *testing.T) {
	for _, f := range []network.HeadlossFormula{network.HazenWilliams, network.DarcyWeisbach} {
		net := grid(12, 9, true, f)
		s, sol := mustSolve(t, net, nil)
		t.Logf("%v: %d iterations, max dQ %.2g, imbalance %.2g", f, sol.Iterations, sol.MaxFlowChange, sol.MaxImbalance)
		checkBalance(t, s, sol, 1e-6)
		checkLoops(t, s, sol, 1e-5)
	}
}
