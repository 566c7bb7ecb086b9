package calib

import (
	"context"
	"math"
	"sort"
	"testing"
	"time"

	"plumbline/model/netgen"
	"plumbline/model/network"
	"plumbline/model/sim"
	"plumbline/model/telemetry"
	"plumbline/model/units"
)

// monday is a Monday, 00:00 UTC: windows starting here have no weekend
// in their first five days.
var monday = time.Date(2026, 3, 2, 0, 0, 0, 0, time.UTC)

// simulate runs the simulator on the true network for the given days
// with hourly steps and readings, and returns one snapshot per hour in
// sensor order, values in canonical units.
func simulate(t testing.TB, truth *network.Network, sensors []telemetry.Sensor, start time.Time, days int, seed uint64, tune func(*sim.Settings)) []telemetry.Snapshot {
	t.Helper()
	set := sim.Settings{
		Start: start, Duration: time.Duration(days) * 24 * time.Hour,
		Step: time.Hour, LoggingInterval: time.Hour, Seed: seed, Sensors: sensors,
	}
	if tune != nil {
		tune(&set)
	}
	pos := map[string]int{}
	qty := map[string]telemetry.Quantity{}
	for i, s := range sensors {
		pos[s.ID] = i
		qty[s.ID] = s.Quantity
	}
	byTime := map[time.Time][]telemetry.Aggregate{}
	emit := func(r sim.Reading) error {
		v, err := units.ToCanonical(qty[r.Sensor], r.Unit, r.Value)
		if err != nil {
			return err
		}
		row := byTime[r.Time]
		if row == nil {
			row = make([]telemetry.Aggregate, len(sensors))
			for i, s := range sensors {
				row[i] = telemetry.Aggregate{Sensor: s.ID, Quality: telemetry.Missing}
			}
			byTime[r.Time] = row
		}
		row[pos[r.Sensor]] = telemetry.Aggregate{Sensor: r.Sensor, Value: v, Count: 1, Min: v, Max: v, Quality: telemetry.OK}
		return nil
	}
	if _, err := sim.Run(context.Background(), truth, set, emit, sim.Options{}); err != nil {
		t.Fatalf("simulate: %v", err)
	}
	var times []time.Time
	for tm := range byTime {
		times = append(times, tm)
	}
	sort.Slice(times, func(a, b int) bool { return times[a].Before(times[b]) })
	out := make([]telemetry.Snapshot, len(times))
	for i, tm := range times {
		out[i] = telemetry.Snapshot{Step: tm, Length: time.Hour, Values: byTime[tm]}
	}
	return out
}

// demoTown returns the demo town with a spur of two junctions without
// demand hanging off its first junction, pipes of group "spur": no water
// moves in it, so its roughness cannot be seen by any sensor.
func demoTown(t testing.TB) *network.Network {
	t.Helper()
	net, err := netgen.DemoTown()
	if err != nil {
		t.Fatal(err)
	}
	var at int
	for i := range net.Nodes {
		if net.Nodes[i].Kind == network.Junction {
			at = i
			break
		}
	}
	base := net.Nodes[at]
	a := network.Node{ID: "J-spur-1", Kind: network.Junction, Elevation: base.Elevation, Zone: base.Zone}
	b := network.Node{ID: "J-spur-2", Kind: network.Junction, Elevation: base.Elevation, Zone: base.Zone}
	net.Nodes = append(net.Nodes, a, b)
	na, nb := len(net.Nodes)-2, len(net.Nodes)-1
	net.Links = append(net.Links,
		network.Link{ID: "P-spur-1", Kind: network.Pipe, From: at, To: na, Length: 80, Diameter: 100, Roughness: 120, Group: "spur"},
		network.Link{ID: "P-spur-2", Kind: network.Pipe, From: na, To: nb, Length: 80, Diameter: 100, Roughness: 120, Group: "spur"},
	)
	net.Reindex()
	return net
}

// trueTown returns a copy of net whose group roughness is scaled by
// rough[group] and whose zones' demand follows the recorded pattern times
// mult[zone][hour], through zone-specific patterns.
func trueTown(net *network.Network, rough map[string]float64, mult map[string][24]float64) *network.Network {
	tn := net.Clone()
	for l := range tn.Links {
		if f, ok := rough[GroupOf(&tn.Links[l])]; ok && tn.Links[l].Kind == network.Pipe {
			tn.Links[l].Roughness *= f
		}
	}
	for i := range tn.Nodes {
		nd := &tn.Nodes[i]
		c, ok := mult[nd.Zone]
		if !ok || nd.Kind != network.Junction || nd.Demand == 0 {
			continue
		}
		name := "true-" + nd.Zone + "-" + nd.Pattern
		if _, done := tn.Patterns[name]; !done {
			p := tn.Patterns[nd.Pattern]
			v := make([]float64, 24)
			for h := range v {
				base := 1.0
				if len(p) == 24 {
					base = p[h]
				}
				v[h] = base * c[h]
			}
			tn.Patterns[name] = v
		}
		nd.Pattern = name
	}
	return tn
}

func near(got, want, tol float64) bool { return math.Abs(got-want) <= tol }
