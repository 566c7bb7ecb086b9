package main

import (
	"bytes"
	"context"
	"encoding/json"
	"os"
	"path/filepath"
	"testing"

	"plumbline/model/finding"
)

// End to end through the commands a user runs: simulate the demo town with
// a leak and a sensor fault, replay the readings file through the same
// pipeline as the service, and find both, each of its own kind.
func TestSimulateReplayFindsInjectedEvents(t *testing.T) {
	dir := t.TempDir()
	readings, truth, found := filepath.Join(dir, "r.csv"), filepath.Join(dir, "t.json"), filepath.Join(dir, "f.json")
	run := func(args ...string) string {
		t.Helper()
		var out, errb bytes.Buffer
		if code := dispatch(context.Background(), args, &out, &errb); code != 0 {
			t.Fatalf("plumbline %v: exit %d: %s", args, code, errb.String())
		}
		return out.String()
	}
	run("simulate", "--network", "../configs/demo-town.geojson", "--scenario", "../testdata/scenarios/demo-mixed.yaml", "--out", readings, "--truth", truth)
	run("replay", "--config", "../configs/demo-town.yaml", "--source", readings, "--findings", found, "--no-store", "--quiet")
	var fs []finding.Finding
	b, err := os.ReadFile(found)
	if err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal(b, &fs); err != nil {
		t.Fatal(err)
	}
	var leak, fault bool
	for _, f := range fs {
		t.Logf("%s %s raised %s best %v", f.Kind, f.Zone, f.Raised, f.Candidates)
		switch {
		case f.Kind == finding.Leak && f.Zone == "low":
			leak = true
		case f.Kind == finding.SensorFault && len(f.Candidates) > 0 && f.Candidates[0].ID == "P-high-03":
			fault = true
		}
	}
	if !leak || !fault {
		t.Errorf("leak in low found: %v; fault on P-high-03 found: %v", leak, fault)
	}
	out := run("score", "--truth", truth, "--findings", found, "--network", "../configs/demo-town.geojson", "--json")
	if !json.Valid([]byte(out)) {
		t.Errorf("score --json printed no JSON: %s", out)
	}
}
