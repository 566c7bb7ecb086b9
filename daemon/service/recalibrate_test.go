package service

import (
	"context"
	"fmt"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"testing"
	"time"

	"github.com/rs/zerolog"

	"plumbline/daemon/config"
	"plumbline/model/netgen"
	"plumbline/model/network"
	"plumbline/model/sim"
	"plumbline/model/telemetry"
	"plumbline/model/units"
)

// demoService writes the demo town and its configuration (file store,
// embedded broker, HTTP on a free port) into dir and loads it.
func demoService(t *testing.T, dir string) (*config.Config, *network.Network) {
	t.Helper()
	net, err := netgen.DemoTown()
	if err != nil {
		t.Fatal(err)
	}
	if err := network.WriteFile(filepath.Join(dir, "town.geojson"), net); err != nil {
		t.Fatal(err)
	}
	sens := netgen.DemoSensors(net)
	var b strings.Builder
	b.WriteString("network: town.geojson\nstep: 15m\ndata_dir: data\nsensors:\n")
	for _, s := range sens {
		fmt.Fprintf(&b, "  - {id: %s, quantity: %s, at: %s, topic: %s, unit: %s, accuracy: %g}\n", s.ID, s.Quantity, s.At, s.Topic, s.Unit, s.Accuracy)
	}
	b.WriteString("zones:\n")
	for _, z := range netgen.DemoZones(net, sens) {
		fmt.Fprintf(&b, "  - {id: %s, inlets: [%s], outlets: [%s], night_use_lps: %g}\n", z.Zone, strings.Join(z.Inlets, ", "), strings.Join(z.Outlets, ", "), z.NightUseLps)
	}
	b.WriteString("http:\n  listen: 127.0.0.1:0\n")
	path := filepath.Join(dir, "town.yaml")
	if err := os.WriteFile(path, []byte(b.String()), 0o644); err != nil {
		t.Fatal(err)
	}
	cfg, err := config.LoadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	return cfg, net
}

// feed simulates the true network over [start, start+d) and hands the
// readings to the service step by step, as MQTT would.
func feed(t *testing.T, svc *Service, truth *network.Network, cfg *config.Config, start time.Time, d time.Duration, seed uint64) {
	t.Helper()
	var batch []telemetry.Reading
	var at time.Time
	flush := func() {
		if len(batch) > 0 {
			if err := svc.Accept(context.Background(), batch); err != nil {
				t.Fatal(err)
			}
			batch = batch[:0]
		}
	}
	_, err := sim.Run(context.Background(), truth, sim.Settings{Start: start, Duration: d, Step: cfg.Step, Seed: seed, Sensors: cfg.Sensors,
		DemandNoise: 0.05, DailyVariation: 0.02}, func(r sim.Reading) error {
		if h := r.Time.Truncate(time.Hour); !h.Equal(at) {
			flush()
			at = h
		}
		sen, _ := cfg.Sensor(r.Sensor)
		v, err := units.ToCanonical(sen.Quantity, r.Unit, r.Value)
		if err != nil {
			return err
		}
		rd := r.Reading
		rd.Value = v
		batch = append(batch, rd)
		return nil
	}, sim.Options{})
	if err != nil {
		t.Fatal(err)
	}
	flush()
	if err := svc.Flush(start.Add(d)); err != nil {
		t.Fatal(err)
	}
}

// TestRecalibrationAdoptsOnlyABetterModel runs the service on the demo
// town whose pipes are older in truth than in the records (sim.Perturb):
// the periodic recalibration (a short interval, a three-day window) fits
// the stored readings while the service runs, finds the calibration
// validates better on the held-out day than the recorded network,
// adopts it (data_dir/calibrated.geojson, rougher pipes) and the
// pipeline goes on on the new model, with no finding. A second
// recalibration on the same readings gives the same network, which is
// not better than itself, and is not adopted.
func TestRecalibrationAdoptsOnlyABetterModel(t *testing.T) {
	dir := t.TempDir()
	cfg, net := demoService(t, dir)
	truth, _, err := sim.Perturb(net, sim.Mismatch{Roughness: 0.35, Seed: 4})
	if err != nil {
		t.Fatal(err)
	}
	start := time.Date(2026, 3, 2, 0, 0, 0, 0, time.UTC)
	svc, err := New(cfg, Options{Logger: zerolog.Nop(), NoWallClock: true, MaxPast: 1 << 62, Listen: "127.0.0.1:0",
		CalibrationEvery: 200 * time.Millisecond, CalibrationWindow: 3 * 24 * time.Hour})
	if err != nil {
		t.Fatal(err)
	}
	t0 := time.Now()
	feed(t, svc, truth, cfg, start, 3*24*time.Hour, 11)
	t.Logf("fed 3 days in %s", time.Since(t0))

	first := svc.pipe
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() { done <- svc.Run(ctx) }()
	deadline := time.Now().Add(2 * time.Minute)
	var dec *Decision
	for time.Now().Before(deadline) {
		if dec = svc.LastCalibration(); dec != nil {
			break
		}
		time.Sleep(100 * time.Millisecond)
	}
	if dec == nil {
		cancel()
		<-done
		t.Fatal("no recalibration within 2 minutes")
	}
	t.Logf("decision: %+v", *dec)
	if !dec.Adopted || !(dec.NewMisfit < dec.CurrentMisfit) {
		t.Errorf("first recalibration: adopted %v, misfit %.3f new against %.3f recorded; want adopted and lower (%s)", dec.Adopted, dec.NewMisfit, dec.CurrentMisfit, dec.Reason)
	}
	if len(dec.HeldOutDays) == 0 || dec.Snapshots < 70 {
		t.Errorf("held-out days %v, %d snapshots; want at least one day and the 72 hours of the window", dec.HeldOutDays, dec.Snapshots)
	}
	adopted, err := network.ReadFile(filepath.Join(cfg.DataDir, "calibrated.geojson"))
	if err != nil {
		t.Fatalf("adopted calibration not written: %v", err)
	}
	// The true pipes are rougher (lower C) than recorded: the adopted
	// network's length-weighted mean C moves from the record towards the
	// truth's.
	meanC := func(n *network.Network) float64 {
		var s, w float64
		for _, l := range n.Links {
			if l.Kind == network.Pipe && l.Roughness > 0 {
				s += l.Length * l.Roughness
				w += l.Length
			}
		}
		return s / w
	}
	rec, tr, got := meanC(net), meanC(truth), meanC(adopted)
	if !(got < rec && got-tr < (rec-tr)/2) {
		t.Errorf("mean C: record %.1f, truth %.1f, adopted %.1f: want the adopted at least half way to the truth", rec, tr, got)
	}
	// Same readings, same fit: not better than the network in use.
	again, err := svc.Recalibrate(ctx)
	if err != nil {
		t.Fatal(err)
	}
	if again.Adopted {
		t.Errorf("second recalibration on the same readings adopted (%s)", again.Reason)
	}
	// Detection goes on on the adopted model while the service runs.
	t1 := time.Now()
	feed(t, svc, truth, cfg, start.Add(3*24*time.Hour), 6*time.Hour, 12)
	svc.mu.Lock()
	steps, onNew := svc.pipe.Steps(), svc.pipe != first && svc.net != net
	svc.mu.Unlock()
	if steps < 6*4-2 || !onNew {
		t.Errorf("after the swap the pipeline took %d steps of 15 min in 6 h (want about 24), on the adopted network: %v", steps, onNew)
	}
	t.Logf("fed 6 hours more in %s", time.Since(t1))
	cancel()
	if err := <-done; err != nil {
		t.Fatalf("Run: %v", err)
	}
	var kinds []string
	for _, f := range svc.Findings() {
		kinds = append(kinds, string(f.Kind)+" "+f.Evidence)
	}
	sort.Strings(kinds)
	for _, k := range kinds {
		t.Errorf("finding in a quiet period: %s", k)
	}
}
