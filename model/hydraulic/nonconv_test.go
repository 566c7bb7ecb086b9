package hydraulic

import (
	"errors"
	"math"
	"strings"
	"testing"

	"plumbline/model/network"
)

func TestNotConvergedWithinIterations(t *testing.T) {
	net := grid(8, 8, true, network.HazenWilliams)
	s, err := NewSolver(net, Options{MaxIterations: 2})
	if err != nil {
		t.Fatal(err)
	}
	sol, err := s.Solve(nil, nil)
	var nc *NotConvergedError
	if !errors.As(err, &nc) {
		t.Fatalf("error %v, want *NotConvergedError", err)
	}
	if nc.Iterations != 2 || len(nc.Oscillating) == 0 || sol == nil || sol.Converged {
		t.Errorf("got %+v (solution %v), want 2 iterations, links named, unconverged last iterate", nc, sol != nil)
	}
	for _, id := range nc.Oscillating {
		if _, ok := net.LinkIndex(id); !ok {
			t.Errorf("named link %q is not in the network", id)
		}
	}
	if !strings.Contains(err.Error(), nc.Oscillating[0]) {
		t.Errorf("message %q does not name %s", err, nc.Oscillating[0])
	}
}

// TestStatusOscillation: a flow-control valve and a pressure-sustaining
// valve whose statuses chase each other (found by a random search over
// small valve networks): the flow-control valve, fully open, carries
// more than its setting; held at its setting it would have to push
// water uphill; the sustaining valve's open state then reverses its
// flow. No consistent set of statuses exists, and the solver must say
// which links oscillate rather than loop or return a wrong answer.
func TestStatusOscillation(t *testing.T) {
	b := newBuilder().reservoir("R", 97.06092048595629).reservoir("R2", 70.09960270732408).
		junction("A", 3.5499769588734664, 15.530681482287346).
		junction("B", 1.0432405294229519, 10.059489442158537).
		junction("C", 9.9761252931308, 6.1865103522167875).
		junction("D", 0.5583187707906756, 15.637777480303903).
		junction("E", 9.417425943220985, 17.5645211182896).
		pipe("P0", "R", "A", 500, 200, 100).
		pipe("P1", "R2", "E", 500, 200, 100).
		link(valve("V0", network.PressureReducing, 37.57989304616795), "A", "B").
		link(valve("F2", network.FlowControl, 12.417065441580382), "C", "D").
		link(valve("V4", network.PressureSustaining, 32.38829759566666), "E", "C").
		link(valve("F5", network.FlowControl, 8.56582865779108), "B", "C").
		pipe("Pg", "D", "A", 300, 111.94238583927725, 100)
	net := b.net()
	s, err := NewSolver(net, Options{})
	if err != nil {
		t.Fatal(err)
	}
	sol, err := s.Solve(nil, nil)
	var nc *NotConvergedError
	if !errors.As(err, &nc) {
		t.Fatalf("error %v, want *NotConvergedError naming oscillating links", err)
	}
	if len(nc.Oscillating) == 0 || sol == nil {
		t.Fatalf("no links named: %+v", nc)
	}
	for _, id := range nc.Oscillating {
		if id != "V4" && id != "F2" {
			t.Errorf("named %s, want the oscillating valves V4 or F2", id)
		}
	}
	for i, h := range sol.Head {
		if math.IsNaN(h) {
			t.Errorf("NaN head at %s", net.Nodes[i].ID)
		}
	}
}

func TestDisconnectedJunction(t *testing.T) {
	// J2 hangs only on a closed pipe: its head is undefined.
	net := newBuilder().reservoir("R", 50).junction("J1", 0, 1).junction("J2", 0, 1).junction("J3", 0, 0).
		pipe("P1", "R", "J1", 100, 100, 100).pipe("P2", "J1", "J2", 100, 100, 100).pipe("P3", "J2", "J3", 100, 100, 100).net()
	net.Links[1].Status = network.Closed
	s, err := NewSolver(net, Options{})
	if err != nil {
		t.Fatal(err)
	}
	_, err = s.Solve(nil, nil)
	var de *DisconnectedError
	if !errors.As(err, &de) {
		t.Fatalf("error %v, want *DisconnectedError", err)
	}
	if de.Count != 2 || len(de.Junctions) != 2 || de.Junctions[0] != "J2" || de.Junctions[1] != "J3" {
		t.Errorf("disconnected %+v, want J2 and J3", de)
	}
	if !strings.Contains(err.Error(), "J2") {
		t.Errorf("message %q does not name J2", err)
	}
	// A junction with no link at all.
	net = newBuilder().reservoir("R", 50).junction("J1", 0, 1).junction("lonely", 0, 0).
		pipe("P1", "R", "J1", 100, 100, 100).net()
	s, _ = NewSolver(net, Options{})
	if _, err := s.Solve(nil, nil); !errors.As(err, &de) || de.Junctions[0] != "lonely" {
		t.Errorf("error %v, want lonely named", err)
	}
	// No source at all is refused at NewSolver.
	net = newBuilder().junction("J1", 0, 1).junction("J2", 0, 1).pipe("P", "J1", "J2", 10, 100, 100).net()
	if _, err := NewSolver(net, Options{}); err == nil {
		t.Errorf("network without source accepted")
	}
}

func TestBadInputNamesThePlace(t *testing.T) {
	net := newBuilder().reservoir("R", 50).junction("J", 0, 1).pipe("P-bad", "R", "J", 100, 0, 100).net()
	if _, err := NewSolver(net, Options{}); err == nil || !strings.Contains(err.Error(), "P-bad") {
		t.Errorf("error %v, want it to name P-bad", err)
	}
	net = newBuilder().reservoir("R", 50).junction("J", 0, 1).
		link(network.Link{ID: "PU-rising", Kind: network.Pump, Curve: [][2]float64{{0, 10}, {10, 20}}}, "R", "J").net()
	if _, err := NewSolver(net, Options{}); err == nil || !strings.Contains(err.Error(), "PU-rising") {
		t.Errorf("error %v, want it to name PU-rising", err)
	}
	net = newBuilder().reservoir("R", 50).junction("J", 0, 1).pipe("P", "R", "J", 100, 100, 100).net()
	s, _ := NewSolver(net, Options{})
	for _, c := range []*Conditions{
		{Demand: []float64{0}},
		{Demand: []float64{0, math.NaN()}},
		{ResistanceFactor: []float64{-1}},
		{LeakCoeff: []float64{0, 1}},
		{PumpSpeed: []float64{1, 2, 3}},
	} {
		if _, err := s.Solve(c, nil); err == nil {
			t.Errorf("conditions %+v accepted", c)
		}
	}
}

func TestRunawayJunctionsNamed(t *testing.T) {
	// J2 is fed only through a flow-control valve set to 2 L/s but takes
	// 5 L/s: no steady state exists; its head runs away and is named.
	net := newBuilder().reservoir("R", 50).junction("J1", 0, 1).junction("J2", 0, 5).
		pipe("P1", "R", "J1", 100, 150, 100).
		link(valve("FCV", network.FlowControl, 2), "J1", "J2").net()
	s, err := NewSolver(net, Options{})
	if err != nil {
		t.Fatal(err)
	}
	_, err = s.Solve(nil, nil)
	var nc *NotConvergedError
	if !errors.As(err, &nc) {
		t.Fatalf("error %v, want *NotConvergedError", err)
	}
	if len(nc.Runaway) != 1 || nc.Runaway[0] != "J2" {
		t.Errorf("runaway %v, want [J2] (%v)", nc.Runaway, err)
	}
}
