package report

import (
	"io"
	"math"
	"testing"
	"time"

	"plumbline/daemon/config"
	"plumbline/model/detect"
	"plumbline/model/telemetry"
)

// The report's own share of `plumbline report` on the 5,000-junction town
// (configs/town-5k.yaml): aggregating 30 days of 5-minute steps and
// writing the page, with synthetic step results in place of the detector
// (whose cost the daemon benchmarks include).
//
//	go test ./daemon/report -run '^$' -bench . -benchmem
func BenchmarkBuilder5k30Days(b *testing.B) {
	cfg, err := config.LoadFile("../../configs/town-5k.yaml")
	if err != nil {
		b.Fatal(err)
	}
	steps := 30 * 288
	n := len(cfg.Sensors)
	snap := telemetry.Snapshot{Length: 5 * time.Minute, Values: make([]telemetry.Aggregate, n)}
	res := &detect.StepResult{Expected: make([]float64, n), Residual: make([]float64, n)}
	for _, z := range cfg.Zones {
		res.Zones = append(res.Zones, detect.ZoneBalance{Zone: z.ID, NightThreshold: 5, BurstThreshold: 6})
	}
	start := time.Date(2026, 3, 2, 0, 0, 0, 0, time.UTC)
	for b.Loop() {
		bl, err := NewBuilder(Options{Config: cfg})
		if err != nil {
			b.Fatal(err)
		}
		for k := range steps {
			at := start.Add(time.Duration(k) * 5 * time.Minute)
			snap.Step, res.Time = at, at
			for i := range snap.Values {
				snap.Values[i] = telemetry.Aggregate{Value: 40 + math.Sin(float64(k)/50), Count: 5}
				res.Residual[i] = 0.05 * math.Sin(float64(k+i)/9)
			}
			for zi := range res.Zones {
				res.Zones[zi].InflowLPS = 50 + 10*math.Sin(float64(k)/40)
				res.Zones[zi].ExpectedLPS = 49
				res.Zones[zi].Imbalance = res.Zones[zi].InflowLPS - 49
			}
			if err := bl.Add(snap, res); err != nil {
				b.Fatal(err)
			}
		}
		rep := bl.Finish(Meta{Run: "bench"}, nil)
		if _, err := rep.WriteHTML(io.Discard); err != nil {
			b.Fatal(err)
		}
	}
}
