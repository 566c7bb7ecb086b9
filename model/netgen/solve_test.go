package netgen

import (
	"math"
	"testing"
	"time"

	"plumbline/model/hydraulic"
	"plumbline/model/network"
)

// demandAt returns each junction's demand at the given hour of its
// pattern (base × multiplier).
func demandAt(net *network.Network, hour int) []float64 {
	d := make([]float64, len(net.Nodes))
	for i := range net.Nodes {
		nd := &net.Nodes[i]
		if nd.Kind == network.Junction {
			d[i] = nd.Demand * net.PatternValue(nd.Pattern, time.Duration(hour)*time.Hour)
		}
	}
	return d
}

// TestSolvedPressures solves generated networks with model/hydraulic at
// base demand and at the peak hour and checks every junction pressure is
// within 15-90 m (service range of common practice: at least about
// 15-20 m at the tap, at most about 90 m before fittings suffer), and
// that the sources supply what the junctions draw (mass balance,
// Kirchhoff's junction rule over the whole network).
func TestSolvedPressures(t *testing.T) {
	demo, err := DemoTown()
	if err != nil {
		t.Fatal(err)
	}
	cases := []struct {
		name string
		net  *network.Network
	}{
		{"demo", demo},
		{"town-5k", mustTown(t, Options{Junctions: 5000, Seed: 1, Zones: 3})},
		{"town-5k-seed2-tank", mustTown(t, Options{Junctions: 5000, Seed: 2, Zones: 3, Tank: true})},
		{"town-5k-darcy", mustTown(t, Options{Junctions: 5000, Seed: 3, Headloss: network.DarcyWeisbach})},
		{"town-20k", mustTown(t, Options{Junctions: 20000, Seed: 4, Zones: 5})},
	}
	for _, c := range cases {
		s, err := hydraulic.NewSolver(c.net, hydraulic.Options{})
		if err != nil {
			t.Fatalf("%s: NewSolver: %v", c.name, err)
		}
		for _, when := range []struct {
			label string
			cond  *hydraulic.Conditions
		}{
			{"base demand", &hydraulic.Conditions{}},
			{"peak hour", &hydraulic.Conditions{Demand: demandAt(c.net, PeakHour())}},
			{"night", &hydraulic.Conditions{Demand: demandAt(c.net, 3)}},
		} {
			sol, err := s.Solve(when.cond, nil)
			if err != nil {
				t.Fatalf("%s at %s: %v", c.name, when.label, err)
			}
			lo, hi := math.Inf(1), math.Inf(-1)
			var loID, hiID string
			var drawn, supplied float64
			for i := range c.net.Nodes {
				nd := &c.net.Nodes[i]
				if nd.Kind != network.Junction {
					supplied -= sol.Demand[i]
					continue
				}
				drawn += sol.Demand[i] + sol.Leak[i]
				if p := sol.Pressure[i]; p < lo {
					lo, loID = p, nd.ID
				}
				if p := sol.Pressure[i]; p > hi {
					hi, hiID = p, nd.ID
				}
			}
			t.Logf("%s at %s: pressure %.1f m (%s) to %.1f m (%s), %d iterations", c.name, when.label, lo, loID, hi, hiID, sol.Iterations)
			if lo < 15 || hi > 90 {
				t.Errorf("%s at %s: pressures %.1f m (%s) to %.1f m (%s), want all within 15-90 m", c.name, when.label, lo, loID, hi, hiID)
			}
			// Sized for about 1 m/s at peak: no pipe should run above
			// 2 m/s, the usual upper design velocity of distribution
			// mains (common practice, from memory).
			vmax, vID := 0.0, ""
			for k, v := range sol.Velocity {
				if math.Abs(v) > vmax {
					vmax, vID = math.Abs(v), c.net.Links[k].ID
				}
			}
			if vmax > 2 {
				t.Errorf("%s at %s: velocity %.2f m/s in %s, want at most 2 m/s", c.name, when.label, vmax, vID)
			}
			if d := math.Abs(drawn - supplied); d > 1e-6*drawn+1e-6 {
				t.Errorf("%s at %s: junctions draw %.6f L/s, sources supply %.6f L/s (difference %.2g, tolerance 1e-6 relative)", c.name, when.label, drawn, supplied, d)
			}
		}
	}
}

// TestDemoTownZoneBalance solves the demo town through the day and
// checks each zone's inlet meter sees exactly what the zone draws, by
// the junction rule applied to the zone as a whole (Kirchhoff): high and
// low draw their inlet flow, central draws its inlet flow less what the
// pumping station and the valve pass on. It also checks the stations
// work as built: the valve is reducing, the pump is running into the
// tank.
func TestDemoTownZoneBalance(t *testing.T) {
	net := mustDemo(t)
	s, err := hydraulic.NewSolver(net, hydraulic.Options{})
	if err != nil {
		t.Fatal(err)
	}
	link := func(id string) int {
		k, ok := net.LinkIndex(id)
		if !ok {
			t.Fatalf("no link %s", id)
		}
		return k
	}
	works, tankMain, prv, pump := link(DemoWorksMain), link(DemoTankMain), link(DemoPRV), link(DemoPump)
	for hour := range 24 {
		sol, err := s.Solve(&hydraulic.Conditions{Demand: demandAt(net, hour)}, nil)
		if err != nil {
			t.Fatalf("hour %d: %v", hour, err)
		}
		draw := map[string]float64{}
		for i := range net.Nodes {
			if net.Nodes[i].Kind == network.Junction {
				draw[net.Nodes[i].Zone] += sol.Demand[i] + sol.Leak[i]
			}
		}
		in := map[string]float64{
			ZoneCentral: sol.Flow[works] - sol.Flow[prv] - sol.Flow[pump],
			ZoneHigh:    sol.Flow[tankMain],
			ZoneLow:     sol.Flow[prv],
		}
		for z, q := range in {
			if d := math.Abs(q - draw[z]); d > 1e-5*draw[z]+1e-6 {
				t.Errorf("hour %d zone %s: metered inflow %.6f L/s, drawn %.6f L/s (difference %.2g, tolerance 1e-5 relative)", hour, z, q, draw[z], d)
			}
		}
		if sol.State[prv] != hydraulic.Active {
			t.Errorf("hour %d: %s is %v, want active (reducing)", hour, DemoPRV, sol.State[prv])
		}
		if sol.State[pump] != hydraulic.Open || sol.Flow[pump] <= 0 {
			t.Errorf("hour %d: pump %s %v with flow %.2f L/s, want running forward", hour, DemoPump, sol.State[pump], sol.Flow[pump])
		}
	}
}
