package main

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"os"
	"strings"
	"testing"

	"plumbline/model/network"
)

func runCheckArgs(t *testing.T, args ...string) (string, string, error) {
	t.Helper()
	var out, errb bytes.Buffer
	err := runCheck(context.Background(), args, &out, &errb)
	return out.String(), errb.String(), err
}

func TestCheckNetworkListsEveryError(t *testing.T) {
	// Every bad network file: each error the reader finds is printed,
	// one per line with its place, and the command fails.
	const dir = "../testdata/network/"
	for _, name := range []string{"missing-required.bad.geojson", "pump-curves.bad.geojson", "no-source.bad.geojson"} {
		path := dir + name
		data, err := os.ReadFile(path)
		if err != nil {
			t.Fatal(err)
		}
		_, probs := network.Parse(data, path)
		out, _, err := runCheckArgs(t, "--network", path)
		if !errors.Is(err, errCheckFailed) {
			t.Errorf("%s: got error %v, want errCheckFailed", name, err)
		}
		lines := strings.Split(strings.TrimSpace(out), "\n")
		if len(lines) != len(probs) {
			t.Errorf("%s: printed %d lines, want %d problems:\n%s", name, len(lines), len(probs), out)
		}
		for _, p := range probs {
			if !strings.Contains(out, p.String()+"\n") {
				t.Errorf("%s: output lacks %q", name, p.String())
			}
		}
	}
	// Spot checks against the file itself (lines as written in it).
	out, _, _ := runCheckArgs(t, "--network", dir+"missing-required.bad.geojson")
	for _, w := range []string{
		"missing-required.bad.geojson:7: feature J-1: elevation_m: required for a junction, missing",
		"missing-required.bad.geojson:11: feature features[6]: id: missing",
		"missing-required.bad.geojson:14: feature V-1: valve: required for a valve, missing",
	} {
		if !strings.Contains(out, w) {
			t.Errorf("output lacks %q:\n%s", w, out)
		}
	}
}

func TestCheckNetworkJSON(t *testing.T) {
	out, _, err := runCheckArgs(t, "--network", "../testdata/network/self-loop.bad.geojson", "--json")
	if !errors.Is(err, errCheckFailed) {
		t.Errorf("got error %v, want errCheckFailed", err)
	}
	var got checkOutput
	if err := json.Unmarshal([]byte(out), &got); err != nil {
		t.Fatalf("not JSON: %v\n%s", err, out)
	}
	want := checkProblem{Place: "../testdata/network/self-loop.bad.geojson:8", Feature: "P-2", Property: "to",
		Message: `link from node "J-1" to itself`, Severity: "error"}
	if got.OK || len(got.Problems) != 1 || got.Problems[0] != want || got.Summary != nil {
		t.Errorf("got %+v, want ok false with one problem %+v", got, want)
	}
	// The keys are those of the contract.
	var raw map[string]any
	_ = json.Unmarshal([]byte(out), &raw)
	p := raw["problems"].([]any)[0].(map[string]any)
	for _, k := range []string{"place", "feature", "message", "severity"} {
		if _, ok := p[k]; !ok {
			t.Errorf("problem lacks key %q: %v", k, p)
		}
	}
}

func TestCheckGoodFiles(t *testing.T) {
	out, _, err := runCheckArgs(t, "--network", "../testdata/network/two-loop.geojson")
	if err != nil {
		t.Fatalf("two-loop: %v\n%s", err, out)
	}
	want := "ok: network ../testdata/network/two-loop.geojson: 8 junctions, 1 reservoir, 0 tanks, 10 pipes, 0 pumps, 0 valves, 2 zones\n"
	if out != want {
		t.Errorf("got %q, want %q", out, want)
	}
	out, _, err = runCheckArgs(t, "--config", "../testdata/config/good.yaml", "--json")
	if err != nil {
		t.Fatalf("good.yaml: %v\n%s", err, out)
	}
	var got checkOutput
	if err := json.Unmarshal([]byte(out), &got); err != nil {
		t.Fatal(err)
	}
	if !got.OK || len(got.Problems) != 0 || got.Summary == nil || got.Summary.Sensors != 6 ||
		got.Summary.ConfigZones != 2 || got.Summary.Junctions != 8 || got.Summary.Pipes != 10 {
		t.Errorf("good.yaml: got %s", out)
	}
}

func TestCheckConfigListsEveryError(t *testing.T) {
	out, _, err := runCheckArgs(t, "--config", "../testdata/config/network-bad.bad.yaml")
	if !errors.Is(err, errCheckFailed) {
		t.Errorf("got error %v, want errCheckFailed", err)
	}
	// The configuration's own error and the network file's, each with
	// its file and line.
	for _, w := range []string{
		"network-bad.bad.yaml:1: network: the network file ../network/unknown-ends.bad.geojson has errors",
		`unknown-ends.bad.geojson:8: feature P-2: to: unknown node "J-9"`,
		`unknown-ends.bad.geojson:9: feature P-3: from: "P-1" is a link, not a node`,
	} {
		if !strings.Contains(out, w) {
			t.Errorf("output lacks %q:\n%s", w, out)
		}
	}
	if n := strings.Count(out, "\n"); n != 3 {
		t.Errorf("got %d lines, want 3:\n%s", n, out)
	}
	out, _, err = runCheckArgs(t, "--config", "../testdata/config/zones.bad.yaml")
	if err == nil || strings.Count(out, "\n") != 12 {
		t.Errorf("zones.bad.yaml: got error %v and %d lines, want 12:\n%s", err, strings.Count(out, "\n"), out)
	}
}

func TestCheckUsage(t *testing.T) {
	for _, args := range [][]string{nil, {"--network", "a", "--config", "b"}, {"--nope"}} {
		if _, _, err := runCheckArgs(t, args...); !errors.Is(err, errUsage) {
			t.Errorf("%v: got %v, want errUsage", args, err)
		}
	}
	if _, _, err := runCheckArgs(t, "--network", "no/such/file.geojson"); err == nil || errors.Is(err, errUsage) {
		t.Errorf("missing file: got %v, want a read error", err)
	}
}

func TestCheckConfigAlertsSection(t *testing.T) {
	// The alerts section is checked by package alerts; its errors carry
	// the configuration's file and line. Here the configuration also has
	// an error of its own (an unknown zone sensor), and both are listed.
	dir := t.TempDir()
	net, err := os.ReadFile("../testdata/network/two-loop.geojson")
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(dir+"/net.geojson", net, 0o644); err != nil {
		t.Fatal(err)
	}
	cfg := `network: net.geojson
sensors:
  - {id: F-in, quantity: flow, at: P-1, topic: t/F-in}
zones:
  - {id: west, inlets: [F-x]}
alerts:
  routes:
    - name: all
      levels:
        - {notify: [nobody]}
`
	if err := os.WriteFile(dir+"/c.yaml", []byte(cfg), 0o644); err != nil {
		t.Fatal(err)
	}
	out, _, err := runCheckArgs(t, "--config", dir+"/c.yaml")
	if !errors.Is(err, errCheckFailed) {
		t.Errorf("got error %v, want errCheckFailed", err)
	}
	for _, w := range []string{
		dir + `/c.yaml:5: zone west: inlets: "F-x" is not a sensor of this configuration`,
		dir + "/c.yaml:10: alerts.routes[0].levels[0].notify",
		"nobody",
	} {
		if !strings.Contains(out, w) {
			t.Errorf("output lacks %q:\n%s", w, out)
		}
	}
}
