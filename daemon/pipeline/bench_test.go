package pipeline

import (
	"context"
	"fmt"
	"os"
	"path/filepath"
	"syscall"
	"testing"
	"time"

	"plumbline/daemon/config"
	"plumbline/ingest/filestore"
	"plumbline/ingest/lineproto"
	"plumbline/ingest/readfile"
	"plumbline/ingest/source"
	"plumbline/model/netgen"
	"plumbline/model/network"
	"plumbline/model/sim"
	"plumbline/model/telemetry"
)

// BenchmarkReplay30d5k is the replay target of the detector issue (item
// 7): 30 days of 1-minute readings from 60 sensors on the 5,000-junction
// town through the real replay path — a readings file (CSV, as
// `plumbline replay --source FILE` reads it) → the aligner → the
// detector → result points — in ≤ 60 s on 2 cores. ns/op is one whole
// replay. The readings are simulated once (sim.Run, default demand and
// instrument noise, seed 1) into a file in the benchmark's temporary
// folder, outside the timing. Sub-benchmarks: store=none counts the
// result points and drops them (the pipeline alone); store=file writes
// them to the embedded file store, as a replay without InfluxDB does.
//
//	go test -run '^$' -bench Replay30d5k -benchtime 1x ./daemon/pipeline
//
// cpu-s/op beside ns/op: the machine is shared, and CPU time is inflated
// much less by other work than the wall clock.
func BenchmarkReplay30d5k(b *testing.B) {
	cfg := benchTown5k(b)
	start := time.Date(2026, 3, 2, 0, 0, 0, 0, time.UTC)
	const days = 30
	end := start.Add(days * 24 * time.Hour)
	path := filepath.Join(b.TempDir(), "readings.csv")
	t0 := time.Now()
	if err := benchReadings(path, cfg, start, days); err != nil {
		b.Fatal(err)
	}
	b.Logf("simulated %d days of 1-minute readings in %v", days, time.Since(t0).Round(time.Second))
	ids := make([]string, len(cfg.Sensors))
	for i, s := range cfg.Sensors {
		ids[i] = s.ID
	}
	for _, store := range []string{"none", "file"} {
		b.Run("store="+store, func(b *testing.B) {
			var readings, steps, points, findings int
			c0, n := benchCPU(), 0
			for b.Loop() {
				counter := &benchCounter{}
				var sink PointSink = counter
				var fs *filestore.Store
				if store == "file" {
					var err error
					if fs, err = filestore.Open(filepath.Join(b.TempDir(), fmt.Sprint(n)), filestore.Options{}); err != nil {
						b.Fatal(err)
					}
					sink = benchTee{counter, fs}
				}
				p, err := New(Options{Config: cfg, Run: "bench", Store: sink, Start: start})
				if err != nil {
					b.Fatal(err)
				}
				src, err := readfile.Open(path, readfile.Options{Sensors: cfg.Sensors})
				if err != nil {
					b.Fatal(err)
				}
				readings = 0
				// As replay reads: the file on a second goroutine.
				err = source.ReadAhead(context.Background(), src, start, end, ids, func(r telemetry.Reading) error {
					readings++
					return p.Add(r)
				})
				if err != nil {
					b.Fatal(err)
				}
				if err := p.Flush(end); err != nil {
					b.Fatal(err)
				}
				if fs != nil {
					if err := fs.Close(); err != nil {
						b.Fatal(err)
					}
				}
				steps, points, findings = p.Steps(), counter.n, len(p.Findings())
				if n == 0 {
					for _, f := range p.Findings() {
						b.Logf("finding in a quiet month: %s %s raised %s: %s", f.Kind, f.Zone, f.Raised.Format(time.RFC3339), f.Evidence)
					}
				}
				n++
			}
			b.ReportMetric(float64(benchCPU()-c0)/1e9/float64(n), "cpu-s/op")
			b.ReportMetric(float64(readings), "readings")
			b.ReportMetric(float64(steps), "steps")
			b.ReportMetric(float64(points), "points")
			b.ReportMetric(float64(findings), "findings")
			if want := days * 24 * 12; steps != want {
				b.Errorf("replay closed %d steps, want %d", steps, want)
			}
		})
	}
}

// benchCPU is the process's user+system CPU time.
func benchCPU() time.Duration {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

type benchCounter struct{ n int }

func (c *benchCounter) Add(points ...lineproto.Point) error { c.n += len(points); return nil }

type benchTee [2]PointSink

func (t benchTee) Add(points ...lineproto.Point) error {
	if err := t[0].Add(points...); err != nil {
		return err
	}
	return t[1].Add(points...)
}

// benchReadings simulates cfg's network for days from start at the
// 5-minute hydraulic step, each sensor logging once a minute, into a
// readings CSV at path.
func benchReadings(path string, cfg *config.Config, start time.Time, days int) error {
	f, err := os.Create(path)
	if err != nil {
		return err
	}
	defer f.Close()
	w := sim.NewCSVWriter(f)
	s := sim.Settings{Start: start, Duration: time.Duration(days) * 24 * time.Hour, Step: 5 * time.Minute,
		LoggingInterval: time.Minute, Seed: 1, Sensors: cfg.Sensors}
	if _, err := sim.Run(context.Background(), cfg.Network, s, w.Write, sim.Options{}); err != nil {
		return err
	}
	if err := w.Flush(); err != nil {
		return err
	}
	return f.Close()
}

// benchTown5k is testdata/network/town-5k.geojson run as three district
// metered areas with 60 sensors (3 inlet meters, 19 loggers a zone), the
// set-up of model/detect's BenchmarkStep5k: every pipe between two zones
// is shut so each zone is fed by its own reservoir main, and pockets the
// shut pipes would cut off join the zone they are still piped to.
func benchTown5k(b *testing.B) *config.Config {
	b.Helper()
	raw, err := network.ReadFile("../../testdata/network/town-5k.geojson")
	if err != nil {
		b.Fatal(err)
	}
	net, err := netgen.CloseDistricts(raw)
	if err != nil {
		b.Fatal(err)
	}
	sensors := netgen.DistrictSensors(net, 19)
	if len(sensors) != 60 {
		b.Fatalf("town-5k: %d sensors placed, want 60", len(sensors))
	}
	cfg := &config.Config{Network: net, Step: 5 * time.Minute, Sensors: sensors}
	for _, zm := range netgen.DemoZones(net, sensors) {
		cfg.Zones = append(cfg.Zones, config.Zone{ID: zm.Zone, Inlets: zm.Inlets, Outlets: zm.Outlets,
			Night: config.NightWindow{Start: 2 * time.Hour, End: 4 * time.Hour}, TimeZone: time.UTC, TimeZoneName: "UTC",
			NightUseLPS: zm.NightUseLps})
	}
	return cfg
}
