package scenario

import (
	"errors"
	"math"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"testing"
	"time"

	"plumbline/model/finding"
	"plumbline/model/network"
	"plumbline/model/telemetry"
	"plumbline/model/units"
)

const dir = "../../testdata/scenario"

// testNetwork is the small Zephyrholt network the corpus refers to:
// R-src feeds J-1, a chain J-1 … J-7 in zone north, J-2 in zone south,
// and the tank T-hill.
func testNetwork() *network.Network {
	nodes := []network.Node{
		{ID: "R-src", Kind: network.Reservoir, Head: 60},
		{ID: "J-1", Zone: "north"}, {ID: "J-2", Zone: "south"}, {ID: "J-3", Zone: "north"},
		{ID: "J-4", Zone: "north"}, {ID: "J-5", Zone: "north"}, {ID: "J-6", Zone: "north"},
		{ID: "J-7", Zone: "north"},
		{ID: "T-hill", Kind: network.Tank, Elevation: 40, Level: 3, Zone: "hill"},
	}
	links := []network.Link{
		{ID: "P-1", From: 0, To: 1, Length: 100}, {ID: "P-2", From: 1, To: 2, Length: 100},
		{ID: "P-3", From: 1, To: 3, Length: 100}, {ID: "P-4", From: 3, To: 4, Length: 100},
		{ID: "P-5", From: 4, To: 5, Length: 100}, {ID: "P-6", From: 2, To: 6, Length: 100},
		{ID: "P-7", From: 6, To: 7, Length: 100}, {ID: "P-8", From: 7, To: 8, Length: 100},
	}
	n := network.New(nodes, links)
	n.Patterns["weekend"] = []float64{0.8, 1.2}
	return n
}

func mustTime(t *testing.T, s string) time.Time {
	t.Helper()
	v, err := time.Parse(time.RFC3339, s)
	if err != nil {
		t.Fatal(err)
	}
	return v
}

func TestLoadZephyrholt(t *testing.T) {
	s, err := LoadFile(filepath.Join(dir, "zephyrholt.yaml"))
	if err != nil {
		t.Fatalf("LoadFile: %v", err)
	}
	if errs := Validate(s, testNetwork()); len(errs) > 0 {
		t.Fatalf("Validate with the network: %v", errors.Join(errs...))
	}
	start := mustTime(t, "2026-03-01T00:00:00Z")
	if !s.Start.Equal(start) || s.Duration != 336*time.Hour || s.Step != 5*time.Minute || s.Seed != 42 {
		t.Errorf("span: got start %s duration %s step %s seed %d, want %s 336h 5m 42", s.Start, s.Duration, s.Step, s.Seed, start)
	}
	if got, want := s.End(), start.Add(14*24*time.Hour); !got.Equal(want) {
		t.Errorf("End: got %s, want %s", got, want)
	}
	if len(s.Sensors) != 4 {
		t.Fatalf("sensors: got %d, want 4", len(s.Sensors))
	}
	p107, ok := s.Sensor("P-107")
	if !ok || p107.Quantity != telemetry.Pressure || p107.At != "J-7" || p107.Unit != "bar" || p107.Accuracy != 0.02 || p107.Min != 0 || p107.Max != 100 {
		t.Errorf("P-107: got %+v", p107)
	}
	if s.SensorLines[2] != 10 {
		t.Errorf("P-107 line: got %d, want 10", s.SensorLines[2])
	}
	f, _ := s.Sensor("F-in-north")
	if sd, ok := s.NoiseSD(f); !ok || sd != 0.04 {
		t.Errorf("flow noise: got %g %v, want 0.04 true", sd, ok)
	}
	if _, ok := s.NoiseSD(p107); ok {
		t.Errorf("pressure noise: want the sensor's accuracy (no override)")
	}
	if s.LoggingInterval != time.Minute || s.MaxDelay != 20*time.Minute || s.LateFraction != 0.02 ||
		s.MissingFraction != 0.01 || s.DemandNoise != 0.05 || s.DailyVariation != 0.03 ||
		s.WeekendPattern != "weekend" || s.Resolution[telemetry.Pressure] != 0.01 {
		t.Errorf("settings: got %+v", s)
	}
	if len(s.Events) != 6 {
		t.Fatalf("events: got %d, want 6", len(s.Events))
	}
	slow, burst := s.Events[0], s.Events[1]
	if slow.Ramp != 6*time.Hour || slow.LeakExponent() != DefaultLeakExponent || slow.SizeLPS != 1.5 || slow.Line != 23 {
		t.Errorf("slow leak: got %+v", slow)
	}
	if !burst.Start.Equal(start.Add(120*time.Hour)) || !burst.Burst || burst.LeakExponent() != 0.5 ||
		!burst.End.Equal(mustTime(t, "2026-03-08T00:00:00Z")) {
		t.Errorf("burst: got %+v", burst)
	}
	if e := s.Events[4]; e.Mode != Spike || e.Every != 30*time.Minute || e.Amount != 2 {
		t.Errorf("spike fault: got %+v", e)
	}
	if e := s.Events[5]; e.Mode != Stuck || e.Every != 0 {
		t.Errorf("stuck fault: got %+v", e)
	}

	truth := s.Truth(testNetwork())
	// P-6 runs from J-2 (south) to J-6 (north): a link takes the zone of its To node.
	wantZones := []string{"north", "north", "north", "north", "north", "hill"}
	for i, ev := range truth {
		if ev.Zone != wantZones[i] || ev.At != s.Events[i].At || !ev.Start.Equal(s.Events[i].Start) || ev.Kind != s.Events[i].Kind {
			t.Errorf("truth[%d]: got %+v, want zone %s and the event's kind, at, start", i, ev, wantZones[i])
		}
	}
	if truth[2].OpenFrac != 0.3 || truth[3].Mode != "drift" || truth[3].Amount != 0.5 || truth[0].SizeLPS != 1.5 {
		t.Errorf("truth sizes: got %+v", truth)
	}
}

func TestLoadSensorsFile(t *testing.T) {
	s, err := LoadFile(filepath.Join(dir, "sensors-file.yaml"))
	if err != nil {
		t.Fatalf("LoadFile: %v", err)
	}
	if s.SensorsFile != filepath.Join(dir, "sensors.yaml") {
		t.Errorf("SensorsFile: got %q", s.SensorsFile)
	}
	if s.TrueNetwork != filepath.Join(dir, "../network/zephyrholt-true.geojson") {
		t.Errorf("TrueNetwork: got %q", s.TrueNetwork)
	}
	if len(s.Sensors) != 2 || s.Sensors[0].Unit != "m3/h" || s.Sensors[1].Topic != "zephyrholt/+/{sensor}" {
		t.Errorf("sensors: got %+v", s.Sensors)
	}
	if s.SensorLines[1] != 8 {
		t.Errorf("sensor line in its file: got %d, want 8", s.SensorLines[1])
	}
	if s.Step != DefaultStep || s.LoggingInterval != DefaultStep || s.MaxDelay != 0 {
		t.Errorf("defaults: step %s logging %s max_delay %s", s.Step, s.LoggingInterval, s.MaxDelay)
	}
	if got, want := s.Events[0].Start, s.Start.Add(12*time.Hour); !got.Equal(want) {
		t.Errorf("offset start: got %s, want %s", got, want)
	}
}

// TestLoadServiceConfigSensors reads the sensors of a service
// configuration named as the sensors file.
func TestLoadServiceConfigSensors(t *testing.T) {
	tmp := t.TempDir()
	cfg := "network: town.geojson\nstep: 5m\nsensors:\n  - {id: P-1, quantity: pressure, at: J-1, topic: t/P-1, unit: kPa, accuracy: 1}\nhttp: {listen: 127.0.0.1:8470}\n"
	if err := os.WriteFile(filepath.Join(tmp, "plumbline.yaml"), []byte(cfg), 0o644); err != nil {
		t.Fatal(err)
	}
	sc := "start: 2026-03-01T00:00:00Z\nduration: 2h\nsensors: plumbline.yaml\n"
	s, err := Load([]byte(sc), filepath.Join(tmp, "s.yaml"))
	if err != nil {
		t.Fatalf("Load: %v", err)
	}
	if len(s.Sensors) != 1 || s.Sensors[0].Unit != "kPa" || s.SensorLines[0] != 4 {
		t.Errorf("sensors: got %+v lines %v", s.Sensors, s.SensorLines)
	}
}

// TestBadCorpus loads every testdata/scenario/*.bad.yaml and compares the
// problems reported with the table: every message, nothing more.
func TestBadCorpus(t *testing.T) {
	table := map[string][]string{
		"unknown-key.bad.yaml": {
			`3: unknown key "sead"`,
			`7: unknown key "sise_lps" in an event`,
			`5: sensors[0]: unknown key "acuracy" (known: id, quantity, at, topic, unit, accuracy, min, max, zone, decode)`,
			`7: events[0] (leak at J-1): size_lps must be positive, got 0`,
		},
		"syntax.bad.yaml": {
			`3: did not find expected ',' or '}'`,
		},
		"times.bad.yaml": {
			`1: start: "2026-03-01 00:00" is not an RFC 3339 time (2026-03-01T00:00:00Z)`,
		},
		"span.bad.yaml": {
			`3: step: "5 minutes" is not a Go duration (5m, 36h)`,
			`11: events[4] start: "tomorrow" is neither an RFC 3339 time nor an offset (Go duration) from the scenario start`,
			`7: events[0] (leak at J-1): start 2026-02-28T23:00:00Z is outside the scenario [2026-03-01T00:00:00Z, 2026-03-03T00:00:00Z)`,
			`8: events[1] (leak at J-2): start 2026-03-03T00:00:00Z is outside the scenario [2026-03-01T00:00:00Z, 2026-03-03T00:00:00Z)`,
			`9: events[2] (leak at J-3): end 2026-03-01T09:00:00Z is not after start 2026-03-01T10:00:00Z`,
			`10: events[3] (leak at J-4): end 2026-03-04T00:00:00Z is after the end of the scenario 2026-03-03T00:00:00Z`,
			`12: events[5] (leak at J-6): start is missing`,
			`12: events[5] (leak at J-6): ramp must not be negative, got -1h0m0s`,
		},
		"kinds.bad.yaml": {
			`6: events[0] (burst at J-1): unknown kind "burst" (leak, blockage or sensor-fault); a burst is a leak with burst: true`,
			`7: events[1] (sensor-fault at P-1): unknown mode "frozen" (stuck, drift, spike or offset)`,
			`8: events[2] (sensor-fault at P-1): mode is missing (stuck, drift, spike or offset)`,
			`9: events[3]: kind is missing (leak, blockage or sensor-fault)`,
			`10: events[4]: at is missing`,
		},
		"sizes.bad.yaml": {
			`6: events[0] (leak at J-1): size_lps must be positive, got -2`,
			`7: events[1] (leak at J-2): size_lps must be positive, got 0`,
			`8: events[2] (blockage at P-3): open_fraction must be in (0, 1), got 1.2`,
			`9: events[3] (blockage at P-4): open_fraction must be in (0, 1), got 0`,
			`10: events[4] (leak at J-5): exponent (FAVAD N1) must be in (0, 3], got 5`,
			`11: events[5] (leak at J-6): a burst is sudden: it has no ramp (got 2h0m0s)`,
			`12: events[6] (sensor-fault at P-1): amount must be a non-zero number for mode drift`,
			`13: events[7] (sensor-fault at P-1): amount is not used by mode stuck (got 4)`,
			`14: events[8] (sensor-fault at P-1): every must be positive, got -5m0s`,
		},
		"crossed.bad.yaml": {
			`6: events[0] (leak at J-1): open_fraction has no meaning for a leak`,
			`7: events[1] (blockage at P-2): size_lps has no meaning for a blockage`,
			`8: events[2] (sensor-fault at P-1): ramp has no meaning for a sensor-fault`,
			`9: events[3] (sensor-fault at P-1): every is used by mode spike only`,
		},
		"sensors.bad.yaml": {
			`6: sensors[2] Q-3: unknown quantity "volume" (pressure, flow, level or head)`,
			`7: sensors[3] P-4: at is missing (a node id, or a link id for flow)`,
			`8: sensors[4]: unknown key "colour" (known: id, quantity, at, topic, unit, accuracy, min, max, zone, decode)`,
			`9: sensors[5] P-6: accuracy must not be negative`,
			`10: sensors[6] P-7: min 10 must be below max 5`,
			`11: sensors[7]: id is missing`,
			`12: sensors[8]: a sensor is a mapping (id, quantity, at, topic, unit, accuracy)`,
			`5: sensors[1] P-1: duplicate id (first at line 4)`,
			`13: sensors[9] P-9: unit "barr" is not a pressure unit (did you mean "bar"?)`,
			`14: sensors[10] P-10: unit "mld" is not a flow unit (SI prefixes are case-sensitive: m is milli, M is mega; did you mean "MLD"?)`,
			`15: sensors[11] P-11: unit "furlong" is not a level unit (known: ` + strings.Join(units.Names(telemetry.Level), ", ") + `)`,
			`17: events[0] (sensor-fault at P-99): no sensor "P-99" in the scenario's sensors`,
		},
		"settings.bad.yaml": {
			`10: noise: unknown quantity "temperature" (pressure, flow, level or head)`,
			`10: noise: flow must be a finite value ≥ 0, got -1`,
			`11: resolution: flow must be a finite value ≥ 0, got -0.01`,
			`3: step 2h0m0s is longer than the duration 1h0m0s`,
			`4: logging_interval must be positive, got 0s`,
			`5: missing_fraction must be in [0, 1), got 1.5`,
			`7: max_delay must be positive when late_fraction is set, got 0s`,
			`8: demand_noise must be in [0, 1), got -0.1`,
			`9: daily_variation must be in [0, 1), got 1`,
		},
		"missing.bad.yaml": {
			` sensors is missing (a list of sensors or the path of a file holding one)`,
			` start is missing (an RFC 3339 time)`,
			` duration is missing (a Go duration such as 336h)`,
		},
		"sensors-path.bad.yaml": {
			`3: sensors: open ` + dir + `/no-such-sensors.yaml: no such file or directory`,
		},
		"sensors-inner.bad.yaml": {
			`3: sensors: ` + dir + `/sensors-inner.sensors.yaml:2: sensors[1] P-2: unknown quantity "presure" (pressure, flow, level or head)`,
		},
		// Checked against testNetwork (Validate with the network).
		"network-refs.bad.yaml": {
			`6: sensors[1] P-9: pressure sensor at "J-99": no such node in the network`,
			`7: sensors[2] F-1: flow sensor at "J-1": no such link in the network`,
			`8: sensors[3] L-1: level sensor at "J-2": the node is a junction, not a tank`,
			`9: sensors[4] L-2: level sensor at "T-9": no such node in the network`,
			`11: events[0] (leak at P-1): "P-1" is a link; a leak is placed at a junction`,
			`12: events[1] (leak at R-src): "R-src" is a reservoir; a leak is placed at a junction`,
			`13: events[2] (leak at J-42): no node "J-42" in the network`,
			`14: events[3] (blockage at J-2): "J-2" is a node; a blockage is placed on a link`,
			`15: events[4] (blockage at P-42): no link "P-42" in the network`,
			`3: weekend_pattern "sunday" is not a pattern of the network`,
		},
	}
	files, err := filepath.Glob(filepath.Join(dir, "*.bad.yaml"))
	if err != nil || len(files) == 0 {
		t.Fatalf("no corpus: %v", err)
	}
	for _, f := range files {
		base := filepath.Base(f)
		want, ok := table[base]
		if !ok {
			t.Errorf("%s: not in the table of expected messages", base)
			continue
		}
		delete(table, base)
		s, err := LoadFile(f)
		var got []string
		if err != nil {
			got = append(got, splitJoined(err)...)
		}
		if base == "network-refs.bad.yaml" {
			if err != nil {
				t.Errorf("%s: Load without the network: %v", base, err)
			}
			for _, e := range Validate(s, testNetwork()) {
				got = append(got, e.Error())
			}
		}
		for i := range got {
			// "file:line: msg" → "line: msg"; "file: msg" → " msg".
			got[i] = strings.TrimPrefix(got[i], f+":")
		}
		sort.Strings(got)
		sort.Strings(want)
		if strings.Join(got, "\n") != strings.Join(want, "\n") {
			t.Errorf("%s:\ngot:\n  %s\nwant:\n  %s", base, strings.Join(got, "\n  "), strings.Join(want, "\n  "))
		}
	}
	for base := range table {
		t.Errorf("%s: in the table but not in %s", base, dir)
	}
}

// splitJoined returns the message of every error joined in err.
func splitJoined(err error) []string {
	if j, ok := err.(interface{ Unwrap() []error }); ok {
		var out []string
		for _, e := range j.Unwrap() {
			out = append(out, splitJoined(e)...)
		}
		return out
	}
	return []string{err.Error()}
}

// TestLoadKeepsGood checks that a file with one bad event still gives the
// good ones.
func TestLoadKeepsGood(t *testing.T) {
	s, err := LoadFile(filepath.Join(dir, "sizes.bad.yaml"))
	if err == nil {
		t.Fatal("want errors")
	}
	var se *Error
	if !errors.As(err, &se) || se.File == "" || se.Line == 0 {
		t.Errorf("want *Error with file and line, got %v", err)
	}
	if s == nil || len(s.Events) != 9 || len(s.Sensors) != 1 || s.Events[4].SizeLPS != 1 {
		t.Errorf("want the parsed scenario kept, got %+v", s)
	}
}

func TestEventGrowthAndActive(t *testing.T) {
	t0 := mustTime(t, "2026-03-01T00:00:00Z")
	e := Event{Kind: finding.Leak, At: "J-1", Start: t0, End: t0.Add(24 * time.Hour), Ramp: 6 * time.Hour, SizeLPS: 2}
	cases := []struct {
		at   time.Duration
		want float64
	}{{-time.Minute, 0}, {0, 0}, {3 * time.Hour, 0.5}, {6 * time.Hour, 1}, {12 * time.Hour, 1}, {24 * time.Hour, 0}}
	for _, c := range cases {
		if got := e.Growth(t0.Add(c.at)); math.Abs(got-c.want) > 1e-12 {
			t.Errorf("Growth(+%s): got %g, want %g (tolerance 1e-12)", c.at, got, c.want)
		}
	}
	step := Event{Kind: finding.Leak, Start: t0}
	if step.Growth(t0) != 1 || !step.Active(t0.Add(1000*time.Hour)) {
		t.Errorf("a leak without ramp or end is full size from start on, forever")
	}
}

// TestLeakCoeff checks the FAVAD coefficient against the pressure laws it
// stands for: for a fixed-area orifice (N1 = 0.5) the outflow goes with
// the square root of the pressure (Torricelli; May 1994), so a quarter of
// the pressure gives half the flow; for N1 = 1 the outflow is proportional
// to the pressure (Lambert 2001, from memory).
func TestLeakCoeff(t *testing.T) {
	burst := Event{Kind: finding.Leak, SizeLPS: 4, Burst: true}
	c := burst.LeakCoeff(40)
	if got, want := c*math.Pow(10, burst.LeakExponent()), 2.0; math.Abs(got-want) > 1e-12 {
		t.Errorf("burst at a quarter of the pressure: got %g L/s, want %g (tolerance 1e-12)", got, want)
	}
	if got, want := c, 4/math.Sqrt(40); math.Abs(got-want) > 1e-12 {
		t.Errorf("burst C: got %g, want %g", got, want)
	}
	leak := Event{Kind: finding.Leak, SizeLPS: 1.5}
	c = leak.LeakCoeff(30)
	if got, want := c*15, 0.75; math.Abs(got-want) > 1e-12 {
		t.Errorf("N1=1 leak at half the pressure: got %g L/s, want %g", got, want)
	}
	if leak.LeakCoeff(0) != 0 || leak.LeakCoeff(-3) != 0 {
		t.Errorf("no coefficient from a pressure ≤ 0")
	}
	custom := Event{Kind: finding.Leak, SizeLPS: 1, Exponent: 1.5}
	if custom.LeakExponent() != 1.5 {
		t.Errorf("given exponent: got %g", custom.LeakExponent())
	}
}

// TestValidateBuiltInCode checks a scenario built in code (no lines) gets
// messages without lines, and the network checks catch a wrong node.
func TestValidateBuiltInCode(t *testing.T) {
	t0 := mustTime(t, "2026-03-01T00:00:00Z")
	s := &Scenario{
		File: "built", Start: t0, Duration: 24 * time.Hour, Step: 5 * time.Minute, LoggingInterval: time.Minute,
		Sensors: []telemetry.Sensor{{ID: "P-1", Quantity: telemetry.Pressure, At: "J-1"}},
		Events: []Event{
			{Kind: finding.Leak, At: "J-5", Start: t0.Add(time.Hour), SizeLPS: 1},
			{Kind: finding.SensorFault, At: "P-1", Start: t0.Add(time.Hour), Mode: Offset, Amount: 0.2},
		},
	}
	if errs := Validate(s, testNetwork()); len(errs) != 0 {
		t.Fatalf("good scenario: %v", errors.Join(errs...))
	}
	s.Events[0].At = "J-50"
	errs := Validate(s, testNetwork())
	if len(errs) != 1 || errs[0].Error() != `built: events[0] (leak at J-50): no node "J-50" in the network` {
		t.Errorf("got %v", errs)
	}
}

func readFile(p string) ([]byte, error) { return os.ReadFile(p) }
