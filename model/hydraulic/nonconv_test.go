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

// TestStatusOscillation: three pressure-sustaining valves, a
// flow-control valve and a check valve among five junctions, whose
// statuses keep changing (found by a random search over small valve
// networks; it oscillates with the default options and also with ten
// times the head hysteresis and 20 allowed changes). The solver must
// stop and name links that oscillate rather than loop or return a wrong
// answer.
func TestStatusOscillation(t *testing.T) {
	b := newBuilder().reservoir("R", 86.59749200109297).reservoir("R2", 74.96629984888897).
		junction("A", 1.579395374816862, 7.57206142289882).
		junction("B", 5.816497181311847, 13.482469057801808).
		junction("C", 2.3141934937643205, 9.455921003989264).
		junction("D", 3.1049655396347298, 19.491338386621393).
		junction("E", 1.8895594873851607, 2.8565937988716694).
		pipe("P0", "R", "A", 500, 200, 100).
		pipe("P1", "R2", "E", 500, 200, 100).
		pipe("Pa", "E", "A", 300, 122.90239337926764, 100).
		pipe("Pb", "A", "E", 300, 102.75134398763096, 100).
		link(valve("V2", network.PressureSustaining, 47.131561833564476), "E", "D").
		link(network.Link{ID: "C3", Kind: network.Pipe, Length: 300, Diameter: 150, Roughness: 100, CheckValve: true}, "C", "B").
		link(valve("V4", network.PressureSustaining, 31.920418335244598), "D", "A").
		link(valve("F5", network.FlowControl, 5.612956150580713), "D", "C").
		link(valve("V6", network.PressureSustaining, 47.02479070938509), "E", "B")
	net := b.net()
	for _, opt := range []Options{{}, {HeadHysteresis: 1e-3, MaxStatusChanges: 20}} {
		s, err := NewSolver(net, opt)
		if err != nil {
			t.Fatal(err)
		}
		sol, err := s.Solve(nil, nil)
		var nc *NotConvergedError
		if !errors.As(err, &nc) {
			t.Fatalf("options %+v: error %v, want *NotConvergedError naming oscillating links", opt, err)
		}
		if len(nc.Oscillating) == 0 || sol == nil || sol.Converged {
			t.Fatalf("options %+v: no links named or no unconverged solution: %+v", opt, nc)
		}
		for _, id := range nc.Oscillating {
			k, ok := net.LinkIndex(id)
			if !ok || (net.Links[k].Kind != network.Valve && !net.Links[k].CheckValve) {
				t.Errorf("named %s, want one of the valves", id)
			}
		}
		for i, h := range sol.Head {
			if math.IsNaN(h) {
				t.Errorf("NaN head at %s", net.Nodes[i].ID)
			}
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
		link(valve("V-flow", network.FlowControl, 2), "J1", "J2").net()
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
