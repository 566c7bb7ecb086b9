package calib

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"strings"
	"testing"
	"time"

	"plumbline/model/netgen"
	"plumbline/model/network"
	"plumbline/model/telemetry"
)

// TestBadInputNamed checks that bad sensors and snapshots are left out
// with a warning naming them, that the rest is still fitted, and that a
// problem that cannot be fitted gives an error saying why.
func TestBadInputNamed(t *testing.T) {
	net := demoTown(t)
	sensors := netgen.DemoSensors(net)
	snaps := simulate(t, net, sensors, monday, 2, 4, nil)
	bad := append([]telemetry.Sensor(nil), sensors...)
	bad = append(bad,
		telemetry.Sensor{ID: "P-nowhere", Quantity: telemetry.Pressure, At: "J-missing", Unit: "m", Accuracy: 0.1},
		telemetry.Sensor{ID: "F-nowhere", Quantity: telemetry.Flow, At: "P-missing", Unit: "L/s", Accuracy: 0.1},
	)
	for i := range snaps {
		snaps[i].Values = append(snaps[i].Values,
			telemetry.Aggregate{Sensor: "P-nowhere", Value: 30, Quality: telemetry.OK},
			telemetry.Aggregate{Sensor: "F-nowhere", Value: 3, Quality: telemetry.OK})
	}
	short := telemetry.Snapshot{Step: snaps[5].Step.Add(time.Minute), Values: snaps[5].Values[:3]}
	snaps = append(snaps, short)
	res, err := Fit(context.Background(), Problem{Network: net, Sensors: bad, Snapshots: snaps}, Settings{SuspectCandidates: -1, MaxIterations: 3})
	if err != nil {
		t.Fatal(err)
	}
	all := strings.Join(res.Warnings, "\n")
	for _, want := range []string{"sensor P-nowhere", "J-missing", "sensor F-nowhere", "P-missing", "3 values for"} {
		if !strings.Contains(all, want) {
			t.Errorf("warnings do not mention %q:\n%s", want, all)
		}
	}
	if len(res.Sensors) != len(sensors)-1 { // the tank level sets a boundary, it is not compared
		t.Errorf("%d sensors compared, want %d", len(res.Sensors), len(sensors)-1)
	}

	cases := []struct {
		name string
		p    Problem
		want string
	}{
		{"no network", Problem{Sensors: sensors, Snapshots: snaps}, "no network"},
		{"no sensors", Problem{Network: net, Snapshots: snaps}, "no sensor"},
		{"no snapshots", Problem{Network: net, Sensors: sensors}, "no usable snapshots"},
	}
	for _, c := range cases {
		_, err := Fit(context.Background(), c.p, Settings{})
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: error %v, want one containing %q", c.name, err, c.want)
		}
	}

	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if _, err := Fit(ctx, Problem{Network: net, Sensors: bad, Snapshots: snaps[:len(snaps)-1]}, Settings{}); !errors.Is(err, context.Canceled) {
		t.Errorf("cancelled context: error %v, want context.Canceled", err)
	}
}

// TestReportRoundTrip checks the JSON report's snake_case keys and that
// the calibrated network writes and reads back with its new patterns
// (GeoJSON, shared/CONTRACT.md).
func TestReportRoundTrip(t *testing.T) {
	net := demoTown(t)
	sensors := netgen.DemoSensors(net)
	snaps := simulate(t, net, sensors, monday, 2, 6, nil)
	res, err := Fit(context.Background(), Problem{Network: net, Sensors: sensors, Snapshots: snaps}, Settings{SuspectCandidates: -1, NoWeekend: true})
	if err != nil {
		t.Fatal(err)
	}
	var buf bytes.Buffer
	if err := res.WriteJSON(&buf); err != nil {
		t.Fatal(err)
	}
	var back map[string]any
	if err := json.Unmarshal(buf.Bytes(), &back); err != nil {
		t.Fatalf("report is not JSON: %v", err)
	}
	for _, k := range []string{"status", "parameters", "sensors", "validation", "misfit_before", "misfit_after", "fit_days", "suspects"} {
		if _, ok := back[k]; !ok {
			t.Errorf("report has no key %q", k)
		}
	}
	if back["status"] != "converged" {
		t.Errorf("status %v, want converged", back["status"])
	}
	params := back["parameters"].([]any)
	first := params[0].(map[string]any)
	for _, k := range []string{"name", "kind", "estimate", "std_err", "identifiable", "prior"} {
		if _, ok := first[k]; !ok {
			t.Errorf("parameter has no key %q: %v", k, first)
		}
	}
	var geo bytes.Buffer
	if err := network.Write(&geo, res.Network); err != nil {
		t.Fatal(err)
	}
	again, probs := network.Parse(geo.Bytes(), "calibrated.geojson")
	if again == nil {
		t.Fatalf("calibrated network does not read back: %v", probs)
	}
	found := 0
	for name := range again.Patterns {
		if strings.HasSuffix(name, "-calibrated") {
			found++
			if len(again.Patterns[name]) != 24 {
				t.Errorf("pattern %s has %d values, want 24 at the hourly pattern step", name, len(again.Patterns[name]))
			}
		}
	}
	if found == 0 {
		t.Errorf("no calibrated pattern in the written network (patterns %v)", keys(again.Patterns))
	}
	for _, nd := range again.Nodes {
		if nd.Kind == network.Junction && nd.Demand > 0 && nd.Zone != "" && !strings.HasSuffix(nd.Pattern, "-calibrated") {
			t.Errorf("junction %s of zone %s still uses pattern %q", nd.ID, nd.Zone, nd.Pattern)
			break
		}
	}
}

// TestFitSeqThins checks that FitSeq keeps one snapshot per hour of a
// stream of half-hourly snapshots, and fits the same as Fit on the
// hourly ones.
func TestFitSeqThins(t *testing.T) {
	net := demoTown(t)
	sensors := netgen.DemoSensors(net)
	hourly := simulate(t, net, sensors, monday, 2, 8, nil)
	var stream []telemetry.Snapshot
	for _, s := range hourly {
		half := s
		half.Step = s.Step.Add(30 * time.Minute)
		stream = append(stream, s, half)
	}
	seq := func(yield func(telemetry.Snapshot, error) bool) {
		for _, s := range stream {
			if !yield(s, nil) {
				return
			}
		}
	}
	set := Settings{SuspectCandidates: -1, MaxIterations: 2}
	a, err := FitSeq(context.Background(), net, sensors, nil, seq, set)
	if err != nil {
		t.Fatal(err)
	}
	b, err := Fit(context.Background(), Problem{Network: net, Sensors: sensors, Snapshots: hourly}, set)
	if err != nil {
		t.Fatal(err)
	}
	if a.FitSnapshots != b.FitSnapshots || a.Rows != b.Rows || a.MisfitAfter != b.MisfitAfter {
		t.Errorf("FitSeq: %d snapshots, %d rows, misfit %.6g; Fit on hourly: %d, %d, %.6g",
			a.FitSnapshots, a.Rows, a.MisfitAfter, b.FitSnapshots, b.Rows, b.MisfitAfter)
	}
	if got, want := len(Thin(stream, time.Hour)), len(hourly); got != want {
		t.Errorf("Thin kept %d snapshots, want %d", got, want)
	}
	failing := func(yield func(telemetry.Snapshot, error) bool) {
		yield(telemetry.Snapshot{}, errors.New("store down"))
	}
	if _, err := FitSeq(context.Background(), net, sensors, nil, failing, set); err == nil || !strings.Contains(err.Error(), "store down") {
		t.Errorf("failing stream: error %v, want one naming the stream's error", err)
	}
}

// TestZoneClock checks that a zone's hour knots are local hours of its
// clock, and that Saturday is a weekend day there.
func TestZoneClock(t *testing.T) {
	net := demoTown(t)
	sensors := netgen.DemoSensors(net)
	east := time.FixedZone("east", 3*3600)
	// Friday 22:30 UTC is Saturday 01:30 in the east.
	step := time.Date(2026, 3, 6, 22, 30, 0, 0, time.UTC)
	vals := make([]telemetry.Aggregate, len(sensors))
	for i, s := range sensors {
		vals[i] = telemetry.Aggregate{Sensor: s.ID, Value: 1, Quality: telemetry.OK}
	}
	p := Problem{Network: net, Sensors: sensors, Snapshots: []telemetry.Snapshot{{Step: step, Values: vals}},
		Zones: map[string]*time.Location{netgen.ZoneHigh: east}}
	m, fit, _, _, _, _, err := setup(p, Settings{HoldOut: -1}.withDefaults(), func(string) {})
	if err != nil {
		t.Fatal(err)
	}
	s := fit[0]
	for z, name := range m.zones {
		wantA, wantB := "demand "+name+" weekday 22:00", "demand "+name+" weekday 23:00"
		if name == netgen.ZoneHigh {
			wantA, wantB = "demand "+name+" weekend 01:00", "demand "+name+" weekend 02:00"
		}
		if got := m.params[s.za[z]].name; got != wantA {
			t.Errorf("zone %s: knot before %s, want %s", name, got, wantA)
		}
		if got := m.params[s.zb[z]].name; got != wantB {
			t.Errorf("zone %s: knot after %s, want %s", name, got, wantB)
		}
		if !near(s.zf[z], 0.5, 1e-12) {
			t.Errorf("zone %s: weight of the knot after %.6g, want 0.5", name, s.zf[z])
		}
	}
}
