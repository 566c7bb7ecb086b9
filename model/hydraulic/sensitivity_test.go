package hydraulic

import (
	"math"
	"testing"

	"plumbline/model/netgen"
	"plumbline/model/network"
)

func sensNet(withPRV bool) *network.Network {
	b := newBuilder().reservoir("R", 80).
		junction("A", 10, 2).junction("B", 12, 3).junction("C", 8, 4).
		junction("D", 5, 1).junction("E", 6, 2).junction("F", 4, 3).
		pipe("P1", "R", "A", 400, 250, 110).
		pipe("P2", "A", "B", 300, 150, 100).
		pipe("P3", "B", "C", 350, 150, 90).
		pipe("P4", "C", "A", 500, 200, 120)
	if withPRV {
		b.link(valve("V", network.PressureReducing, 35), "B", "D")
	} else {
		b.pipe("V", "B", "D", 200, 150, 100)
	}
	b.pipe("P5", "D", "E", 300, 150, 100).
		pipe("P6", "E", "F", 250, 100, 100).
		pipe("P7", "D", "F", 400, 100, 130)
	n := b.net()
	n.Nodes[5].LeakCoeff, n.Nodes[5].LeakExponent = 0.05, 1.1 // a background leak at E
	n.Nodes[6].LeakCoeff, n.Nodes[6].LeakExponent = 0.3, 0.5  // an orifice leak at F (solved in flow form)
	return n
}

// TestSensitivitiesAgainstFiniteDifferences checks the adjoint
// derivatives against central finite differences of full solves (the
// check of gonum optimize/functions: derivatives against differences).
func TestSensitivitiesAgainstFiniteDifferences(t *testing.T) {
	for variant, withPRV := range []bool{false, true, false} {
		net := sensNet(withPRV)
		if variant == 2 {
			// Darcy-Weisbach pipes and a pump in place of the feed main.
			net.Headloss = network.DarcyWeisbach
			for k := range net.Links {
				net.Links[k].Roughness = 0.1
			}
			net.Links[0] = network.Link{ID: "PU", Kind: network.Pump, From: 0, To: 1, Curve: [][2]float64{{0, 30}, {20, 27}, {40, 18}}}
		}
		s, err := NewSolver(net, Options{FlowTolerance: 1e-10, ImbalanceTolerance: 1e-12})
		if err != nil {
			t.Fatal(err)
		}
		base, err := s.Solve(nil, nil)
		if err != nil {
			t.Fatal(err)
		}
		if withPRV {
			stateOf(t, base, 4, Active)
		}
		if variant == 2 {
			stateOf(t, base, 0, Open)
			if base.Flow[0] < 1 {
				t.Fatalf("pump flow %g: the variant does not exercise the pump", base.Flow[0])
			}
		}
		obs := []Observation{NodeObservation(3), NodeObservation(5), NodeObservation(6), NodeObservation(0),
			LinkObservation(1), LinkObservation(4), LinkObservation(6), LinkObservation(0)}
		sens, err := s.Sensitivities(base, obs)
		if err != nil {
			t.Fatal(err)
		}
		value := func(sol *Solution, o Observation) float64 {
			if o.Node >= 0 {
				return sol.Head[o.Node]
			}
			return sol.Flow[o.Link]
		}
		nn, nl := len(net.Nodes), len(net.Links)
		demand := make([]float64, nn)
		for i := range demand {
			demand[i] = net.Nodes[i].Demand
		}
		const dq = 1e-3
		for i := 0; i < nn; i++ {
			if net.Nodes[i].IsFixedHead() {
				continue
			}
			var vals [2][]float64
			for si, sign := range []float64{1, -1} {
				dm := append([]float64(nil), demand...)
				dm[i] += sign * dq
				sol, err := s.Solve(&Conditions{Demand: dm}, base)
				if err != nil {
					t.Fatal(err)
				}
				for _, o := range obs {
					vals[si] = append(vals[si], value(sol, o))
				}
			}
			for k := range obs {
				fd := (vals[0][k] - vals[1][k]) / (2 * dq)
				got := sens.Outflow[k][i]
				if math.Abs(got-fd) > 1e-6+1e-4*math.Abs(fd) {
					t.Errorf("PRV %v: d obs%d(%+v)/d outflow at %s: adjoint %.8g, finite difference %.8g", withPRV, k, obs[k], net.Nodes[i].ID, got, fd)
				}
			}
		}
		const de = 1e-4
		for l := 0; l < nl; l++ {
			var vals [2][]float64
			for si, sign := range []float64{1, -1} {
				f := make([]float64, nl)
				for j := range f {
					f[j] = 1
				}
				f[l] = math.Exp(sign * de)
				sol, err := s.Solve(&Conditions{ResistanceFactor: f}, base)
				if err != nil {
					t.Fatal(err)
				}
				for _, o := range obs {
					vals[si] = append(vals[si], value(sol, o))
				}
			}
			for k := range obs {
				fd := (vals[0][k] - vals[1][k]) / (2 * de)
				got := sens.Resistance[k][l]
				if math.Abs(got-fd) > 1e-6+1e-4*math.Abs(fd) {
					t.Errorf("PRV %v: d obs%d(%+v)/d ln φ of %s: adjoint %.8g, finite difference %.8g", withPRV, k, obs[k], net.Links[l].ID, got, fd)
				}
			}
		}
	}
}

// TestSensitivitiesDemoTown repeats the finite-difference check on the
// generated demo town (pumped zone, tank, an active pressure-reducing
// valve, closed boundary valves) for a sample of junctions and links.
func TestSensitivitiesDemoTown(t *testing.T) {
	net, err := netgen.DemoTown()
	if err != nil {
		t.Fatal(err)
	}
	s, err := NewSolver(net, Options{FlowTolerance: 1e-9, ImbalanceTolerance: 1e-10})
	if err != nil {
		t.Fatal(err)
	}
	base, err := s.Solve(nil, nil)
	if err != nil {
		t.Fatal(err)
	}
	var obs []Observation
	var junctions []int
	for i, n := range net.Nodes {
		if n.Kind == network.Junction && i%37 == 0 {
			junctions = append(junctions, i)
			if len(obs) < 6 {
				obs = append(obs, NodeObservation(i))
			}
		}
	}
	var links []int
	for k, l := range net.Links {
		if base.State[k] == Open && l.Kind == network.Pipe && k%41 == 0 {
			links = append(links, k)
		}
		if l.Kind != network.Pipe && len(obs) < 10 && base.State[k] != Closed {
			obs = append(obs, LinkObservation(k)) // the pump and the valve
		}
	}
	sens, err := s.Sensitivities(base, obs)
	if err != nil {
		t.Fatal(err)
	}
	value := func(sol *Solution, o Observation) float64 {
		if o.Node >= 0 {
			return sol.Head[o.Node]
		}
		return sol.Flow[o.Link]
	}
	demand := make([]float64, len(net.Nodes))
	for i := range demand {
		demand[i] = net.Nodes[i].Demand
	}
	const dq = 1e-3
	for _, i := range junctions {
		var v [2]*Solution
		for si, sign := range []float64{1, -1} {
			d := append([]float64(nil), demand...)
			d[i] += sign * dq
			if v[si], err = s.Solve(&Conditions{Demand: d}, base); err != nil {
				t.Fatal(err)
			}
		}
		for k, o := range obs {
			fd := (value(v[0], o) - value(v[1], o)) / (2 * dq)
			if got := sens.Outflow[k][i]; math.Abs(got-fd) > 1e-5+1e-3*math.Abs(fd) {
				t.Errorf("d obs %+v / d outflow at %s: adjoint %.6g, finite difference %.6g", o, net.Nodes[i].ID, got, fd)
			}
		}
	}
	const de = 1e-4
	for _, l := range links {
		var v [2]*Solution
		for si, sign := range []float64{1, -1} {
			f := make([]float64, len(net.Links))
			for j := range f {
				f[j] = 1
			}
			f[l] = math.Exp(sign * de)
			if v[si], err = s.Solve(&Conditions{ResistanceFactor: f}, base); err != nil {
				t.Fatal(err)
			}
		}
		for k, o := range obs {
			fd := (value(v[0], o) - value(v[1], o)) / (2 * de)
			if got := sens.Resistance[k][l]; math.Abs(got-fd) > 1e-5+1e-3*math.Abs(fd) {
				t.Errorf("d obs %+v / d ln φ of %s: adjoint %.6g, finite difference %.6g", o, net.Links[l].ID, got, fd)
			}
		}
	}
	t.Logf("%d observations × %d junctions and %d links checked", len(obs), len(junctions), len(links))
}
