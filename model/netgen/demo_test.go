package netgen

import (
	"math"
	"reflect"
	"slices"
	"strings"
	"testing"

	"plumbline/model/network"
	"plumbline/model/telemetry"
	"plumbline/model/units"
)

func mustDemo(t testing.TB) *network.Network {
	t.Helper()
	net, err := DemoTown()
	if err != nil {
		t.Fatalf("DemoTown: %v", err)
	}
	return net
}

func TestDemoTownLayout(t *testing.T) {
	net := mustDemo(t)
	if again := mustDemo(t); !reflect.DeepEqual(net, again) {
		t.Fatalf("DemoTown gave different networks on two calls")
	}
	zones := net.Zones()
	slices.Sort(zones)
	if want := []string{ZoneCentral, ZoneHigh, ZoneLow}; !slices.Equal(zones, want) {
		t.Fatalf("zones %v, want %v", zones, want)
	}
	if j := countKind(net, network.Junction); j < 380 || j > 420 {
		t.Errorf("%d junctions, want about 400", j)
	}
	if r, tk := countKind(net, network.Reservoir), countKind(net, network.Tank); r != 1 || tk != 1 {
		t.Errorf("%d reservoirs and %d tanks, want 1 and 1", r, tk)
	}
	var pumps, prvs int
	for _, l := range net.Links {
		switch {
		case l.Kind == network.Pump:
			pumps++
		case l.Kind == network.Valve && l.Valve == network.PressureReducing:
			prvs++
		}
	}
	if pumps != 1 || prvs != 1 {
		t.Errorf("%d pumps and %d pressure-reducing valves, want 1 and 1", pumps, prvs)
	}
	for _, p := range network.Validate(net) {
		t.Errorf("validation: %v", p) // neither errors nor warnings
	}
	seen := reachable(net)
	for i := range net.Nodes {
		if !seen[i] {
			t.Errorf("node %s not connected to a source", net.Nodes[i].ID)
		}
	}
	for _, l := range net.Links {
		if l.Kind == network.Pipe && (l.Diameter < 100 || l.Diameter > 600) {
			t.Errorf("pipe %s: diameter %g mm, want 100-600 mm", l.ID, l.Diameter)
		}
	}
	// Both patterns are used; the residential one by most junctions.
	use := map[string]int{}
	for i := range net.Nodes {
		if net.Nodes[i].Kind == network.Junction && net.Nodes[i].Demand > 0 {
			use[net.Nodes[i].Pattern]++
		}
	}
	if use[Residential] < 300 || use[Commercial] == 0 {
		t.Errorf("pattern use %v, want mostly residential and some commercial", use)
	}
}

// TestDemoTownInlets checks the district metered areas independently of
// ZoneBoundaries: every open link with exactly one end a junction of a
// zone is counted for that zone.
func TestDemoTownInlets(t *testing.T) {
	net := mustDemo(t)
	inZone := func(i int, z string) bool {
		return net.Nodes[i].Kind == network.Junction && net.Nodes[i].Zone == z
	}
	crossing := map[string][]string{}
	closedCross := 0
	for _, l := range net.Links {
		for _, z := range []string{ZoneCentral, ZoneHigh, ZoneLow} {
			if inZone(l.From, z) != inZone(l.To, z) {
				if l.Status == network.Closed {
					closedCross++
					continue
				}
				crossing[z] = append(crossing[z], l.ID)
			}
		}
	}
	// High and low: a single open link each, their inlet.
	if got := crossing[ZoneHigh]; !slices.Equal(got, []string{DemoTankMain}) {
		t.Errorf("open links crossing into high: %v, want only %s", got, DemoTankMain)
	}
	if got := crossing[ZoneLow]; !slices.Equal(got, []string{DemoPRV}) {
		t.Errorf("open links crossing into low: %v, want only %s", got, DemoPRV)
	}
	// Central: its inlet from the works, and the feeds it passes on.
	got := slices.Clone(crossing[ZoneCentral])
	slices.Sort(got)
	if want := []string{DemoRising, DemoWorksMain, DemoPRV}; !slices.Equal(got, want) {
		t.Errorf("open links crossing central: %v, want %v", got, want)
	}
	if closedCross == 0 {
		t.Errorf("no closed boundary pipes between zones, want a few")
	}
	b := ZoneBoundaries(net)
	for z, want := range map[string]string{ZoneCentral: DemoWorksMain, ZoneHigh: DemoTankMain, ZoneLow: DemoPRV} {
		if len(b[z].Inlets) != 1 || net.Links[b[z].Inlets[0]].ID != want {
			t.Errorf("ZoneBoundaries[%s].Inlets = %v, want the single link %s", z, b[z].Inlets, want)
		}
	}
	if len(b[ZoneCentral].Outlets) != 2 || len(b[ZoneHigh].Outlets) != 0 || len(b[ZoneLow].Outlets) != 0 {
		t.Errorf("outlets %+v, want 2 for central (valve, rising main) and none elsewhere", b)
	}
}

func TestDemoSensors(t *testing.T) {
	net := mustDemo(t)
	ss := DemoSensors(net)
	ids := map[string]bool{}
	loggers := map[string][]string{}
	inlets := map[string][]string{}
	var level, pumpP, pumpF int
	for _, s := range ss {
		if ids[s.ID] {
			t.Errorf("sensor id %s twice", s.ID)
		}
		ids[s.ID] = true
		if want := DemoTopicRoot + "/" + s.Zone + "/" + s.ID; s.Topic != want {
			t.Errorf("%s: topic %q, want %q", s.ID, s.Topic, want)
		}
		if !units.Known(s.Quantity, s.Unit) {
			t.Errorf("%s: unit %q unknown for %v", s.ID, s.Unit, s.Quantity)
		}
		if s.Accuracy <= 0 {
			t.Errorf("%s: accuracy %g, want positive", s.ID, s.Accuracy)
		}
		switch s.Quantity {
		case telemetry.Pressure, telemetry.Level:
			i, ok := net.NodeIndex(s.At)
			if !ok {
				t.Fatalf("%s: at %q is not a node", s.ID, s.At)
			}
			switch {
			case s.Quantity == telemetry.Level:
				level++
			case net.Nodes[i].ID == DemoPumpOut:
				pumpP++
			default:
				loggers[s.Zone] = append(loggers[s.Zone], s.At)
				if net.Nodes[i].Zone != s.Zone {
					t.Errorf("%s: at %s in zone %s, sensor says %s", s.ID, s.At, net.Nodes[i].Zone, s.Zone)
				}
			}
		case telemetry.Flow:
			if _, ok := net.LinkIndex(s.At); !ok {
				t.Fatalf("%s: at %q is not a link", s.ID, s.At)
			}
			if strings.HasPrefix(s.ID, "F-in-") {
				inlets[s.Zone] = append(inlets[s.Zone], s.At)
			} else if s.At == DemoPump {
				pumpF++
			}
		}
	}
	for z, want := range map[string]string{ZoneCentral: DemoWorksMain, ZoneHigh: DemoTankMain, ZoneLow: DemoPRV} {
		if !slices.Equal(inlets[z], []string{want}) {
			t.Errorf("zone %s inlet meters on %v, want one on %s", z, inlets[z], want)
		}
		if !ids["F-in-"+z] {
			t.Errorf("no sensor F-in-%s", z)
		}
		n := len(loggers[z])
		if n < 6 || n > 10 {
			t.Errorf("zone %s: %d pressure loggers, want 6-10", z, n)
		}
		// The critical point (highest ground of the zone) is logged.
		top := ""
		for i := range net.Nodes {
			nd := &net.Nodes[i]
			if nd.Kind == network.Junction && nd.Zone == z && nd.ID != DemoPumpOut && nd.ID != "J-prv-in" &&
				(top == "" || nd.Elevation > net.Nodes[mustIndex(t, net, top)].Elevation) {
				top = nd.ID
			}
		}
		if !slices.Contains(loggers[z], top) {
			t.Errorf("zone %s: loggers %v miss the critical point %s", z, loggers[z], top)
		}
		// Spread out: no two loggers closer than 150 m in a straight line
		// (farthest-point sampling over a zone of some 1 km across).
		for a := range loggers[z] {
			for c := a + 1; c < len(loggers[z]); c++ {
				pa := net.Nodes[mustIndex(t, net, loggers[z][a])].Coord
				pc := net.Nodes[mustIndex(t, net, loggers[z][c])].Coord
				if d := haversine(pa, pc); d < 150 {
					t.Errorf("zone %s: loggers at %s and %s only %.0f m apart", z, loggers[z][a], loggers[z][c], d)
				}
			}
		}
	}
	if level != 1 || pumpP != 1 || pumpF != 1 {
		t.Errorf("tank level %d, pump pressure %d, pump flow %d sensors, want 1 each", level, pumpP, pumpF)
	}
}

func mustIndex(t testing.TB, net *network.Network, id string) int {
	t.Helper()
	i, ok := net.NodeIndex(id)
	if !ok {
		t.Fatalf("no node %s", id)
	}
	return i
}

func TestDemoTerrain(t *testing.T) {
	net := mustDemo(t)
	lo := map[string]float64{}
	hi := map[string]float64{}
	for i := range net.Nodes {
		nd := &net.Nodes[i]
		if nd.Kind != network.Junction || nd.ID == DemoPumpOut || nd.ID == "J-prv-in" {
			continue // station nodes stand where the station is
		}
		if _, ok := lo[nd.Zone]; !ok {
			lo[nd.Zone], hi[nd.Zone] = math.Inf(1), math.Inf(-1)
		}
		lo[nd.Zone] = min(lo[nd.Zone], nd.Elevation)
		hi[nd.Zone] = max(hi[nd.Zone], nd.Elevation)
	}
	// The low zone lies below central, central below high, all within
	// the 10-80 m ground range of the brief (allowing a few m of ripple).
	if !(hi[ZoneLow] < lo[ZoneCentral] && hi[ZoneCentral] < lo[ZoneHigh]) {
		t.Errorf("ground by zone low %.1f-%.1f, central %.1f-%.1f, high %.1f-%.1f: want terraces low < central < high",
			lo[ZoneLow], hi[ZoneLow], lo[ZoneCentral], hi[ZoneCentral], lo[ZoneHigh], hi[ZoneHigh])
	}
	if lo[ZoneLow] < 5 || hi[ZoneHigh] > 80 {
		t.Errorf("ground %.1f-%.1f m, want within about 10-80 m", lo[ZoneLow], hi[ZoneHigh])
	}
}

func TestDemoZones(t *testing.T) {
	net := mustDemo(t)
	zs := DemoZones(net, DemoSensors(net))
	got := map[string]ZoneMeters{}
	for _, z := range zs {
		got[z.Zone] = z
	}
	want := map[string][2][]string{
		ZoneCentral: {{"F-in-central"}, {"F-in-low", "F-pump-hill"}},
		ZoneHigh:    {{"F-in-high"}, nil},
		ZoneLow:     {{"F-in-low"}, nil},
	}
	for z, w := range want {
		g := got[z]
		out := slices.Clone(g.Outlets)
		slices.Sort(out)
		if !slices.Equal(g.Inlets, w[0]) || !slices.Equal(out, w[1]) {
			t.Errorf("zone %s: inlets %v outlets %v, want %v and %v", z, g.Inlets, out, w[0], w[1])
		}
		// Night use: base demand times the night minimum of the patterns
		// lies between 0.3 and 0.45 of the zone's base demand.
		var base float64
		for i := range net.Nodes {
			if nd := &net.Nodes[i]; nd.Kind == network.Junction && nd.Zone == z {
				base += nd.Demand
			}
		}
		if r := g.NightUseLps / base; r < 0.3 || r > 0.45 {
			t.Errorf("zone %s: night use %.2f L/s of base %.2f L/s (ratio %.2f), want 0.3-0.45", z, g.NightUseLps, base, r)
		}
	}
}
