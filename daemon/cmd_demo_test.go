package main

import (
	"flag"
	"os"
	"testing"

	"plumbline/model/netgen"
)

var update = flag.Bool("update", false, "rewrite golden files")

// configs/demo-town.yaml is what the demo's own code writes (golden
// file; `go test ./daemon -run DemoConfigFile -update` rewrites it).
func TestDemoConfigFile(t *testing.T) {
	net, err := netgen.DemoTown()
	if err != nil {
		t.Fatal(err)
	}
	want := demoConfigYAML(net, "../plumbline-data")
	if *update {
		if err := os.WriteFile("../configs/demo-town.yaml", []byte(want), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	got, err := os.ReadFile("../configs/demo-town.yaml")
	if err != nil {
		t.Fatal(err)
	}
	if string(got) != want {
		t.Errorf("configs/demo-town.yaml differs from demoConfigYAML; run go test ./daemon -run DemoConfigFile -update")
	}
}

// The demo's events are placed by rule where the loggers can see them,
// and never on the supply main (a choke there empties the town).
func TestDemoEvents(t *testing.T) {
	cfg, net, err := demoConfig(t.TempDir())
	if err != nil {
		t.Fatal(err)
	}
	evs, err := demoEvents(net, cfg.Sensors)
	if err != nil {
		t.Fatal(err)
	}
	if len(evs) != 3 || evs[0].Kind != "leak" || evs[1].Kind != "blockage" || evs[2].Kind != "sensor-fault" {
		t.Fatalf("events %+v", evs)
	}
	l, ok := net.LinkIndex(evs[1].At)
	if !ok || net.Nodes[net.Links[l].From].Kind != 0 || net.Nodes[net.Links[l].To].Kind != 0 {
		t.Errorf("blockage on %s, which is not a main between two junctions", evs[1].At)
	}
}
