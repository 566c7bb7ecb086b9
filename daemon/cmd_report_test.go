package main

import (
	"bytes"
	"context"
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"plumbline/daemon/report"
	"plumbline/model/detect"
	"plumbline/model/finding"
	"plumbline/model/telemetry"
)

// The report of a replay says what the replay found and what the zone
// balances add up to: simulate the demo town's mixed fortnight, run
// `plumbline report`, and compare its JSON summary with an independent
// replay of the same readings whose step hook sums the balances itself.
func TestReportMatchesReplay(t *testing.T) {
	dir := t.TempDir()
	readings, truth := filepath.Join(dir, "r.csv"), filepath.Join(dir, "t.json")
	run := func(args ...string) string {
		t.Helper()
		var out, errb bytes.Buffer
		if code := dispatch(context.Background(), args, &out, &errb); code != 0 {
			t.Fatalf("plumbline %v: exit %d: %s", args, code, errb.String())
		}
		return out.String()
	}
	run("simulate", "--network", "../configs/demo-town.geojson", "--scenario", "../testdata/scenarios/demo-mixed.yaml", "--out", readings, "--truth", truth)
	page := filepath.Join(dir, "report.html")
	// Through the day after the leak's start (2026-03-11 14:00).
	const from, to = "2026-03-02T00:00:00Z", "2026-03-12T12:00:00Z"
	out := run("report", "--config", "../configs/demo-town.yaml", "--source", readings, "--no-store", "--quiet", "--out", page, "--from", from, "--to", to)
	if !strings.Contains(out, "report.html") {
		t.Errorf("report printed %q", out)
	}
	var sum report.Summary
	b, err := os.ReadFile(filepath.Join(dir, "report.json"))
	if err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal(b, &sum); err != nil {
		t.Fatal(err)
	}
	for _, p := range []string{page, filepath.Join(dir, "report.csv")} {
		if st, err := os.Stat(p); err != nil || st.Size() == 0 {
			t.Fatalf("%s: %v", p, err)
		}
	}

	// The independent replay: sums of flow × step over the steps with a
	// balance, per zone.
	type tot struct{ in, exp, imb float64 }
	sums := map[string]*tot{}
	res, err := replay(context.Background(), replayOptions{configPath: "../configs/demo-town.yaml", src: readings, noStore: true, from: from, to: to}, nil,
		func(s telemetry.Snapshot, r *detect.StepResult) error {
			for _, z := range r.Zones {
				if math.IsNaN(z.InflowLPS) || math.IsNaN(z.ExpectedLPS) || math.IsNaN(z.Imbalance) {
					continue
				}
				if sums[z.Zone] == nil {
					sums[z.Zone] = &tot{}
				}
				sec := s.Length.Seconds()
				sums[z.Zone].in += z.InflowLPS * sec / 1000
				sums[z.Zone].exp += z.ExpectedLPS * sec / 1000
				sums[z.Zone].imb += z.Imbalance * sec / 1000
			}
			return nil
		})
	if err != nil {
		t.Fatal(err)
	}
	if sum.Steps != res.Steps || sum.Readings != res.Readings {
		t.Errorf("summary steps %d readings %d, replay %d and %d", sum.Steps, sum.Readings, res.Steps, res.Readings)
	}
	close := func(what string, got, want float64) {
		t.Helper()
		// The summary keeps 9 significant digits.
		if d := math.Abs(got - want); d > 1e-8*math.Max(1, math.Abs(want)) {
			t.Errorf("%s: summary %.10g, replay sum %.10g (difference %.3g)", what, got, want, d)
		}
	}
	var netImb float64
	for _, z := range sum.Zones {
		s := sums[z.Zone]
		if s == nil {
			t.Errorf("zone %s: no balance in the replay", z.Zone)
			continue
		}
		close(z.Zone+" inflow m³", z.InflowM3, s.in)
		close(z.Zone+" expected m³", z.ExpectedM3, s.exp)
		close(z.Zone+" imbalance m³", z.ImbalanceM3, s.imb)
		netImb += s.imb
	}
	close("network imbalance m³", sum.Network.ImbalanceM3, netImb)
	if len(sum.Findings) != len(res.Findings) {
		t.Fatalf("summary has %d findings, replay %d", len(sum.Findings), len(res.Findings))
	}
	var leaks int
	for i, f := range sum.Findings {
		g := res.Findings[i]
		if f.Kind != g.Kind || f.Zone != g.Zone || !f.Onset.Equal(g.Onset) || !f.Raised.Equal(g.Raised) || f.SizeLPS != g.SizeLPS ||
			len(f.Candidates) != len(g.Candidates) || (len(g.Candidates) > 0 && f.Candidates[0] != g.Candidates[0]) {
			t.Errorf("finding %d: summary %+v, replay %+v", i, f.Finding, g)
		}
		if f.Kind == finding.Leak {
			leaks++
			want := g.SizeLPS * sum.To.Sub(g.Onset).Seconds() / 1000
			if f.VolumeLostM3 == nil {
				t.Errorf("leak %s: no volume lost", f.Label)
			} else {
				close(f.Label+" volume lost m³", *f.VolumeLostM3, want)
			}
		}
	}
	if leaks == 0 {
		t.Errorf("the demo fortnight's leak is not in the report: %+v", sum.Findings)
	}
	if len(sum.Cautions) == 0 {
		t.Error("no cautions in the summary")
	}
	// replay --report writes the report from the same replay (a short
	// period: this checks the flag's wiring).
	page2 := filepath.Join(dir, "again.html")
	run("replay", "--config", "../configs/demo-town.yaml", "--source", readings, "--no-store", "--quiet",
		"--findings", filepath.Join(dir, "f.json"), "--report", page2, "--from", from, "--to", "2026-03-03T00:00:00Z")
	b2, err := os.ReadFile(filepath.Join(dir, "again.json"))
	if err != nil {
		t.Fatal(err)
	}
	var sum2 report.Summary
	if err := json.Unmarshal(b2, &sum2); err != nil {
		t.Fatal(err)
	}
	if sum2.Steps != 288 || sum2.Network.BalanceSteps == 0 {
		t.Errorf("replay --report over one day: %d steps, %d with a balance; want 288 and some", sum2.Steps, sum2.Network.BalanceSteps)
	}
}
