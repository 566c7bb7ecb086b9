package report

import (
	"math"
	"testing"
	"time"

	"plumbline/daemon/config"
	"plumbline/model/detect"
	"plumbline/model/finding"
	"plumbline/model/telemetry"
)

// The small scenario: testdata/small.yaml (two zones, four loggers),
// three days of 5-minute steps from 2026-03-02, made by hand so that
// every figure of the summary can be worked out on paper:
//
//   - every logger reads 60 m from 00:00 to 06:00 UTC and 45 m for the
//     other 18 hours, so the night-day factor with N1 = 1 is
//     6 + 18 × 45/60 = 19.5 h/day (night window 02:00-04:00 at 60 m);
//   - north takes 8 L/s, all expected; south 5 L/s expected, and a leak
//     of 2 L/s from 2026-03-03 12:00 (36 h before the end) adds
//     2 × 129 600 s = 259.2 m³ of imbalance;
//   - night excess over the allowance: north 0.3 L/s every night, south
//     0.5, 0.5, 2.5 L/s (mean 7/6 L/s);
//   - logger P-s2 is missing 10:00-15:00 on the first day (60 steps),
//     P-n2 flagged stuck 06:00-09:00 on the third (36 steps).
var (
	scStart = time.Date(2026, 3, 2, 0, 0, 0, 0, time.UTC)
	scSteps = 3 * 288
	scOnset = time.Date(2026, 3, 3, 12, 0, 0, 0, time.UTC)
)

func loadSmall(t testing.TB) *config.Config {
	t.Helper()
	cfg, err := config.LoadFile("testdata/small.yaml")
	if err != nil {
		t.Fatal(err)
	}
	return cfg
}

// scenarioSteps calls f with every step of the small scenario.
func scenarioSteps(t testing.TB, cfg *config.Config, steps int, f func(telemetry.Snapshot, *detect.StepResult)) {
	t.Helper()
	n := len(cfg.Sensors)
	idx := map[string]int{}
	for i, s := range cfg.Sensors {
		idx[s.ID] = i
	}
	for k := 0; k < steps; k++ {
		at := scStart.Add(time.Duration(k) * 5 * time.Minute)
		snap := telemetry.Snapshot{Step: at, Length: 5 * time.Minute, Values: make([]telemetry.Aggregate, n)}
		res := &detect.StepResult{Time: at, Expected: make([]float64, n), Residual: make([]float64, n)}
		p := 45.0
		if at.Hour() < 6 {
			p = 60
		}
		leak := 0.0
		if !at.Before(scOnset) {
			leak = 2
		}
		for i, s := range cfg.Sensors {
			v := telemetry.Aggregate{Sensor: s.ID, Value: p, Count: 5, Min: p, Max: p}
			res.Residual[i] = 0.02 * math.Sin(float64(k)/7)
			switch s.ID {
			case "F-in-north":
				v.Value = 13 + leak
			case "F-ns":
				v.Value = 5 + leak
			case "P-s1":
				if leak > 0 {
					res.Residual[i] = -0.6
				}
			case "P-s2":
				if at.Day() == 2 && at.Hour() >= 10 && at.Hour() < 15 {
					v = telemetry.Aggregate{Sensor: s.ID, Value: math.NaN(), Quality: telemetry.Missing}
					res.Residual[i] = math.NaN()
				}
			case "P-n2":
				if at.Day() == 4 && at.Hour() >= 6 && at.Hour() < 9 {
					v.Quality = telemetry.Stuck
					res.Residual[i] = math.NaN()
				}
			}
			res.Expected[i] = v.Value - res.Residual[i]
			snap.Values[i] = v
		}
		stat := float64(k%288) / 288 * 4
		res.Zones = []detect.ZoneBalance{
			{Zone: "north", InflowLPS: 8, ExpectedLPS: 8, Imbalance: 0, Multiplier: 1, NightStat: stat / 2, NightThreshold: 5, BurstStat: 0.5, BurstThreshold: 6},
			{Zone: "south", InflowLPS: 5 + leak, ExpectedLPS: 5, Imbalance: leak, Multiplier: 1, NightStat: stat, NightThreshold: 5, BurstStat: leak * 2, BurstThreshold: 6},
		}
		if at.Hour() == 4 && at.Minute() == 0 {
			night := time.Date(at.Year(), at.Month(), at.Day(), 2, 0, 0, 0, time.UTC)
			south := 0.5
			if at.Day() == 4 {
				south = 2.5
			}
			res.Nights = []detect.NightFlow{
				{Zone: "north", Night: night, MeanLPS: 1.3, MinLPS: 1.1, AllowLPS: 1, ExcessLPS: 0.1, NightsUsed: at.Day() - 1, Threshold: 5},
				{Zone: "south", Night: night, MeanLPS: 0.5 + south, MinLPS: 0.3 + south, AllowLPS: 0.5, ExcessLPS: south - 0.2, NightsUsed: at.Day() - 1, Threshold: 5},
			}
		}
		f(snap, res)
	}
}

// scenarioFindings are the findings the small scenario reports.
func scenarioFindings() []finding.Finding {
	return []finding.Finding{
		{Kind: finding.Leak, Zone: "south", Onset: scOnset, Raised: scOnset.Add(3 * time.Hour), SizeLPS: 2,
			Candidates: []finding.Candidate{{ID: "J-6", Score: 0.91}, {ID: "J-5", Score: 0.84}, {ID: "J-4", Score: 0.4}, {ID: "J-3", Score: 0.1}},
			Evidence:   "zone imbalance +2 L/s; pressure residual at P-s1 -0.6 m"},
		{Kind: finding.SensorFault, Zone: "north", Onset: time.Date(2026, 3, 4, 6, 0, 0, 0, time.UTC), Raised: time.Date(2026, 3, 4, 8, 0, 0, 0, time.UTC),
			Candidates: []finding.Candidate{{ID: "P-n2", Score: 1}}, Evidence: "logger stuck"},
		{Kind: finding.Blockage, Zone: "north", Onset: time.Date(2026, 3, 2, 18, 0, 0, 0, time.UTC), Raised: time.Date(2026, 3, 2, 22, 0, 0, 0, time.UTC),
			OpenFrac: 0.3, Candidates: []finding.Candidate{{ID: "P-2", Score: 0.7}, {ID: "P-7", Score: 0.5}}, Evidence: "pressure fell downstream of P-2"},
	}
}

func buildScenario(t testing.TB, cols int) *Report {
	t.Helper()
	cfg := loadSmall(t)
	b, err := NewBuilder(Options{Config: cfg, MaxColumns: cols})
	if err != nil {
		t.Fatal(err)
	}
	scenarioSteps(t, cfg, scSteps, func(s telemetry.Snapshot, r *detect.StepResult) {
		if err := b.Add(s, r); err != nil {
			t.Fatal(err)
		}
	})
	return b.Finish(Meta{Run: "small", From: scStart, To: scStart.Add(72 * time.Hour), Readings: scSteps * 6 * 5}, scenarioFindings())
}
