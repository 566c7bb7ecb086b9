package calib

import (
	"context"
	"fmt"
	"math"
	"syscall"
	"testing"

	"plumbline/model/netgen"
	"plumbline/model/network"
	"plumbline/model/telemetry"
	"plumbline/model/units"
)

// benchProblem builds the speed case: a 5,000-junction town in
// three zones, 10 roughness groups, 60 sensors, 14 days of hourly
// snapshots simulated from a true network that differs from the records.
func benchProblem(b testing.TB) Problem {
	net, err := netgen.Town(netgen.Options{Junctions: 5000, Zones: 3, Seed: 1})
	if err != nil {
		b.Fatal(err)
	}
	// Twelve material-decade groups, merged to ten.
	merge := map[string]string{"pe-2020s": "pe-2010s", "ductile-iron-1980s": "ductile-iron-1990s"}
	for l := range net.Links {
		if net.Links[l].Kind == network.Pipe {
			g := GroupOf(&net.Links[l])
			if to, ok := merge[g]; ok {
				g = to
			}
			net.Links[l].Group = g
		}
	}
	if n := len(buildGroups(net)); n != 10 {
		b.Fatalf("%d roughness groups, want 10", n)
	}
	sensors := benchSensors(net, 60)
	rough := map[string]float64{}
	for i, g := range buildGroups(net) {
		rough[g.name] = 0.8 + 0.03*float64(i)
	}
	mult := map[string][24]float64{}
	for zi, z := range net.Zones() {
		var c [24]float64
		for h := range c {
			c[h] = 1 + 0.1*math.Sin(2*math.Pi*float64(h)/24+float64(zi))
		}
		mult[z] = c
	}
	snaps := simulate(b, trueTown(net, rough, mult), sensors, monday, 14, 1, nil)
	return Problem{Network: net, Sensors: sensors, Snapshots: snaps}
}

// benchSensors takes the zone inlet meters and pressure loggers of
// netgen.DemoSensors, then adds pressure loggers at evenly spaced
// junctions up to n sensors.
func benchSensors(net *network.Network, n int) []telemetry.Sensor {
	all := netgen.DemoSensors(net)
	var out []telemetry.Sensor
	used := map[string]bool{}
	for _, s := range all {
		if len(out) < n {
			out = append(out, s)
			used[s.At] = true
		}
	}
	bar, _ := units.Lookup(telemetry.Pressure, "bar")
	var js []int
	for i := range net.Nodes {
		if net.Nodes[i].Kind == network.Junction && !used[net.Nodes[i].ID] {
			js = append(js, i)
		}
	}
	for k := 0; len(out) < n && k < len(js); k++ {
		nd := &net.Nodes[js[(k*7919)%len(js)]]
		if used[nd.ID] {
			continue
		}
		used[nd.ID] = true
		out = append(out, telemetry.Sensor{ID: fmt.Sprintf("P-extra-%02d", k+1), Quantity: telemetry.Pressure, At: nd.ID,
			Unit: bar.Symbol, Accuracy: 0.02, Zone: nd.Zone})
	}
	return out
}

// BenchmarkFit5000 is the speed target: 14 days of hourly
// snapshots, 60 sensors, 10 roughness groups and three zone patterns on
// a 5,000-junction network in at most 60 s on 2 cores (hold-out,
// validation and the closed-valve check included).
func BenchmarkFit5000(b *testing.B) {
	p := benchProblem(b)
	b.ResetTimer()
	for b.Loop() {
		cpu0 := cpuSeconds()
		res, err := Fit(context.Background(), p, Settings{})
		if err != nil {
			b.Fatal(err)
		}
		// CPU time of the process, a figure that other load on the
		// machine does not inflate (wall time can be read from ns/op).
		b.ReportMetric(cpuSeconds()-cpu0, "cpu-s")
		b.ReportMetric(float64(res.Iterations), "iterations")
		b.ReportMetric(float64(res.FitSnapshots), "snapshots")
		b.ReportMetric(res.MisfitAfter, "misfit")
	}
}

// cpuSeconds returns the user and system CPU time of the process.
func cpuSeconds() float64 {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return float64(ru.Utime.Sec+ru.Stime.Sec) + float64(ru.Utime.Usec+ru.Stime.Usec)/1e6
}
