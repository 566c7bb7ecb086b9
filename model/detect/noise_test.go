package detect

import (
	"math"
	"math/rand/v2"
	"strings"
	"testing"
	"time"

	"plumbline/model/demand"
	"plumbline/model/finding"
	"plumbline/model/hydraulic"
	"plumbline/model/telemetry"
)

// TestFalseAlarmsOfPureNoise runs the detector over a long quiet period
// whose readings are the model's exact values plus independent Gaussian
// noise of each sensor's accuracy, and compares the alarms with the rate
// the thresholds were designed for.
//
// The design (Detector.design): each zone runs three kinds of test — the
// night test, the burst test and the residual tests — and each kind is
// given an in-control average run length of 3 × FalseAlarmDays by
// Siegmund's (1985) approximation (the residual pairs split their kind's
// share). The zone therefore expects one false alarm per FalseAlarmDays
// over the days its tests are live. The repair test (the night test run
// downwards) has the night test's design as well but is outside that
// budget; a repair alarm with no open leak changes nothing an operator
// sees.
//
// The CUSUM alarms are counted by watching the statistics: an hour in
// which some statistic ends above its threshold, or was reset (only an
// alarm and what follows it resets one), is an alarm hour. Findings are
// what the operator sees; every one comes from an alarm (with noise that
// never repeats a value and no quality flags there are no stuck or spike
// faults), so they are bounded by the alarms.
//
// What it shows: that the thresholds and the σ estimates behind the
// normalisation do not make the tests alarm far more often than
// designed — the observed counts must stay within 3 × the expected count
// + 3√expected (a Poisson count exceeds that with negligible
// probability). It also shows they are not dead: some alarm must occur.
// Its limits: one small network, one seed, stationary noise with no
// demand variation (real demand noise is larger, multiplicative and
// correlated, which is why the detector learns σ from the data); the
// count is a single draw, so the check is coarse (a factor, not a rate);
// σ floors (1 cm, 0.05 L/s) make a test quieter than designed when the
// true noise is below them; and a residual alarm raises a finding only
// when some hypothesis matters in practice (a logger moving by more than
// its accuracy, a leak showing in the balance), so pure noise seldom
// turns one into a finding: the finding count tests mostly the night and
// burst tests, the alarm count all of them.
func TestFalseAlarmsOfPureNoise(t *testing.T) {
	const days = 180
	const faDays = 10.0
	net := gridTown()
	sensors := gridSensors()
	// An installed inlet meter to ±2% of the district's 12.6 L/s, so the
	// balance noise sits above the night test's 0.05 L/s floor and the
	// balance tests run at their design rather than below it.
	sensors[0].Accuracy = 0.25
	cfg := Config{Network: net, Sensors: sensors, Step: 5 * time.Minute, FalseAlarmDays: faDays,
		Zones: []Zone{{ID: "grid", Inlets: []string{"F-in"}, NightStart: 2 * time.Hour, NightEnd: 4 * time.Hour, NightUseLPS: 0.5}}}
	d, err := New(cfg)
	if err != nil {
		t.Fatal(err)
	}

	// The model's exact values: one solve per step of the day at the
	// pattern demand (the detector's own expected-consumption demand, so
	// model and "truth" agree and residuals are the noise alone).
	solver, err := hydraulic.NewSolver(net, hydraulic.Options{})
	if err != nil {
		t.Fatal(err)
	}
	perDay := int(24 * time.Hour / cfg.Step)
	exact := make([][]float64, perDay)
	var prev *hydraulic.Solution
	for k := range exact {
		at := t0.Add(time.Duration(k) * cfg.Step)
		sol, err := solver.Solve(&hydraulic.Conditions{Demand: demand.Base(net, at, nil, nil)}, prev)
		if err != nil {
			t.Fatal(err)
		}
		prev = sol
		exact[k] = make([]float64, len(sensors))
		for i, s := range sensors {
			if s.Quantity == telemetry.Flow {
				l, _ := net.LinkIndex(s.At)
				exact[k][i] = sol.Flow[l]
			} else {
				n, _ := net.NodeIndex(s.At)
				exact[k][i] = sol.Pressure[n]
			}
		}
	}

	rng := rand.New(rand.NewPCG(7, 11))
	snap := telemetry.Snapshot{Length: cfg.Step, Values: make([]telemetry.Aggregate, len(sensors))}
	var findings []finding.Finding
	alarmHours := 0
	cusums := func() []*CUSUM {
		var out []*CUSUM
		for i := range d.st.Zones {
			z := &d.st.Zones[i]
			out = append(out, &z.Night, &z.Burst, &z.Repair)
		}
		for i := range d.st.Sensors {
			s := &d.st.Sensors[i]
			out = append(out, &s.Up, &s.Down)
		}
		return out
	}
	before := make([]CUSUM, len(cusums()))
	for k := 0; k < days*perDay; k++ {
		snap.Step = t0.Add(time.Duration(k) * cfg.Step)
		for i, s := range sensors {
			v := exact[k%perDay][i] + s.Accuracy*rng.NormFloat64()
			snap.Values[i] = telemetry.Aggregate{Sensor: s.ID, Value: v, Count: 1, Min: v, Max: v, Quality: telemetry.OK}
		}
		for i, c := range cusums() {
			before[i] = *c
		}
		r, err := d.Step(snap)
		if err != nil {
			t.Fatal(err)
		}
		findings = append(findings, r.Findings...)
		alarm := false
		for i, c := range cusums() {
			// Reset after an alarm: the statistic was above zero and is
			// now zero with no onset (Update keeps the onset, Reset
			// clears it).
			reset := c.Onset.IsZero() && !before[i].Onset.IsZero() && before[i].S > 0
			if (c.S > c.H && before[i].S <= before[i].H) || reset {
				alarm = true
			}
		}
		if alarm {
			alarmHours++
		}
	}

	// Tests are live once the baselines have learned: LearnNights days,
	// and a day more for the burst test's level and scatter. Expected
	// counts from the designed thresholds through Siegmund's ARL: nights
	// for the night and repair tests, hours for the burst test and for
	// each one-sided residual test (two per logger).
	live := float64(days - d.cfg.LearnNights - 1)
	arl := func(c CUSUM) float64 { return SiegmundARL(c.K, c.H, 0) }
	loggers := float64(len(d.zones[0].evidence))
	eNight := live / arl(d.designNight)
	eBurst := live * 24 / arl(d.designBurst)
	eResid := live * 24 * 2 * loggers / arl(d.designResid)
	expectFindings := eNight + eBurst + eResid
	expectAlarms := expectFindings + eNight // and the repair test
	if math.Abs(expectFindings-live/faDays) > 0.01*expectFindings {
		t.Errorf("designed thresholds give %.2f alarms in %.0f days, want %.2f (one per FalseAlarmDays)", expectFindings, live, live/faDays)
	}
	bound := func(e float64) float64 { return 3*e + 3*math.Sqrt(e) }
	// Which test raised each finding, from the start of its evidence.
	byTest := map[string]int{}
	for _, f := range findings {
		switch {
		case strings.HasPrefix(f.Evidence, "night imbalance"):
			byTest["night"]++
		case strings.HasPrefix(f.Evidence, "zone imbalance jumped"):
			byTest["burst"]++
		default:
			byTest["residual"]++
		}
	}
	t.Logf("%d days (%.0f live), FalseAlarmDays %.0f: %d alarm hours (expected %.1f), %d findings by test %v (designed %.1f: night %.1f, burst %.1f, residual %.1f)",
		days, live, faDays, alarmHours, expectAlarms, len(findings), byTest, expectFindings, eNight, eBurst, eResid)
	if b := bound(expectAlarms); float64(alarmHours) > b {
		t.Errorf("%d alarm hours in %.0f live days of pure noise, want at most %.1f (3 × %.1f expected + 3√expected)", alarmHours, live, b, expectAlarms)
	}
	if b := bound(expectFindings); float64(len(findings)) > b {
		t.Errorf("%d findings in %.0f live days of pure noise, want at most %.1f (3 × %.1f designed + 3√designed)", len(findings), live, b, expectFindings)
		for _, f := range findings {
			t.Logf("finding %+v", f)
		}
	}
	if alarmHours == 0 {
		t.Errorf("no alarm in %.0f live days with %.1f designed: thresholds far above their design", live, expectAlarms)
	}
}
