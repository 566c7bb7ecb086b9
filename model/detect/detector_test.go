package detect

import (
	"context"
	"fmt"
	"math"
	"strings"
	"testing"
	"time"

	"plumbline/model/finding"
	"plumbline/model/network"
	"plumbline/model/sim"
	"plumbline/model/telemetry"
	"plumbline/model/units"
)

// gridTown is an invented 6×6 grid district fed from a reservoir through
// one metered main (P-in): the simplest network where the answer to each
// hypothesis is clear by hand.
func gridTown() *network.Network {
	const n = 6
	nodes := []network.Node{{ID: "R", Kind: network.Reservoir, Head: 75, Elevation: 75}}
	id := func(r, c int) string { return fmt.Sprintf("J-%d%d", r, c) }
	for r := 0; r < n; r++ {
		for c := 0; c < n; c++ {
			nodes = append(nodes, network.Node{ID: id(r, c), Kind: network.Junction, Elevation: 20 + float64(r+c), Demand: 0.35, Pattern: "res", Zone: "grid",
				Coord: network.Point{Lon: 0.001 * float64(c), Lat: 0.001 * float64(r)}, HasCoord: true})
		}
	}
	idx := func(r, c int) int { return 1 + r*n + c }
	links := []network.Link{{ID: "P-in", Kind: network.Pipe, From: 0, To: idx(0, 0), Length: 400, Diameter: 250, Roughness: 120}}
	for r := 0; r < n; r++ {
		for c := 0; c < n; c++ {
			d := 100.0
			if r == 0 || c == 0 {
				d = 200 // trunk mains along two edges
			}
			if c+1 < n {
				links = append(links, network.Link{ID: fmt.Sprintf("P-%s-e", id(r, c)), Kind: network.Pipe, From: idx(r, c), To: idx(r, c+1), Length: 150, Diameter: d, Roughness: 110})
			}
			if r+1 < n {
				dd := 100.0
				if c == 0 {
					dd = 200
				}
				links = append(links, network.Link{ID: fmt.Sprintf("P-%s-s", id(r, c)), Kind: network.Pipe, From: idx(r, c), To: idx(r+1, c), Length: 150, Diameter: dd, Roughness: 110})
			}
		}
	}
	net := network.New(nodes, links)
	net.Patterns["res"] = []float64{0.45, 0.35, 0.3, 0.3, 0.35, 0.55, 0.9, 1.35, 1.4, 1.2, 1.05, 1.0, 1.1, 1.05, 0.95, 0.9, 1.0, 1.2, 1.45, 1.5, 1.3, 1.05, 0.8, 0.6}
	return net
}

func gridSensors() []telemetry.Sensor {
	s := []telemetry.Sensor{{ID: "F-in", Quantity: telemetry.Flow, At: "P-in", Unit: "L/s", Accuracy: 0.03}}
	for _, at := range []string{"J-05", "J-22", "J-25", "J-33", "J-50", "J-52", "J-55", "J-14"} {
		s = append(s, telemetry.Sensor{ID: "P-" + at[2:], Quantity: telemetry.Pressure, At: at, Unit: "m", Accuracy: 0.05, Zone: "grid"})
	}
	return s
}

func gridConfig(net *network.Network) Config {
	return Config{
		Network: net, Sensors: gridSensors(), Step: 5 * time.Minute,
		Zones: []Zone{{ID: "grid", Inlets: []string{"F-in"}, NightStart: 2 * time.Hour, NightEnd: 4 * time.Hour, NightUseLPS: 0.5}},
	}
}

var t0 = time.Date(2026, 3, 2, 0, 0, 0, 0, time.UTC)

// simulate runs the simulator and lines its readings up into one
// snapshot per step (logging interval = step, delivered in order).
func simulate(t *testing.T, net *network.Network, days int, seed uint64, events []sim.Event) []telemetry.Snapshot {
	t.Helper()
	s := sim.Settings{Start: t0, Duration: time.Duration(days) * 24 * time.Hour, Step: 5 * time.Minute, Seed: seed,
		Sensors: gridSensors(), Events: events, DemandNoise: 0.1, DailyVariation: 0.03}
	idx := map[string]int{}
	for i, x := range s.Sensors {
		idx[x.ID] = i
	}
	steps := int(s.Duration / s.Step)
	snaps := make([]telemetry.Snapshot, steps)
	for k := range snaps {
		snaps[k] = telemetry.Snapshot{Step: t0.Add(time.Duration(k) * s.Step), Length: s.Step, Values: make([]telemetry.Aggregate, len(s.Sensors))}
		for i := range snaps[k].Values {
			snaps[k].Values[i] = telemetry.Aggregate{Sensor: s.Sensors[i].ID, Quality: telemetry.Missing}
		}
	}
	_, err := sim.Run(context.Background(), net, s, func(r sim.Reading) error {
		k := int(r.Time.Sub(t0) / s.Step)
		si := idx[r.Sensor]
		v, err := units.ToCanonical(s.Sensors[si].Quantity, r.Unit, r.Value)
		if err != nil {
			return err
		}
		snaps[k].Values[si] = telemetry.Aggregate{Sensor: r.Sensor, Value: v, Count: 1, Min: v, Max: v, Quality: telemetry.OK}
		return nil
	}, sim.Options{})
	if err != nil {
		t.Fatal(err)
	}
	return snaps
}

func detectAll(t *testing.T, d *Detector, snaps []telemetry.Snapshot) []finding.Finding {
	t.Helper()
	var out []finding.Finding
	for _, s := range snaps {
		r, err := d.Step(s)
		if err != nil {
			t.Fatal(err)
		}
		out = append(out, r.Findings...)
	}
	return out
}

func TestLeakFoundAndLocated(t *testing.T) {
	net := gridTown()
	start := t0.Add(8*24*time.Hour + 13*time.Hour)
	snaps := simulate(t, net, 11, 1, []sim.Event{{Kind: finding.Leak, At: "J-43", Start: start, SizeLPS: 2, Exponent: 1}})
	d, err := New(gridConfig(net))
	if err != nil {
		t.Fatal(err)
	}
	fs := detectAll(t, d, snaps)
	if len(fs) == 0 {
		t.Fatal("no finding for a 2 L/s leak in a 12.6 L/s district")
	}
	f := fs[0]
	if f.Kind != finding.Leak || f.Raised.Before(start) {
		t.Fatalf("first finding %+v, want a leak raised after %s", f, start)
	}
	if lag := f.Raised.Sub(start); lag > 24*time.Hour {
		t.Errorf("found %v after onset, want within a day", lag)
	}
	if math.Abs(f.SizeLPS-2) > 0.6 {
		t.Errorf("size %.2f L/s, injected 2", f.SizeLPS)
	}
	rank := -1
	for i, c := range f.Candidates {
		if c.ID == "J-43" {
			rank = i
		}
	}
	// The 150 m grid: a neighbour of J-43 is also a fair answer; the true
	// node must be among the top five.
	if rank < 0 {
		t.Errorf("J-43 not among candidates %+v (evidence: %s)", f.Candidates, f.Evidence)
	}
	t.Logf("finding: %+v", f)
	for _, g := range fs[1:] {
		t.Errorf("extra finding %+v", g)
	}
	// After the day of refining, the size is measured from whole hours of
	// the leak: closer to the truth than the first estimate can be (the
	// sim's leak at exponent 1 follows the pressure, a few per cent about
	// its nominal 2 L/s; mass balance says the zone's extra inflow is the
	// leak). The first estimate is allowed 30%, the refined one 10%.
	final := d.Findings()[0]
	if math.Abs(final.SizeLPS-2) > 0.2 {
		t.Errorf("refined size %.2f L/s, injected 2 (first estimate %.2f)", final.SizeLPS, f.SizeLPS)
	}
	t.Logf("size: first %.2f L/s, refined %.2f L/s", f.SizeLPS, final.SizeLPS)
}

func TestQuietPeriodHasNoFindings(t *testing.T) {
	net := gridTown()
	snaps := simulate(t, net, 30, 2, nil)
	d, err := New(gridConfig(net))
	if err != nil {
		t.Fatal(err)
	}
	for _, f := range detectAll(t, d, snaps) {
		t.Errorf("false finding in a quiet month: %+v", f)
	}
}

// A half-shut valve on the trunk main along the top row: pressures
// beyond it fall by day, the zone's inflow does not change.
func TestBlockageFoundAndToldFromLeak(t *testing.T) {
	net := gridTown()
	start := t0.Add(9*24*time.Hour + 8*time.Hour)
	snaps := simulate(t, net, 12, 3, []sim.Event{{Kind: finding.Blockage, At: "P-J-00-s", Start: start, OpenFraction: 0.15}})
	d, err := New(gridConfig(net))
	if err != nil {
		t.Fatal(err)
	}
	fs := detectAll(t, d, snaps)
	if len(fs) == 0 {
		t.Fatal("no finding for a trunk main 15% open")
	}
	f := fs[0]
	t.Logf("finding: %+v", f)
	if f.Kind != finding.Blockage || f.Raised.Before(start) {
		t.Fatalf("first finding %+v, want a blockage after %s", f, start)
	}
	found := false
	for _, c := range f.Candidates {
		found = found || c.ID == "P-J-00-s"
	}
	if !found {
		t.Errorf("P-J-00-s not among the candidates %+v", f.Candidates)
	}
	for _, g := range fs[1:] {
		if g.Kind != finding.Blockage {
			t.Errorf("a blockage also raised %+v", g)
		}
	}
}

// An offset on one logger moves its residual alone: a sensor fault, and
// no leak or blockage.
func TestSensorOffsetIsASensorFault(t *testing.T) {
	net := gridTown()
	start := t0.Add(9*24*time.Hour + 3*time.Hour)
	snaps := simulate(t, net, 12, 4, []sim.Event{{Kind: finding.SensorFault, At: "P-33", Start: start, Mode: "offset", Amount: 0.4}})
	d, err := New(gridConfig(net))
	if err != nil {
		t.Fatal(err)
	}
	fs := detectAll(t, d, snaps)
	if len(fs) == 0 {
		t.Fatal("no finding for a 0.4 m offset")
	}
	for _, f := range fs {
		if f.Kind != finding.SensorFault {
			t.Errorf("sensor offset raised %+v", f)
		}
	}
	if fs[0].Candidates[0].ID != "P-33" || fs[0].Raised.Before(start) {
		t.Errorf("finding %+v, want P-33 after %s", fs[0], start)
	}
	t.Logf("finding: %+v", fs[0])
}

// Saving the state half way and restoring it into a new detector gives
// the same findings as one uninterrupted run.
func TestRestartGivesSameFindings(t *testing.T) {
	net := gridTown()
	start := t0.Add(8*24*time.Hour + 22*time.Hour)
	snaps := simulate(t, net, 11, 5, []sim.Event{{Kind: finding.Leak, At: "J-24", Start: start, SizeLPS: 1.5}})
	cfg := gridConfig(net)
	one, _ := New(cfg)
	want := detectAll(t, one, snaps)
	if len(want) == 0 {
		t.Fatal("no finding to compare")
	}
	cut := int(start.Sub(t0)/(5*time.Minute)) + 7 // in the middle of the evidence
	a, _ := New(cfg)
	got := detectAll(t, a, snaps[:cut])
	state, err := a.State()
	if err != nil {
		t.Fatal(err)
	}
	b, _ := New(cfg)
	if err := b.Restore(state); err != nil {
		t.Fatal(err)
	}
	got = append(got, detectAll(t, b, snaps[cut:])...)
	if len(got) != len(want) {
		t.Fatalf("restarted run raised %d findings, uninterrupted %d", len(got), len(want))
	}
	for i := range want {
		if got[i].Kind != want[i].Kind || !got[i].Raised.Equal(want[i].Raised) || got[i].Candidates[0].ID != want[i].Candidates[0].ID ||
			math.Abs(got[i].SizeLPS-want[i].SizeLPS) > 0.011 {
			t.Errorf("finding %d: restarted %+v, uninterrupted %+v", i, got[i], want[i])
		}
	}
}

// A leak that is mended drops the night flow back: the finding stops
// being active, and no new leak is raised.
func TestRepairedLeakResolves(t *testing.T) {
	net := gridTown()
	start := t0.Add(8*24*time.Hour + 13*time.Hour)
	end := start.Add(3 * 24 * time.Hour)
	snaps := simulate(t, net, 16, 6, []sim.Event{{Kind: finding.Leak, At: "J-43", Start: start, End: end, SizeLPS: 2.5, Exponent: 1}})
	d, err := New(gridConfig(net))
	if err != nil {
		t.Fatal(err)
	}
	var activeDuring int
	for _, s := range snaps {
		if _, err := d.Step(s); err != nil {
			t.Fatal(err)
		}
		if s.Step.Equal(end.Add(-time.Hour)) {
			activeDuring = len(d.Active())
		}
	}
	fs := d.Findings()
	if len(fs) == 0 || fs[0].Kind != finding.Leak {
		t.Fatalf("findings %+v, want a leak first", fs)
	}
	if activeDuring != 1 {
		t.Errorf("%d active findings while the leak ran, want 1", activeDuring)
	}
	if n := len(d.Active()); n != 0 {
		t.Errorf("%d findings still active five nights after the repair: %+v", n, d.Active())
	}
	for _, f := range fs[1:] {
		t.Errorf("extra finding %+v", f)
	}
}

// The grid town's only supply main nearly shut: every logger's pressure
// falls below zero and ingest flags each reading out of range (range
// 0–100 m, as ingest's check would). One instrument out of range is a
// sensor fault; all of them together are the water telling the truth.
// By hand the answer is the one supply link, P-in: a blockage there, and
// no sensor fault.
func TestZoneWidePressureLossIsASupplyBlockage(t *testing.T) {
	net := gridTown()
	start := t0.Add(8*24*time.Hour + 8*time.Hour)
	snaps := simulate(t, net, 9, 5, []sim.Event{{Kind: finding.Blockage, At: "P-in", Start: start, OpenFraction: 0.02}})
	sensors := gridSensors()
	flagged := 0
	for k := range snaps {
		for i, a := range snaps[k].Values {
			if sensors[i].Quantity == telemetry.Pressure && a.Count > 0 && (a.Value < 0 || a.Value > 100) {
				snaps[k].Values[i].Quality = telemetry.OutOfRange
				flagged++
			}
		}
	}
	if flagged == 0 {
		t.Fatal("no reading left the range: the closure is too mild for this test")
	}
	d, err := New(gridConfig(net))
	if err != nil {
		t.Fatal(err)
	}
	fs := detectAll(t, d, snaps)
	var blockages int
	for _, f := range fs {
		t.Logf("%s %s %v: %s", f.Kind, f.Raised.Format(time.RFC3339), f.Candidates, f.Evidence)
		switch f.Kind {
		case finding.SensorFault:
			t.Errorf("a sensor fault raised for a zone-wide loss of pressure: %+v", f)
		case finding.Blockage:
			blockages++
			if len(f.Candidates) == 0 || f.Candidates[0].ID != "P-in" {
				t.Errorf("blockage candidates %+v, want P-in first", f.Candidates)
			}
			if f.Raised.Before(start) || f.Raised.After(start.Add(2*time.Hour)) {
				t.Errorf("raised %s, want within 2 h of %s", f.Raised, start)
			}
		}
	}
	if blockages != 1 {
		t.Errorf("%d blockage findings, want exactly 1", blockages)
	}
}

// The zone's inlet meter reading 2 L/s low (an offset): the balance falls
// — water appearing from nowhere — and the inflow-matched model, short
// of 2 L/s, computes pressures too high at every logger by 2·|ubar|. By
// hand the answer is the meter: a sensor fault on F-in, and no leak or
// blockage.
func TestInletMeterUnderReadingIsASensorFault(t *testing.T) {
	net := gridTown()
	start := t0.Add(9*24*time.Hour + 3*time.Hour)
	snaps := simulate(t, net, 14, 6, []sim.Event{{Kind: finding.SensorFault, At: "F-in", Start: start, Mode: "offset", Amount: -2}})
	d, err := New(gridConfig(net))
	if err != nil {
		t.Fatal(err)
	}
	fs := detectAll(t, d, snaps)
	meter := false
	for _, f := range fs {
		t.Logf("%s %s %v: %s", f.Kind, f.Raised.Format(time.RFC3339), f.Candidates, f.Evidence)
		if f.Kind != finding.SensorFault {
			t.Errorf("a %s raised for a meter offset", f.Kind)
			continue
		}
		for _, c := range f.Candidates {
			meter = meter || c.ID == "F-in"
		}
	}
	if !meter {
		t.Error("no sensor fault names F-in")
	}
	// Its readings look plausible to ingest, but the balance the left-out
	// meter would give still carries the offset: it stays out, and the
	// same offset is not found again.
	if len(fs) != 1 {
		t.Errorf("%d findings for one meter offset, want 1", len(fs))
	}
	if si := d.bySensor["F-in"]; !d.st.Sensors[si].Excluded {
		t.Error("F-in let back into the balance with its offset still in it")
	}
}

// The same meter mended a day after its offset began comes back into the
// balance after a day of readings that agree with the zone's normal.
func TestMendedMeterComesBack(t *testing.T) {
	net := gridTown()
	start := t0.Add(9*24*time.Hour + 3*time.Hour)
	snaps := simulate(t, net, 13, 6, []sim.Event{{Kind: finding.SensorFault, At: "F-in", Start: start, End: start.Add(30 * time.Hour), Mode: "offset", Amount: -2}})
	d, err := New(gridConfig(net))
	if err != nil {
		t.Fatal(err)
	}
	fs := detectAll(t, d, snaps)
	if len(fs) == 0 || fs[0].Kind != finding.SensorFault {
		t.Fatalf("findings %v, want the meter fault first", fs)
	}
	if si := d.bySensor["F-in"]; d.st.Sensors[si].Excluded {
		t.Error("F-in still out of the balance two days after it was mended")
	}
}

// Two leaks in far corners of the grid town an hour apart (2 L/s at J-05
// near the top right, 1.5 L/s at J-50 near the bottom left): the balance
// sees one change of 3.5 L/s, the pressures see two sources. By hand the
// answer is two leak findings, one near each corner.
func TestTwoLeaksAtOnceAreTwoFindings(t *testing.T) {
	net := gridTown()
	start := t0.Add(8*24*time.Hour + 13*time.Hour)
	snaps := simulate(t, net, 11, 7, []sim.Event{
		{Kind: finding.Leak, At: "J-05", Start: start, SizeLPS: 2, Exponent: 1},
		{Kind: finding.Leak, At: "J-50", Start: start.Add(time.Hour), SizeLPS: 1.5, Exponent: 1},
	})
	d, err := New(gridConfig(net))
	if err != nil {
		t.Fatal(err)
	}
	fs := detectAll(t, d, snaps)
	near := map[string]bool{}
	leaks := 0
	for _, f := range fs {
		t.Logf("%s %.2f L/s %v: %s", f.Kind, f.SizeLPS, f.Candidates, f.Evidence)
		if f.Kind != finding.Leak {
			continue
		}
		leaks++
		for _, c := range f.Candidates {
			// Within one pipe (150 m) of the true junction, by the grid's
			// names: row and column each within one.
			for _, want := range []string{"J-05", "J-50"} {
				dr, dc := int(c.ID[2])-int(want[2]), int(c.ID[3])-int(want[3])
				if dr*dr <= 1 && dc*dc <= 1 {
					near[want] = true
				}
			}
		}
	}
	if leaks != 2 || !near["J-05"] || !near["J-50"] {
		t.Errorf("%d leak findings, near J-05 %v, near J-50 %v: want two, one near each", leaks, near["J-05"], near["J-50"])
	}
}

// Loggers out of range from their first reading (a range or unit set
// wrong in the configuration) never showed the zone's normal: each is a
// sensor fault, not a loss of pressure.
func TestLoggersOutOfRangeFromTheStartAreSensorFaults(t *testing.T) {
	net := gridTown()
	snaps := simulate(t, net, 2, 8, nil)
	sensors := gridSensors()
	for k := range snaps {
		for i := range snaps[k].Values {
			if sensors[i].Quantity == telemetry.Pressure {
				snaps[k].Values[i].Quality = telemetry.OutOfRange
			}
		}
	}
	d, err := New(gridConfig(net))
	if err != nil {
		t.Fatal(err)
	}
	faults := 0
	for _, f := range detectAll(t, d, snaps) {
		if f.Kind != finding.SensorFault {
			t.Errorf("a %s raised for misconfigured loggers: %s", f.Kind, f.Evidence)
		}
		faults++
	}
	if faults != 8 {
		t.Errorf("%d sensor faults, want one per logger (8)", faults)
	}
}

// A leak that keeps growing (a crack opening, 4 L/s reached over four
// days at J-43): each growth past the threshold is the same leak at the
// same place, so one leak finding, updated as it grows, and no second.
func TestGrowingLeakIsOneFinding(t *testing.T) {
	net := gridTown()
	start := t0.Add(8*24*time.Hour + 13*time.Hour)
	snaps := simulate(t, net, 14, 9, []sim.Event{{Kind: finding.Leak, At: "J-43", Start: start, SizeLPS: 4, Ramp: 96 * time.Hour, Exponent: 1}})
	d, err := New(gridConfig(net))
	if err != nil {
		t.Fatal(err)
	}
	var leaks []finding.Finding
	for _, f := range detectAll(t, d, snaps) {
		t.Logf("%s %s %.2f L/s %v", f.Kind, f.Raised.Format(time.RFC3339), f.SizeLPS, f.Candidates)
		if f.Kind == finding.Leak {
			leaks = append(leaks, f)
		} else {
			t.Errorf("a %s raised for a growing leak: %s", f.Kind, f.Evidence)
		}
	}
	if len(leaks) != 1 {
		t.Fatalf("%d leak findings raised, want 1", len(leaks))
	}
	final := d.Findings()[0]
	t.Logf("first %.2f L/s, last %.2f L/s: %s", leaks[0].SizeLPS, final.SizeLPS, final.Evidence)
	if final.SizeLPS <= leaks[0].SizeLPS {
		t.Errorf("size %.2f L/s did not grow from %.2f", final.SizeLPS, leaks[0].SizeLPS)
	}
}

// A change picture shared by loggers counts by its root-sum-square over
// their accuracy, less the noise of the mean changes (worked by hand):
// two loggers at 0.75 of their accuracy together are sqrt(2)·0.75 = 1.06
// of it, one alone 0.75; a picture no bigger than the noise is nothing.
func TestLargestChangeCountsSharedPictures(t *testing.T) {
	d := &Detector{sens: []sensorInfo{{accuracy: 0.2}, {accuracy: 0.2}, {accuracy: 0.2}}}
	ev := evidence{sensors: []int{0, 1, 2}, w: []float64{1e6, 1e6, 1e6}}
	for _, c := range []struct {
		name string
		dr   []float64
		w    float64
		want bool
	}{
		{"one logger beyond its accuracy", []float64{-0.21, 0, 0}, 1e6, true},
		{"one logger within it", []float64{-0.15, 0, 0}, 1e6, false},
		{"two loggers within it, together beyond", []float64{-0.15, -0.15, 0}, 1e6, true},
		{"three loggers at their noise", []float64{0.1, -0.1, 0.1}, 1 / (0.1 * 0.1), false},
	} {
		ev.dr = c.dr
		ev.w = []float64{c.w, c.w, c.w}
		if got := d.largestChange(ev); got != c.want {
			t.Errorf("%s: %v, want %v", c.name, got, c.want)
		}
	}
}

// A blockage seen again with the next pipe along the main ranked first is
// the same event; one three pipes away on another street is not (worked
// by hand on the grid town: P-J-00-e and P-J-01-e share J-01).
func TestSameBlockageAlongAMain(t *testing.T) {
	net := gridTown()
	d, err := New(gridConfig(net))
	if err != nil {
		t.Fatal(err)
	}
	cand := func(ids ...string) []finding.Candidate {
		var cs []finding.Candidate
		for _, id := range ids {
			cs = append(cs, finding.Candidate{ID: id, Score: 1})
		}
		return cs
	}
	d.raise(finding.Finding{Kind: finding.Blockage, Zone: "grid", Candidates: cand("P-J-00-e")})
	if _, ok := d.sameEvent(finding.Finding{Kind: finding.Blockage, Zone: "grid", Candidates: cand("P-J-01-e", "P-J-11-e")}); !ok {
		t.Error("the next pipe along the main taken for a new blockage")
	}
	if _, ok := d.sameEvent(finding.Finding{Kind: finding.Blockage, Zone: "grid", Candidates: cand("P-J-44-e", "P-J-45-s")}); ok {
		t.Error("a pipe on another street taken for the same blockage")
	}
	// Seen again, the finding keeps the candidates it was located by and
	// notes the later look; no second finding.
	leak := 0.0
	d.takeIn(0, evidence{}, t0, false, finding.Finding{Kind: finding.Blockage, Zone: "grid", Raised: t0, Candidates: cand("P-J-01-e")}, &leak)
	fs := d.Findings()
	if len(fs) != 1 || fs[0].Candidates[0].ID != "P-J-00-e" || !strings.Contains(fs[0].Evidence, "seen again") {
		t.Errorf("after the second look: %+v", fs)
	}
}
