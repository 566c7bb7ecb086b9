package detect

import (
	"errors"
	"fmt"
	"math"
	"testing"

	"plumbline/model/hydraulic"
	"plumbline/model/netgen"
	"plumbline/model/network"
)

// TestBridgeResponse: on a generated town, a pipe passiveBridge accepts
// is one whose closure leaves junctions without a source, as the solver's
// own connectivity check says (*hydraulic.DisconnectedError; an
// independent search); most such pipes are accepted (the town has no
// leaks, so only pressure valves beyond one may keep it out); and for
// each accepted pipe the heads that full solves give at the loggers with
// its resistance raised (open fractions 60%, 10% and 1%) are the
// signature's (φ−1)·d head/d ln φ, to 1e-5 m (the solves meet the
// solver's tolerances, which leave heads far closer than that), and no
// flow moves by more than the flow tolerance (1e-3 L/s: continuity fixes
// them beyond the pipe, and nothing else changes).
func TestBridgeResponse(t *testing.T) {
	net, err := netgen.Town(netgen.Options{Junctions: 1500, Zones: 1, Seed: 4})
	if err != nil {
		t.Fatal(err)
	}
	sensors := benchSensors(net, 30)
	d, err := New(Config{Network: net, Sensors: sensors, Zones: benchZones(net, sensors)})
	if err != nil {
		t.Fatal(err)
	}
	ev := loggerEvidence(d)
	sg, err := d.signatures(ev)
	if err != nil {
		t.Fatal(err)
	}
	status := make([]network.Status, len(net.Links))
	cut, accepted, compared := 0, 0, 0
	for l := range net.Links {
		if net.Links[l].Kind != network.Pipe {
			continue
		}
		for k := range status {
			status[k] = net.Links[k].Status
		}
		status[l] = network.Closed
		c := sg.cond
		c.Status = status
		_, err := d.solver.Solve(&c, sg.ref)
		var de *hydraulic.DisconnectedError
		isCut := errors.As(err, &de)
		ok := d.passiveBridge(l, sg.ref)
		if isCut {
			cut++
		}
		if !ok {
			continue
		}
		accepted++
		if !isCut {
			t.Fatalf("pipe %s accepted as a bridge, but closing it cuts nothing off", net.Links[l].ID)
		}
		if compared >= 40 {
			continue
		}
		compared++
		rs := d.responses(ev, sg)
		for _, f := range []float64{0.6, 0.1, 0.01} {
			want, err := rs.resistance(l, 1/(f*f))
			if err != nil {
				t.Fatal(err)
			}
			got := bridgeResponse(sg, l, 1/(f*f))
			for k := range want {
				if math.Abs(got[k]-want[k]) > 1e-5 {
					t.Fatalf("pipe %s at %g open: logger %s %.9g m, full solve %.9g m", net.Links[l].ID, f, d.sens[ev.sensors[k]].s.ID, got[k], want[k])
				}
			}
			for k := range d.trial.Flow {
				if math.Abs(d.trial.Flow[k]-sg.ref.Flow[k]) > 1e-3 {
					t.Fatalf("pipe %s at %g open: link %s flow moved %.3g L/s", net.Links[l].ID, f, net.Links[k].ID, d.trial.Flow[k]-sg.ref.Flow[k])
				}
			}
		}
	}
	t.Logf("%d pipes cut a part off when closed, %d accepted as passive bridges, %d compared with full solves", cut, accepted, compared)
	if cut < 50 || float64(accepted) < 0.8*float64(cut) || compared < 20 {
		t.Errorf("%d cut, %d accepted, %d compared: want most of at least 50 recognised", cut, accepted, compared)
	}
}

// TestPassiveBridgeByHand: a loop fed by one main, with a branch of two
// pipes off it. The main and the branch pipes are bridges into parts
// without a source; the loop's pipes are not. A leak beyond a pipe, or a
// pressure-reducing valve beyond it, makes the heads there matter to the
// flows, and the pipe is no longer passive; a closed pipe in the loop
// does not make the others bridges unless it leaves them the only way.
func TestPassiveBridgeByHand(t *testing.T) {
	build := func(leakAtEnd, prv, closeLoop bool) (*Detector, *hydraulic.Solution) {
		nodes := []network.Node{{ID: "R", Kind: network.Reservoir, Elevation: 60, Head: 60}}
		for i := 1; i <= 5; i++ {
			nodes = append(nodes, network.Node{ID: fmt.Sprintf("J%d", i), Kind: network.Junction, Elevation: 10, Demand: 1})
		}
		if leakAtEnd {
			nodes[5].LeakCoeff, nodes[5].LeakExponent = 0.05, 1.1
		}
		pipe := func(id string, a, b int) network.Link {
			return network.Link{ID: id, Kind: network.Pipe, From: a, To: b, Length: 200, Diameter: 150, Roughness: 110}
		}
		links := []network.Link{pipe("main", 0, 1), pipe("L12", 1, 2), pipe("L23", 2, 3), pipe("L31", 3, 1), pipe("branch", 3, 4), pipe("tail", 4, 5)}
		if prv {
			links[5] = network.Link{ID: "tail", Kind: network.Valve, Valve: network.PressureReducing, Setting: 20, HasSetting: true, From: 4, To: 5, Diameter: 150}
		}
		if closeLoop {
			links[3].Status = network.Closed
		}
		net := network.New(nodes, links)
		d, err := New(Config{Network: net})
		if err != nil {
			t.Fatal(err)
		}
		s, err := hydraulic.NewSolver(net, hydraulic.Options{})
		if err != nil {
			t.Fatal(err)
		}
		sol, err := s.Solve(nil, nil)
		if err != nil {
			t.Fatal(err)
		}
		return d, sol
	}
	for _, c := range []struct {
		name                 string
		leak, prv, closeLoop bool
		want                 map[string]bool
	}{
		{"plain", false, false, false, map[string]bool{"main": true, "L12": false, "L23": false, "L31": false, "branch": true, "tail": true}},
		{"leak at the end", true, false, false, map[string]bool{"main": false, "L12": false, "branch": false, "tail": false}},
		{"valve at the end", false, true, false, map[string]bool{"main": false, "branch": false, "L23": false}},
		{"loop closed", false, false, true, map[string]bool{"main": true, "L12": true, "L23": true, "L31": false, "branch": true}},
	} {
		d, sol := build(c.leak, c.prv, c.closeLoop)
		for id, want := range c.want {
			l, ok := d.net.LinkIndex(id)
			if !ok {
				t.Fatalf("no link %s", id)
			}
			if got := d.passiveBridge(l, sol); got != want {
				t.Errorf("%s: pipe %s passive bridge %v, want %v", c.name, id, got, want)
			}
		}
	}
}
