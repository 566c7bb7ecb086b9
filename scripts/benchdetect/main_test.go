package main

import (
	"bytes"
	"encoding/json"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
	"time"

	"plumbline/daemon/config"
	"plumbline/model/finding"
	"plumbline/model/network"
	"plumbline/model/scenario"
	"plumbline/model/score"
)

// TestNightOf checks the night count against hand-worked cases for the
// window 02:00-04:00 UTC.
func TestNightOf(t *testing.T) {
	cfg := &config.Config{Zones: []config.Zone{{ID: "z", Night: config.NightWindow{Start: 2 * time.Hour, End: 4 * time.Hour}, TimeZone: time.UTC}}}
	at := func(s string) time.Time {
		v, err := time.Parse(time.RFC3339, s)
		if err != nil {
			t.Fatal(err)
		}
		return v
	}
	cases := []struct {
		start, raised string
		want          int
	}{
		{"2026-03-10T17:00:00Z", "2026-03-11T03:30:00Z", 1}, // during the first night
		{"2026-03-10T17:00:00Z", "2026-03-11T04:00:00Z", 1}, // at its end
		{"2026-03-10T17:00:00Z", "2026-03-11T04:05:00Z", 2}, // just after
		{"2026-03-10T17:00:00Z", "2026-03-10T18:00:00Z", 1}, // before any night
		{"2026-03-10T03:00:00Z", "2026-03-10T03:30:00Z", 1}, // started inside a window: the next night is the first
		{"2026-03-10T03:00:00Z", "2026-03-11T05:00:00Z", 2},
		{"2026-03-10T02:00:00Z", "2026-03-12T03:00:00Z", 3}, // a window opening at the start counts
	}
	for _, c := range cases {
		if got := nightOf(cfg, "z", at(c.start), at(c.raised)); got != c.want {
			t.Errorf("start %s raised %s: got night %d, want %d", c.start, c.raised, got, c.want)
		}
	}
	// A window across midnight (23:00-01:00), in a zone east of UTC.
	loc := time.FixedZone("UTC+2", 2*3600)
	cfg.Zones[0] = config.Zone{ID: "z", Night: config.NightWindow{Start: 23 * time.Hour, End: time.Hour}, TimeZone: loc}
	// Start 12:00 local on the 10th; first window 23:00 10th - 01:00 11th
	// local = 21:00-23:00 UTC on the 10th.
	if got := nightOf(cfg, "z", at("2026-03-10T10:00:00Z"), at("2026-03-10T22:59:00Z")); got != 1 {
		t.Errorf("wrapping window: got night %d, want 1", got)
	}
	if got := nightOf(cfg, "z", at("2026-03-10T10:00:00Z"), at("2026-03-10T23:01:00Z")); got != 2 {
		t.Errorf("wrapping window, after its end: got night %d, want 2", got)
	}
}

// TestAggregate scores made-up findings against two committed scenarios
// with model/score, writes the results as the runner does, and checks the
// table's figures, worked by hand.
func TestAggregate(t *testing.T) {
	t.Chdir("../..")
	res := t.TempDir()
	net, err := network.ReadFile("configs/demo-town.geojson")
	if err != nil {
		t.Fatal(err)
	}
	start := time.Date(2026, 3, 2, 0, 0, 0, 0, time.UTC)
	write := func(name string, sc *scenario.Scenario, fs []finding.Finding, to time.Time) {
		rep := score.Score(sc.Truth(net), fs, net, score.Options{Start: start.Add(7 * 24 * time.Hour), End: to})
		dir := filepath.Join(res, "demo", "exact", name)
		if err := os.MkdirAll(dir, 0o755); err != nil {
			t.Fatal(err)
		}
		data, _ := json.Marshal(rep)
		if err := os.WriteFile(filepath.Join(dir, "score.json"), data, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	leak, err := scenario.LoadFile("testdata/scenarios/demo/exact/leak-central-2-lps.yaml")
	if err != nil {
		t.Fatal(err)
	}
	e := leak.Events[0]
	write("leak-central-2-lps", leak, []finding.Finding{
		{Kind: finding.Leak, Zone: "central", Raised: e.Start.Add(5 * time.Hour), Candidates: []finding.Candidate{{ID: "J-1", Score: 1}, {ID: e.At, Score: 0.9}}},
	}, leak.End())
	quiet, err := scenario.LoadFile("testdata/scenarios/demo/exact/quiet-60d.yaml")
	if err != nil {
		t.Fatal(err)
	}
	write("quiet-60d", quiet, []finding.Finding{
		{Kind: finding.Leak, Zone: "low", Raised: start.Add(20 * 24 * time.Hour), Candidates: []finding.Candidate{{ID: "J-3001"}}},
	}, quiet.End())
	// A third run failed.
	if err := os.MkdirAll(filepath.Join(res, "demo", "exact", "burst-central"), 0o755); err != nil {
		t.Fatal(err)
	}
	os.WriteFile(filepath.Join(res, "demo", "exact", "burst-central", "failed"), []byte("replay: out of luck\n"), 0o644)

	var manifest strings.Builder
	for _, l := range []string{"leak-central-2-lps", "quiet-60d", "burst-central"} {
		sc := map[string]*scenario.Scenario{"leak-central-2-lps": leak, "quiet-60d": quiet, "burst-central": leak}[l]
		manifest.WriteString(strings.Join([]string{"demo", "exact", "testdata/scenarios/demo/exact/" + l + ".yaml",
			"configs/demo-town.geojson", "configs/demo-town.yaml",
			start.Add(7 * 24 * time.Hour).Format(time.RFC3339), sc.End().Format(time.RFC3339)}, "\t") + "\n")
	}
	suite := filepath.Join(res, "suite.tsv")
	os.WriteFile(suite, []byte(manifest.String()), 0o644)

	var out bytes.Buffer
	if err := run(&out, suite, res); err != nil {
		t.Fatal(err)
	}
	got := out.String()
	// Quiet: 1 false finding over 3 zones × 53 days = 159 zone-days, so
	// 1 / (159/30) = 0.19 per zone per 30 days.
	for _, want := range []string{
		`condition: exact \(3 runs, 1 FAILED\)`,
		`leak >=2 L/s\s+1\s+1\s+0\s+100%\s+5\.0 h\s+5\.0 h\s+1\s+100%`,
		`false findings: quiet runs 1 in 159 zone-days = 0\.19 per zone per 30 days \(leak 1\)`,
		`leaks >=2 L/s detected\s+>= 95%\s+100%\s+yes`,
		`false findings per zone per 30 d \(quiet\)\s+<= 1\s+0\.19\s+yes`,
		`demo/exact/burst-central: replay: out of luck`,
	} {
		if !regexp.MustCompile(want).MatchString(got) {
			t.Errorf("output lacks /%s/:\n%s", want, got)
		}
	}
}
