package hydraulic

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"plumbline/model/network"
)

// randomValveNetwork is a small network of two reservoirs and five
// junctions joined by pipes, check valves and every kind of control
// valve in random places, with random settings (many such networks
// have no steady state at all).
func randomValveNetwork(r *rand.Rand) *network.Network {
	b := newBuilder().reservoir("R", 60+40*r.Float64()).reservoir("R2", 40+60*r.Float64())
	for i := 0; i < 5; i++ {
		b.junction(string(rune('A'+i)), 10*r.Float64(), 20*r.Float64())
	}
	names := []string{"A", "B", "C", "D", "E"}
	b.pipe("P0", "R", "A", 500, 200, 100)
	b.pipe("P1", "R2", "E", 500, 200, 100)
	for k := 0; k < 7; k++ {
		f, to := names[r.IntN(5)], names[r.IntN(5)]
		if f == to {
			continue
		}
		id := fmt.Sprintf("L%d", k)
		switch r.IntN(5) {
		case 0:
			b.link(valve(id, network.PressureReducing, 20+30*r.Float64()), f, to)
		case 1:
			b.link(valve(id, network.PressureSustaining, 20+30*r.Float64()), f, to)
		case 2:
			b.link(network.Link{ID: id, Kind: network.Pipe, Length: 300, Diameter: 150, Roughness: 100, CheckValve: true}, f, to)
		case 3:
			b.link(valve(id, network.FlowControl, 20*r.Float64()), f, to)
		default:
			b.pipe(id, f, to, 300, 100+100*r.Float64(), 100)
		}
	}
	return b.net()
}

// TestRandomValveNetworks: on random small valve networks every Solve
// either fails with a typed error (disconnected, not converged) or
// returns a solution that obeys continuity (Kirchhoff), the energy
// equation of every open link, and the physics of each link's state:
// shut check valves face a reverse head, open ones carry forward flow;
// active pressure valves hold their node at the setting with forward
// flow and a head drop; active flow-control valves carry their setting
// down a head drop.
func TestRandomValveNetworks(t *testing.T) {
	r := rand.New(rand.NewPCG(7, 11))
	counts := map[string]int{}
	for trial := 0; trial < 400; trial++ {
		net := randomValveNetwork(r)
		s, err := NewSolver(net, Options{})
		if err != nil {
			t.Fatalf("trial %d: %v", trial, err)
		}
		sol, err := s.Solve(nil, nil)
		var nc *NotConvergedError
		var de *DisconnectedError
		switch {
		case errors.As(err, &de):
			counts["disconnected"]++
			continue
		case errors.As(err, &nc):
			counts["not converged"]++
			if sol == nil {
				t.Errorf("trial %d: no last iterate with %v", trial, err)
			}
			continue
		case err != nil:
			t.Errorf("trial %d: untyped error %v", trial, err)
			continue
		}
		counts["converged"]++
		checkBalance(t, s, sol, 1e-6)
		const qtol, htol = 1e-3, 1e-3
		for k, l := range net.Links {
			q, hf, ht := sol.Flow[k], sol.Head[l.From], sol.Head[l.To]
			where := fmt.Sprintf("trial %d link %s (%v %v)", trial, l.ID, l.Valve, sol.State[k])
			switch sol.State[k] {
			case Open:
				h, _, _ := s.lawOpen(k, q, sol)
				if math.Abs(h-(hf-ht)) > 1e-4 {
					t.Errorf("%s: energy equation off by %.3g m", where, h-(hf-ht))
				}
				if (l.CheckValve || l.Valve == network.PressureReducing || l.Valve == network.PressureSustaining) && q < -qtol {
					t.Errorf("%s: open with reverse flow %g", where, q)
				}
			case CheckShut:
				if math.Abs(q) > 1e-6 {
					t.Errorf("%s: shut with flow %g", where, q)
				}
			case Active:
				switch l.Valve {
				case network.PressureReducing:
					hset := net.Nodes[l.To].Elevation + l.Setting
					if math.Abs(ht-hset) > 1e-6 || q < -qtol || hf < ht-htol {
						t.Errorf("%s: outlet %g vs set %g, flow %g, inlet %g", where, ht, hset, q, hf)
					}
				case network.PressureSustaining:
					hset := net.Nodes[l.From].Elevation + l.Setting
					if math.Abs(hf-hset) > 1e-6 || q < -qtol || hf < ht-htol {
						t.Errorf("%s: inlet %g vs set %g, flow %g, outlet %g", where, hf, hset, q, ht)
					}
				case network.FlowControl:
					if math.Abs(q-l.Setting) > 1e-6 || hf < ht-htol {
						t.Errorf("%s: flow %g vs set %g, head drop %g", where, q, l.Setting, hf-ht)
					}
				}
			}
		}
	}
	t.Logf("outcomes %v", counts)
	if counts["converged"] < 100 {
		t.Errorf("only %d of 400 random networks converged", counts["converged"])
	}
}
