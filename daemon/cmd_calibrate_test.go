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
	"time"

	"plumbline/model/calib"
	"plumbline/model/network"
	"plumbline/model/sim"
)

// calibrate on the commands a user runs: the demo town's pipes are
// rougher in truth than in the records (older pipes more, sim.Perturb);
// readings simulated from the truth go through `plumbline calibrate`, and
// every roughness group the data identify comes out nearer its true value
// than the record was, the true value within two standard errors for
// nearly all.
func TestCalibrateRecoversAgedPipes(t *testing.T) {
	dir := t.TempDir()
	cfg, net, err := demoConfig(dir)
	if err != nil {
		t.Fatal(err)
	}
	truth, _, err := sim.Perturb(net, sim.Mismatch{Roughness: 0.3, Seed: 4})
	if err != nil {
		t.Fatal(err)
	}
	start := time.Date(2026, 3, 2, 0, 0, 0, 0, time.UTC)
	readings := filepath.Join(dir, "r.csv")
	f, err := os.Create(readings)
	if err != nil {
		t.Fatal(err)
	}
	w := sim.NewCSVWriter(f)
	if _, err := sim.Run(context.Background(), truth, sim.Settings{Start: start, Duration: 6 * 24 * time.Hour, Step: cfg.Step, Seed: 9, Sensors: cfg.Sensors,
		DemandNoise: 0.05, DailyVariation: 0.02}, w.Write, sim.Options{}); err != nil {
		t.Fatal(err)
	}
	w.Flush()
	f.Close()
	var out, errb bytes.Buffer
	report := filepath.Join(dir, "report.json")
	args := []string{"calibrate", "--config", filepath.Join(dir, "demo-town.yaml"), "--source", readings, "--out", filepath.Join(dir, "calibrated.geojson"), "--report", report}
	if code := dispatch(context.Background(), args, &out, &errb); code != 0 {
		t.Fatalf("calibrate: exit %d: %s", code, errb.String())
	}
	b, err := os.ReadFile(report)
	if err != nil {
		t.Fatal(err)
	}
	var res struct {
		Parameters []struct {
			Kind                    any     `json:"kind"`
			Group                   string  `json:"group"`
			Prior, Estimate, StdErr float64 `json:"-"`
			PriorJ                  float64 `json:"prior"`
			EstimateJ               float64 `json:"estimate"`
			StdErrJ                 float64 `json:"std_err"`
			Identifiable            bool    `json:"identifiable"`
		} `json:"parameters"`
	}
	if err := json.Unmarshal(b, &res); err != nil {
		t.Fatalf("report is not JSON: %v\n%s", err, b[:min(len(b), 400)])
	}
	// The true group roughness: the length-weighted geometric mean of the
	// true network's C over the group's pipes, as the report defines Prior.
	trueC := map[string][2]float64{}
	for i, l := range truth.Links {
		if l.Kind != network.Pipe {
			continue
		}
		g := calib.GroupOf(&net.Links[i])
		v := trueC[g]
		v[0] += l.Length * math.Log(l.Roughness)
		v[1] += l.Length
		trueC[g] = v
	}
	checked, covered := 0, 0
	for _, p := range res.Parameters {
		p.Prior, p.Estimate, p.StdErr = p.PriorJ, p.EstimateJ, p.StdErrJ
		if p.Group == "" || !p.Identifiable {
			continue
		}
		v, ok := trueC[p.Group]
		if !ok {
			t.Fatalf("group %q not in the network", p.Group)
		}
		want := math.Exp(v[0] / v[1])
		before, after := math.Abs(p.Prior-want), math.Abs(p.Estimate-want)
		if after > before {
			t.Errorf("group %s: fitted C %.1f is further from the truth %.1f than the record %.1f", p.Group, p.Estimate, want, p.Prior)
		}
		t.Logf("group %s: record %.1f, fitted %.1f ± %.1f, truth %.1f", p.Group, p.Prior, p.Estimate, p.StdErr, want)
		if after <= 2*p.StdErr {
			covered++
		}
		checked++
	}
	if checked == 0 {
		t.Fatalf("no roughness group identified:\n%s", out.String())
	}
	// Within two standard errors lies the truth in 95 % of cases for a
	// normal error (any statistics text): of six groups, at least five
	// (with 95 % each, all but one fall inside with probability 0.97).
	if float64(covered) < 0.8*float64(checked) {
		t.Errorf("only %d of %d groups within 2 standard errors of the truth", covered, checked)
	}
	if _, err := network.ReadFile(filepath.Join(dir, "calibrated.geojson")); err != nil {
		t.Errorf("calibrated network does not read back: %v", err)
	}
	// Beside the network: the residual scatter by hour. A residual holds
	// at least the instrument's noise, whose σ is the stated accuracy
	// (sim adds Gaussian noise of the accuracy), so no logger's mean
	// hourly σ can lie far below it.
	tab, err := calib.ReadNoiseFile(filepath.Join(dir, "calibrated.noise.json"))
	if err != nil {
		t.Fatalf("noise file: %v", err)
	}
	pressures := 0
	for _, sn := range tab.Sensors {
		if sn.Unit != "m" || sn.Accuracy <= 0 {
			continue
		}
		var sum float64
		n := 0
		for _, v := range sn.SigmaByHour {
			if !math.IsNaN(v) {
				sum += v
				n++
			}
		}
		if n < 20 {
			t.Errorf("noise file: %s has σ for %d hours, want at least 20 of 24 after 6 days", sn.ID, n)
			continue
		}
		if mean := sum / float64(n); mean < 0.7*sn.Accuracy {
			t.Errorf("noise file: %s mean hourly σ %.3f m is below its instrument accuracy %.3f m", sn.ID, mean, sn.Accuracy)
		}
		pressures++
	}
	if pressures == 0 {
		t.Errorf("noise file lists no logger in m: %+v", tab)
	}
	// run and replay take both: the calibrated network as the
	// configuration's network, the scatter as its calibration.noise_file.
	yml, err := os.ReadFile(filepath.Join(dir, "demo-town.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	cal := strings.Replace(string(yml), "network: demo-town.geojson", "network: calibrated.geojson", 1) +
		"calibration:\n  noise_file: calibrated.noise.json\n"
	if err := os.WriteFile(filepath.Join(dir, "calibrated.yaml"), []byte(cal), 0o644); err != nil {
		t.Fatal(err)
	}
	var rout, rerr bytes.Buffer
	if code := dispatch(context.Background(), []string{"replay", "--config", filepath.Join(dir, "calibrated.yaml"), "--source", readings,
		"--findings", filepath.Join(dir, "found.json"), "--no-store", "--quiet"}, &rout, &rerr); code != 0 || strings.Contains(rerr.String(), "warning") {
		t.Errorf("replay with the calibrated network and noise file: exit %d: %s", code, rerr.String())
	}
	if !strings.Contains(out.String(), "RMSE") && !strings.Contains(strings.ToLower(out.String()), "rmse") {
		t.Errorf("the text report names no RMSE:\n%s", out.String())
	}
}
