package main

import (
	"fmt"
	"math"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"time"

	"plumbline/model/hydraulic"
	"plumbline/model/netgen"
	"plumbline/model/network"
	"plumbline/model/telemetry"
)

// loggersPerZone is the pressure logger count of every zone of the
// 5,000-junction town: DemoSensors places up to 10, the rest are added
// by farthest-point spread.
const loggersPerZone = 20

// topicRoot5k is the first MQTT topic level of the 5,000-junction town's
// sensors (DemoSensors' own topics name the demo town).
const topicRoot5k = "town5k"

// writeTown5kConfig writes the service configuration of the generated
// 5,000-junction town. Its instruments are those netgen.DemoSensors
// places on any zoned network (a flow meter on every open link crossing
// a zone boundary, up to 10 pressure loggers per zone), plus pressure
// loggers spread by farthest point up to loggersPerZone per zone; its
// zone balances are netgen.DemoZones.
//
// The generated town's zones are compact regions of one looped grid, not
// closed district metered areas: besides each zone's reservoir main, many
// open pipes cross between zones, and water can flow either way in them.
// Each crossing gets a meter, and a meter between two zones may read
// negative (its minimum is minus its maximum); only a meter on a
// reservoir main reads one way.
func writeTown5kConfig(net *network.Network, path string) error {
	sensors := netgen.DemoSensors(net)
	mean, peak, err := dayFlows(net)
	if err != nil {
		return err
	}
	var out []telemetry.Sensor
	perZone := map[string][]int{}
	for _, s := range sensors {
		if k, ok := net.LinkIndex(s.At); ok && s.Quantity == telemetry.Flow {
			s.Accuracy, s.Min, s.Max = meterSpec(net, k, mean[k], peak[k])
		}
		s.Topic = topicRoot5k + "/" + s.Zone + "/" + s.ID
		out = append(out, s)
		if s.Quantity == telemetry.Pressure {
			if n, ok := net.NodeIndex(s.At); ok {
				perZone[s.Zone] = append(perZone[s.Zone], n)
			}
		}
	}
	zones := append([]string(nil), net.Zones()...)
	sort.Strings(zones)
	for _, z := range zones {
		have := perZone[z]
		cands := candidateJunctions(net, z)
		taken := map[int]bool{}
		for _, n := range have {
			taken[n] = true
		}
		var pts []network.Point
		var idx []int
		for _, n := range cands {
			if !taken[n] {
				pts = append(pts, net.Nodes[n].Coord)
				idx = append(idx, n)
			}
		}
		var avoid []network.Point
		for _, n := range have {
			avoid = append(avoid, net.Nodes[n].Coord)
		}
		for i, p := range farthest(pts, loggersPerZone-len(have), avoid) {
			id := fmt.Sprintf("P-%s-%02d", z, len(have)+i+1)
			out = append(out, telemetry.Sensor{
				ID: id, Quantity: telemetry.Pressure, At: net.Nodes[idx[p]].ID,
				Topic: topicRoot5k + "/" + z + "/" + id, Unit: "bar", Accuracy: 0.02,
				Zone: z, Min: 0, Max: 100,
			})
		}
	}
	sort.SliceStable(out, func(a, b int) bool { return out[a].Zone < out[b].Zone })

	var b strings.Builder
	b.WriteString("# Service configuration of the generated 5,000-junction town\n")
	b.WriteString("# (testdata/network/town-5k.geojson, three zones each fed by its own\n")
	b.WriteString("# reservoir main). Written by `go run ./testdata/scenarios/gen`; do not\n")
	b.WriteString("# edit by hand. The zones are regions of one looped grid: every open pipe\n")
	b.WriteString("# crossing a zone boundary has a flow meter (netgen.DemoSensors), and a\n")
	b.WriteString("# meter between two zones may read either way (min = -max). Pressure\n")
	fmt.Fprintf(&b, "# loggers: %d per zone, spread by farthest point.\n", loggersPerZone)
	b.WriteString("network: ../testdata/network/town-5k.geojson\n")
	b.WriteString("step: 5m\n")
	b.WriteString("data_dir: ../plumbline-data-town-5k\n")
	b.WriteString("sensors:\n")
	for _, s := range out {
		fmt.Fprintf(&b, "  - {id: %s, quantity: %s, at: %s, topic: %s, unit: %s, accuracy: %s, min: %s, max: %s}\n",
			s.ID, s.Quantity, s.At, s.Topic, s.Unit, num(s.Accuracy), num(s.Min), num(s.Max))
	}
	b.WriteString("zones:\n")
	zm := netgen.DemoZones(net, sensors)
	sort.Slice(zm, func(a, c int) bool { return zm[a].Zone < zm[c].Zone })
	for _, z := range zm {
		fmt.Fprintf(&b, "  - id: %s\n", z.Zone)
		fmt.Fprintf(&b, "    inlets: [%s]\n", strings.Join(z.Inlets, ", "))
		fmt.Fprintf(&b, "    outlets: [%s]\n", strings.Join(z.Outlets, ", "))
		b.WriteString("    night: \"02:00-04:00\"\n")
		b.WriteString("    timezone: UTC\n")
		fmt.Fprintf(&b, "    night_use_lps: %s\n", num(math.Round(z.NightUseLps*100)/100))
	}
	b.WriteString("http:\n  listen: 127.0.0.1:8471\n")
	if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
		return err
	}
	return os.WriteFile(path, []byte(b.String()), 0o644)
}

// dayFlows solves the network at every hour of a day at its base demands
// times their patterns and returns each link's mean and largest absolute
// flow (L/s).
//
// Why not DemoSensors' accuracy: it sizes a meter by the demand
// downstream of it, found by a search over open links, which on a looped
// grid reaches the whole town from every boundary pipe; a solve gives the
// flow the pipe really carries.
func dayFlows(net *network.Network) (mean, peak []float64, err error) {
	solver, err := hydraulic.NewSolver(net, hydraulic.Options{})
	if err != nil {
		return nil, nil, fmt.Errorf("town-5k: %w", err)
	}
	mean = make([]float64, len(net.Links))
	peak = make([]float64, len(net.Links))
	demand := make([]float64, len(net.Nodes))
	var prev *hydraulic.Solution
	const hours = 24
	for h := 0; h < hours; h++ {
		for i := range net.Nodes {
			demand[i] = net.Nodes[i].Demand * net.PatternValue(net.Nodes[i].Pattern, time.Duration(h)*time.Hour)
		}
		sol, err := solver.Solve(&hydraulic.Conditions{Demand: demand}, prev)
		if err != nil {
			return nil, nil, fmt.Errorf("town-5k: hour %d: %w", h, err)
		}
		for k, q := range sol.Flow {
			mean[k] += math.Abs(q) / hours
			peak[k] = max(peak[k], math.Abs(q))
		}
		prev = sol
	}
	return mean, peak, nil
}

// meterSpec returns the accuracy (m3/h, one standard deviation) and the
// plausible bounds (L/s) of a flow meter on link k: 1 % of the mean flow
// plus a zero-point term of 0.002 m/s over the bore (electromagnetic
// meters are specified as a share of reading plus a zero stability of a
// few mm/s, from memory of typical data sheets); bounds twice the day's
// peak, at least 1 m/s over the bore. A meter between two zones (From
// end a junction) may see water either way: its minimum is minus its
// maximum.
func meterSpec(net *network.Network, k int, mean, peak float64) (acc, lo, hi float64) {
	l := &net.Links[k]
	area := math.Pi * l.Diameter * l.Diameter / 4e6 // m²
	sigma := 0.01*mean + 0.002*area*1000            // L/s
	acc = math.Round(sigma*3.6*1000) / 1000         // m3/h
	acc = max(acc, 0.001)
	hi = math.Ceil(max(2*peak, 1*area*1000))
	if net.Nodes[l.From].Kind == network.Junction {
		lo = -hi
	}
	return acc, lo, hi
}
