package decode

import (
	"bytes"
	"encoding/json"
	"math"
	"strings"
	"testing"
	"time"

	"github.com/rs/zerolog"

	"plumbline/model/telemetry"
)

func testSensors() []telemetry.Sensor {
	return []telemetry.Sensor{
		{ID: "P-104", Quantity: telemetry.Pressure, Topic: "town/north/P-104", Unit: "bar", Min: 0, Max: 120},
		{ID: "P-105", Quantity: telemetry.Pressure, Topic: "town/+/{sensor}", Unit: "kPa"},
		{ID: "P-106", Quantity: telemetry.Pressure, Topic: "town/+/{sensor}", Unit: "psi"},
		{ID: "F-in", Quantity: telemetry.Flow, Topic: "plant/inlet/#", Unit: "m3/h"},
		{ID: "T-1", Quantity: telemetry.Level, Topic: "tanks/hill", Unit: "ft"},
		{ID: "F-2", Quantity: telemetry.Flow, Unit: "L/s"}, // fed by a route only
	}
}

func newTestPipeline(t *testing.T, log zerolog.Logger) *Pipeline {
	t.Helper()
	fields, err := New(Spec{Format: "json", Value: "d.q", Time: "d.t"})
	if err != nil {
		t.Fatal(err)
	}
	p, err := NewPipeline(testSensors(), Options{
		Routes: []Route{{Filter: "vendor/{sensor}/data", Decoder: fields}},
		Log:    log,
	})
	if err != nil {
		t.Fatal(err)
	}
	return p
}

func TestPipeline(t *testing.T) {
	arrival := time.Date(2026, 3, 2, 1, 10, 30, 0, time.UTC)
	p := newTestPipeline(t, zerolog.Nop())
	cases := []struct {
		topic, payload string
		reason         Reason
		sensor         string
		value          float64 // canonical
		unit           string
		time           time.Time
	}{
		// 1 bar = 1e5 Pa / 9806.65 Pa per m (NIST SP 811 App. B.8).
		{"town/north/P-104", "3.5", Accepted, "P-104", 3.5e5 / 9806.65, "bar", arrival},
		{"town/north/P-104", `{"value":350,"unit":"kPa","time":"2026-03-02T01:10:00Z"}`, Accepted, "P-104", 350e3 / 9806.65, "kPa", arrival.Add(-30 * time.Second)},
		// Capture picks the sensor; the payload's unit overrides the sensor's.
		{"town/south/P-105", "400", Accepted, "P-105", 400e3 / 9806.65, "kPa", arrival},
		{"town/south/P-106", `{"value":50}`, Accepted, "P-106", 50 * 6894.757293168361 / 9806.65, "psi", arrival},
		{"town/south/P-106", `{"value":50,"unit":"psi"}`, Accepted, "P-106", 50 * 6894.757293168361 / 9806.65, "psi", arrival},
		{"town/south/P-106", `{"value":5,"unit":"m"}`, Accepted, "P-106", 5, "m", arrival},
		// 36 m3/h = 10 L/s.
		{"plant/inlet", "36", Accepted, "F-in", 10, "m3/h", arrival},
		{"plant/inlet/a/b", "36", Accepted, "F-in", 10, "m3/h", arrival},
		// 10 ft = 3.048 m (NIST SP 811 App. B.8).
		{"tanks/hill", "10", Accepted, "T-1", 3.048, "ft", arrival},
		// The route's decoder.
		{"vendor/F-2/data", `{"d":{"q":2.5,"t":1772413800}}`, Accepted, "F-2", 2.5, "L/s", time.Unix(1772413800, 0).UTC()},
		// Rejections.
		{"elsewhere/x", "1", UnknownTopic, "", 0, "", time.Time{}},
		{"$SYS/north/P-105", "1", UnknownTopic, "", 0, "", time.Time{}},
		{"town/south/P-999", "1", UnknownSensor, "", 0, "", time.Time{}},
		{"vendor/P-999/data", "1", UnknownSensor, "", 0, "", time.Time{}},
		{"town/north/P-104", "abc", Undecodable, "P-104", 0, "", time.Time{}},
		{"town/north/P-104", `{"value":`, Undecodable, "P-104", 0, "", time.Time{}},
		{"town/north/P-104", "NaN", NotFinite, "P-104", 0, "", time.Time{}},
		{"town/north/P-104", "-Inf", NotFinite, "P-104", 0, "", time.Time{}},
		{"town/north/P-104", "1e308", NotFinite, "P-104", 0, "", time.Time{}}, // finite in bar, Inf in m
		{"town/north/P-104", `{"value":1,"unit":"L/s"}`, UnknownUnit, "P-104", 0, "", time.Time{}},
		{"town/north/P-104", `{"value":1,"unit":"furlong"}`, UnknownUnit, "P-104", 0, "", time.Time{}},
		// SI prefixes are case-sensitive (BIPM SI Brochure 9th ed. 2019
		// §3): "mpa" would be the millipascal, 10^9 below the MPa, so it
		// is refused; "MPA" can only be the megapascal.
		{"town/north/P-104", `{"value":0.35,"unit":"mpa"}`, UnknownUnit, "P-104", 0, "", time.Time{}},
		{"town/north/P-104", `{"value":0.35,"unit":"MPA"}`, Accepted, "P-104", 0.35e6 / 9806.65, "MPa", arrival},
		{"town/north/P-104", "13", OutOfRange, "P-104", 0, "", time.Time{}}, // 132.6 m > 120
		{"town/north/P-104", "-0.1", OutOfRange, "P-104", 0, "", time.Time{}},
		{"town/north/P-104", `{"value":1,"time":"2026-03-02T01:20:00Z"}`, TooFarFuture, "P-104", 0, "", time.Time{}},
		{"town/north/P-104", `{"value":1,"time":"2026-02-01T00:00:00Z"}`, TooFarPast, "P-104", 0, "", time.Time{}},
		{"town/north/P-104", strings.Repeat(" ", DefaultMaxPayload+1), TooLarge, "P-104", 0, "", time.Time{}},
	}
	want := map[Count]uint64{}
	for _, c := range cases {
		r, reason := p.Process(c.topic, []byte(c.payload), arrival)
		if reason != c.reason {
			t.Errorf("%s %.40q: reason %v, want %v", c.topic, c.payload, reason, c.reason)
			continue
		}
		if reason != Accepted {
			want[Count{Sensor: c.sensor, Reason: reason}]++
			continue
		}
		if r.Sensor != c.sensor || r.Unit != c.unit || !r.Time.Equal(c.time) {
			t.Errorf("%s %s: got %s %s %v, want %s %s %v", c.topic, c.payload, r.Sensor, r.Unit, r.Time, c.sensor, c.unit, c.time)
		}
		if math.Abs(r.Value-c.value) > 1e-12*math.Abs(c.value) {
			t.Errorf("%s %s: value %.15g, want %.15g (rel tol 1e-12)", c.topic, c.payload, r.Value, c.value)
		}
	}
	got := map[Count]uint64{}
	for _, c := range p.Rejections() {
		got[Count{Sensor: c.Sensor, Reason: c.Reason}] = c.N
	}
	for k, n := range want {
		if got[k] != n {
			t.Errorf("rejections %s/%v = %d, want %d", k.Sensor, k.Reason, got[k], n)
		}
	}
	if len(got) != len(want) {
		t.Errorf("rejection counters %v, want %v", got, want)
	}
	if n := p.AcceptedCount(-1); n != 11 {
		t.Errorf("accepted %d, want 11", n)
	}
	if n := p.Processed(); n != uint64(len(cases)) {
		t.Errorf("processed %d, want %d", n, len(cases))
	}
	subs := strings.Join(p.Subscriptions(), " ")
	if wantSubs := "vendor/+/data town/north/P-104 town/+/+ plant/inlet/# tanks/hill"; subs != wantSubs {
		t.Errorf("subscriptions %q, want %q", subs, wantSubs)
	}
}

func TestPipelineConfigErrors(t *testing.T) {
	sensors := []telemetry.Sensor{
		{ID: "A", Quantity: telemetry.Pressure, Topic: "t/a", Unit: "bar"},
		{ID: "A", Quantity: telemetry.Pressure, Topic: "t/a2", Unit: "bar"},
		{ID: "B", Quantity: telemetry.Pressure, Topic: "t/a", Unit: "bar"},
		{ID: "C", Quantity: telemetry.Flow, Topic: "t/c", Unit: "bar"},
		{ID: "D", Quantity: telemetry.Flow, Topic: "t/#/x", Unit: "L/s"},
	}
	_, err := NewPipeline(sensors, Options{
		Routes:         []Route{{Filter: "v/+", Sensor: "nope"}},
		SensorDecoders: map[string]Decoder{"ghost": Auto{}},
	})
	if err == nil {
		t.Fatal("NewPipeline accepted a bad configuration")
	}
	for _, want := range []string{
		"sensor A: id used twice",
		"sensor B: topic t/a is also sensor A's",
		`sensor C: units: "bar" is not a flow unit`,
		"sensor D: invalid MQTT topic filter \"t/#/x\": '#' must be the last level (§4.7.1.2)",
		`topic v/+: sensor "nope" is not configured`,
		"decoder for sensor ghost: no such sensor",
	} {
		if !strings.Contains(err.Error(), want) {
			t.Errorf("error %q\ndoes not contain %q", err, want)
		}
	}
}

// TestRejectLogRate checks that rejections are logged at a bounded rate
// and that each logged line names topic, sensor and reason.
func TestRejectLogRate(t *testing.T) {
	var buf bytes.Buffer
	p, err := NewPipeline(testSensors(), Options{Log: zerolog.New(&buf), LogBurst: 3, LogPeriod: time.Hour})
	if err != nil {
		t.Fatal(err)
	}
	now := time.Now()
	for i := 0; i < 1000; i++ {
		p.Process("town/north/P-104", []byte("x"), now)
	}
	lines := strings.Split(strings.TrimSpace(buf.String()), "\n")
	if len(lines) != 3 {
		t.Fatalf("%d log lines for 1000 rejections, want 3 (burst)", len(lines))
	}
	var rec map[string]any
	if err := json.Unmarshal([]byte(lines[0]), &rec); err != nil {
		t.Fatal(err)
	}
	for k, v := range map[string]string{"topic": "town/north/P-104", "sensor": "P-104", "reason": "undecodable", "level": "warn"} {
		if rec[k] != v {
			t.Errorf("log %s = %v, want %q (line %s)", k, rec[k], v, lines[0])
		}
	}
	if p.RejectedBy(Undecodable) != 1000 {
		t.Errorf("counted %d, want 1000", p.RejectedBy(Undecodable))
	}
}

func TestProcessNoAlloc(t *testing.T) {
	p := newTestPipeline(t, zerolog.Nop())
	now := time.Date(2026, 3, 2, 1, 10, 30, 0, time.UTC)
	msgs := []struct{ topic, payload string }{
		{"town/north/P-104", `{"value": 3.41, "time": "2026-03-02T01:10:00Z", "unit": "bar"}`},
		{"town/south/P-105", `{"value": 341, "unit": "kPa"}`},
		{"town/south/P-106", `52.5`},
		{"plant/inlet/x", `{"value":36}`},
	}
	for _, m := range msgs {
		b := []byte(m.payload)
		n := testing.AllocsPerRun(200, func() {
			if _, r := p.Process(m.topic, b, now); r != Accepted {
				t.Fatalf("%s: %v", m.topic, r)
			}
		})
		if n != 0 {
			t.Errorf("Process(%s, %s) allocates %v times, want 0", m.topic, m.payload, n)
		}
	}
}

func TestReasonWords(t *testing.T) {
	for r := Accepted; r < numReasons; r++ {
		got, ok := ParseReason(r.String())
		if !ok || got != r {
			t.Errorf("ParseReason(%q) = %v, %v", r.String(), got, ok)
		}
	}
	if len(Reasons) != int(numReasons)-1 {
		t.Errorf("Reasons lists %d, want %d", len(Reasons), numReasons-1)
	}
}

// TestDecoderPanic: a decoder that panics costs one message, not the
// service.
func TestDecoderPanic(t *testing.T) {
	bad := DecoderFunc(func(p []byte, s *Sample) error { panic("index out of range (test)") })
	p, err := NewPipeline([]telemetry.Sensor{{ID: "A", Quantity: telemetry.Flow, Topic: "a", Unit: "L/s"}},
		Options{SensorDecoders: map[string]Decoder{"A": bad}})
	if err != nil {
		t.Fatal(err)
	}
	if _, r := p.Process("a", []byte("1"), time.Now()); r != Undecodable {
		t.Errorf("reason %v, want undecodable", r)
	}
}
