package netgen

import (
	"math"
	"testing"

	"plumbline/model/hydraulic"
	"plumbline/model/network"
	"plumbline/model/telemetry"
)

// Closed districts: no open pipe joins two zones, every junction still
// reaches a source, and (mass balance, Kirchhoff's junction rule at zone
// scale) each zone's inlet meters carry exactly its demand.
func TestCloseDistricts(t *testing.T) {
	raw, err := network.ReadFile("../../testdata/network/town-5k.geojson")
	if err != nil {
		t.Fatal(err)
	}
	before := make([]network.Status, len(raw.Links))
	for k := range raw.Links {
		before[k] = raw.Links[k].Status
	}
	net, err := CloseDistricts(raw)
	if err != nil {
		t.Fatal(err)
	}
	closed := 0
	for k := range raw.Links {
		if raw.Links[k].Status != before[k] {
			t.Fatal("CloseDistricts changed its input")
		}
		if net.Links[k].Status == network.Closed && before[k] != network.Closed {
			closed++
		}
	}
	if closed == 0 {
		t.Fatal("no pipe between zones was shut: the town's zones were not connected, so the test shows nothing")
	}
	for _, l := range net.Links {
		a, b := net.Nodes[l.From], net.Nodes[l.To]
		if l.Status == network.Open && a.Kind == network.Junction && b.Kind == network.Junction && a.Zone != b.Zone {
			t.Fatalf("open pipe %s joins zones %s and %s", l.ID, a.Zone, b.Zone)
		}
	}
	comp := components(net)
	fed := map[int]bool{}
	for i := range net.Nodes {
		if net.Nodes[i].IsFixedHead() {
			fed[comp[i]] = true
		}
	}
	for i := range net.Nodes {
		if !fed[comp[i]] {
			t.Fatalf("junction %s cut off from every source", net.Nodes[i].ID)
		}
	}
	sensors := DistrictSensors(net, 8)
	s, err := hydraulic.NewSolver(net, hydraulic.Options{})
	if err != nil {
		t.Fatal(err)
	}
	sol, err := s.Solve(nil, nil)
	if err != nil {
		t.Fatal(err)
	}
	inflow, demandOf, loggers := map[string]float64{}, map[string]float64{}, map[string]int{}
	for _, sen := range sensors {
		switch sen.Quantity {
		case telemetry.Flow:
			l, _ := net.LinkIndex(sen.At)
			inflow[sen.Zone] += sol.Flow[l]
		case telemetry.Pressure:
			loggers[sen.Zone]++
		}
	}
	for i := range net.Nodes {
		if n := &net.Nodes[i]; n.Kind == network.Junction {
			demandOf[n.Zone] += sol.Demand[i] + sol.Leak[i]
		}
	}
	for _, z := range net.Zones() {
		if math.Abs(inflow[z]-demandOf[z]) > 1e-6 {
			t.Errorf("zone %s: inlet meters carry %.6f L/s, the zone takes %.6f", z, inflow[z], demandOf[z])
		}
		if loggers[z] != 8 {
			t.Errorf("zone %s: %d loggers, want 8", z, loggers[z])
		}
	}
}
