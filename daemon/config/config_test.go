package config

import (
	"errors"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"plumbline/model/telemetry"
)

const testdata = "../../testdata/config"

// badCorpus maps each testdata/config/*.bad.yaml to every error it must
// produce, as substrings of Problem.String ("file:line: subject: key:
// message"); the file must produce exactly these errors. A leading "@"
// means the problem is in another file than the configuration.
var badCorpus = map[string][]string{
	"calibration.bad.yaml": {
		`:8: calibration: every: must be at least 1h0m0s, got 10m`,
		`:9: calibration: window: must be at least 48h0m0s (a day to fit and a day to validate on), got 24h`,
		`:10: shift: unknown key in calibration (known: noise_file, every, window)`,
	},
	"network-bad.bad.yaml": {
		"network-bad.bad.yaml:1: network: the network file ../network/unknown-ends.bad.geojson has errors",
		`@unknown-ends.bad.geojson:8: feature P-2: to: unknown node "J-9"`,
		`@unknown-ends.bad.geojson:9: feature P-3: from: "P-1" is a link, not a node`,
	},
	"network-missing.bad.yaml": {
		"network-missing.bad.yaml:1: network: cannot read the network file",
	},
	"no-sensors.bad.yaml": {
		"no-sensors.bad.yaml: sensors: missing",
	},
	"sensors-include.bad.yaml": {
		"@bad-sensors.list.yaml:6: sensor F-in: unti: unknown key in a sensor",
		`@bad-sensors.list.yaml:11: sensor PT-1: unit: "furlong" is not a pressure unit`,
	},
	"sensors.bad.yaml": {
		`:7: sensor F-1: id: duplicate sensor id "F-1" (first at line 3)`,
		`:12: sensor X-1: quantity: unknown quantity "temperature"`,
		`:17: sensor P-9: at: "J-99" is not a node or link of the network`,
		`:21: sensor F-2: at: "J-2" is a node; a flow sensor measures a link`,
		`:25: sensor P-10: at: "P-4" is a link; a pressure sensor measures a node`,
		`:29: sensor L-1: at: "J-3" is a junction; a level sensor measures a tank or reservoir`,
		`:35: sensor P-11: unit: "L/s" is not a pressure unit`,
		`:40: sensor P-12: accuracy: must not be negative, got -0.1`,
		`:41: sensor P-13: topic: missing`,
		`:47: sensor P-14: topic: topic "t/#/P-14": '#' must be the last level (MQTT 3.1.1 §4.7.1.2)`,
		`:51: sensor P-15: topic: topic "t/P+15": '+' must be a whole level (MQTT 3.1.1 §4.7.1.3)`,
		`:55: sensor P-16: topic: "t/F-1" is also the topic of sensor F-1`,
		`:59: sensor P-17: topic: topic "t/{sensors}": level "{sensors}": braces are only allowed`,
		`:65: sensor P-18: max: min 50 must be below max 10`,
		`:66: sensors[15]: id: missing`,
		`:73: sensor P-19: decode.format: unknown format "xml"`,
		`:78: sensor P-20: decode.value: missing: format json needs the value's field path`,
	},
	"services.bad.yaml": {
		`:2: step: want a duration such as "5m" or "1h", got "fast"`,
		`:4: mqtt: url: "http://broker.invalid:1883": unknown scheme "http"`,
		`:4: mqtt: key_file: missing: cert_file and key_file go together`,
		`:6: mqtt: qos: want 0 or 1, got 2`,
		`:7: mqtt: keepalive: must be positive, got -5s`,
		`:14: store: url: "ftp://store.invalid:8086": unknown scheme "ftp"`,
		`:14: store: bucket: missing`,
		`:17: http: listen: want host:port such as 127.0.0.1:8470, got "localhost"`,
		`:19: log: level: unknown level "verbose"`,
		`:20: log: format: unknown format "xml"`,
	},
	"syntax.bad.yaml": {
		"syntax.bad.yaml:3: not valid YAML: found a tab character",
	},
	"types.bad.yaml": {
		":2: step: want a string, got a list",
		":8: sensor F-in: accuracy: want a number, got the string `high`",
		":9: zones: want a list, got the string `west`",
	},
	"typos.bad.yaml": {
		":2: stpe: unknown key in the configuration (did you mean step?)",
		":6: pasword_file: unknown key in mqtt (did you mean password_file?)",
		":12: sensor F-in: acuracy: unknown key in a sensor (did you mean accuracy?)",
		":13: sensor F-in: vaule: unknown key in a decode block (did you mean value?)",
		":13: sensor F-in: decode.value: missing: format json needs the value's field path",
		":17: nigth: unknown key in a zone (did you mean night?)",
		":18: htpp: unknown key in the configuration (did you mean http?)",
	},
	"zones.bad.yaml": {
		":2: step: must be positive, got 0s",
		`:14: zone west: inlets: "F-none" is not a sensor of this configuration`,
		":15: zone west: outlets: sensor PT-3 measures pressure; zone outlets need flow sensors",
		`:16: zone west: night: start of "2am-4am": want HH:MM, got "2am"`,
		`:17: zone west: timezone: "Mars/Olympus_Mons" is not an IANA time zone name`,
		":18: zone west: night_use_lps: must not be negative, got -1",
		`:19: zone west: id: duplicate zone id "west" (first at line 13)`,
		`:21: zone west: night: start of "25:00-04:00": "25:00" is not a time of day`,
		`:22: zone north: id: no node of the network is in zone "north" (zones there: west, east)`,
		":24: zone north: outlets: sensor F-in is listed twice (in inlets and outlets)",
		`:25: zone north: night: "03:00-03:00" is empty or the whole day`,
		":26: zone north: service_connections: must not be negative, got -4",
	},
}

func TestBadCorpus(t *testing.T) {
	files, err := filepath.Glob(filepath.Join(testdata, "*.bad.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	seen := map[string]bool{}
	for _, path := range files {
		name := filepath.Base(path)
		seen[name] = true
		want, ok := badCorpus[name]
		if !ok {
			t.Errorf("%s: not in the badCorpus table", name)
			continue
		}
		t.Run(name, func(t *testing.T) {
			data, err := os.ReadFile(path)
			if err != nil {
				t.Fatal(err)
			}
			c, probs := Parse(data, path)
			if c != nil {
				t.Errorf("Parse returned a Config for a bad file")
			}
			var got []Problem
			for _, p := range probs {
				if p.Severity == Error {
					got = append(got, p)
				}
			}
			list := func() string {
				var s []string
				for _, p := range got {
					s = append(s, p.String())
				}
				return strings.Join(s, "\n  ")
			}
			for _, w := range want {
				other := strings.HasPrefix(w, "@")
				w = strings.TrimPrefix(w, "@")
				found := false
				for _, p := range got {
					if strings.Contains(p.String(), w) && (p.File != path) == other {
						found = true
						break
					}
				}
				if !found {
					t.Errorf("missing problem %q\ngot:\n  %s", w, list())
				}
			}
			if len(got) != len(want) {
				t.Errorf("got %d errors, want %d:\n  %s", len(got), len(want), list())
			}
			_, err = Load(data, path)
			var ve *ValidationError
			if !errors.As(err, &ve) || len(ve.Problems) != len(got) {
				t.Errorf("Load: got %v, want a *ValidationError of %d problems", err, len(got))
			}
		})
	}
	for name := range badCorpus {
		if !seen[name] {
			t.Errorf("table names %s but there is no such file", name)
		}
	}
}

func TestLoadGood(t *testing.T) {
	path := filepath.Join(testdata, "good.yaml")
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	c, probs := Parse(data, path)
	if c == nil || len(probs) != 0 {
		t.Fatalf("good.yaml: want no problems, got %v", probs)
	}
	if want := filepath.Join(testdata, "../network/two-loop.geojson"); c.NetworkPath != want || c.Network == nil {
		t.Errorf("network: got %q (loaded %v), want %q", c.NetworkPath, c.Network != nil, want)
	}
	if c.Step != 5*time.Minute || c.MQTT.URL != "tcp://127.0.0.1:1883" || c.MQTT.ClientID != "plumbline-test" ||
		c.MQTT.QoS != DefaultQoS || c.MQTT.KeepAlive != DefaultKeepAlive || c.MQTT.Embedded() {
		t.Errorf("step/mqtt: got %v %+v", c.Step, c.MQTT)
	}
	if len(c.Sensors) != 6 {
		t.Fatalf("got %d sensors, want 6", len(c.Sensors))
	}
	want := map[string]telemetry.Sensor{
		"F-in":     {ID: "F-in", Quantity: telemetry.Flow, At: "P-1", Topic: "quennick/flow/F-in", Unit: "m3/h", Accuracy: 0.5, Zone: "west"},
		"F-east-1": {ID: "F-east-1", Quantity: telemetry.Flow, At: "P-3", Topic: "quennick/flow/F-east-1", Unit: "L/s", Accuracy: 0.05, Zone: "east"},
		"F-east-2": {ID: "F-east-2", Quantity: telemetry.Flow, At: "P-8", Topic: "quennick/flow/F-east-2", Unit: "L/s", Accuracy: 0.05, Zone: "east"},
		"PT-3":     {ID: "PT-3", Quantity: telemetry.Pressure, At: "J-3", Topic: "quennick/pressure/{sensor}", Unit: "bar", Accuracy: 0.02, Zone: "east"},
		"PT-7":     {ID: "PT-7", Quantity: telemetry.Pressure, At: "J-7", Topic: "quennick/pressure/{sensor}", Unit: "kPa", Accuracy: 2, Zone: "west", Min: 0, Max: 120},
		"H-R1":     {ID: "H-R1", Quantity: telemetry.Head, At: "R-1", Topic: "quennick/head/R-1", Unit: "m", Accuracy: 0.05, Zone: "west"},
	}
	for _, s := range c.Sensors {
		if s != want[s.ID] {
			t.Errorf("sensor %s:\n got %+v\nwant %+v", s.ID, s, want[s.ID])
		}
	}
	if d, ok := c.Decode["PT-7"]; !ok || d != (Decode{Format: "json", Value: "data.p", Time: "data.t", TimeFormat: "auto"}) || len(c.Decode) != 1 {
		t.Errorf("decode: got %+v", c.Decode)
	}
	if len(c.Zones) != 2 {
		t.Fatalf("got %d zones, want 2", len(c.Zones))
	}
	w := c.Zones[0]
	if w.ID != "west" || strings.Join(w.Inlets, ",") != "F-in" || strings.Join(w.Outlets, ",") != "F-east-1,F-east-2" ||
		w.Night != (NightWindow{2 * time.Hour, 4 * time.Hour}) || w.TimeZone.String() != "Europe/Berlin" ||
		w.NightUseLPS != 0.8 || w.MainsLengthKm != 4.2 || w.ServiceConnections != 310 {
		t.Errorf("zone west: got %+v", w)
	}
	if e := c.Zones[1]; e.Night.String() != "23:30-03:30" || e.TimeZone != time.UTC {
		t.Errorf("zone east: got %+v", e)
	}
	if !c.Store.Embedded() || c.DataDir != filepath.Join(testdata, "plumbline-data") || c.HTTP.Listen != "127.0.0.1:8470" ||
		c.Log.Level != "info" || c.Log.Format != DefaultLogFormat {
		t.Errorf("store/data/http/log: got %+v %q %+v %+v", c.Store, c.DataDir, c.HTTP, c.Log)
	}
	if c.Alerts.Kind == 0 || len(c.Alerts.Content) == 0 {
		t.Errorf("alerts: want the raw block, got kind %v", c.Alerts.Kind)
	}
}

func TestLoadSensorsFileAndDefaults(t *testing.T) {
	c, err := LoadFile(filepath.Join(testdata, "sensors-file.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	if c.SensorsFile != filepath.Join(testdata, "sensors.yaml") || len(c.Sensors) != 2 {
		t.Fatalf("sensors file: got %q with %d sensors", c.SensorsFile, len(c.Sensors))
	}
	if s := c.Sensors[1]; s.ID != "PT-5" || s.Unit != "m" || s.Zone != "west" {
		t.Errorf("PT-5: got %+v", s)
	}
	z := c.Zones[0]
	if c.Step != DefaultStep || !c.MQTT.Embedded() || c.MQTT.ClientID != DefaultClientID || !c.Store.Embedded() ||
		c.HTTP.Listen != DefaultListen || c.Log.Level != DefaultLogLevel || c.DataDir != filepath.Join(testdata, DefaultDataDir) ||
		z.Night.String() != DefaultNight || z.TimeZoneName != DefaultTimeZone || z.TimeZone != time.UTC {
		t.Errorf("defaults: got step %v mqtt %+v store %+v http %+v log %+v data %q zone %+v", c.Step, c.MQTT, c.Store, c.HTTP, c.Log, c.DataDir, z)
	}
	if s := c.Sensors[0]; s.Min != 0 || s.Max != 0 {
		t.Errorf("no min/max: got %g %g, want 0 0", s.Min, s.Max)
	}
}

func TestMinMaxOneSided(t *testing.T) {
	src := `network: ../network/two-loop.geojson
sensors:
  - {id: A, quantity: pressure, at: J-1, topic: t/A, min: 5}
  - {id: B, quantity: pressure, at: J-2, topic: t/B, max: 90}
`
	c, err := Load([]byte(src), filepath.Join(testdata, "inline.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	if a := c.Sensors[0]; a.Min != 5 || !math.IsInf(a.Max, 1) {
		t.Errorf("A: got min %g max %g, want 5 +Inf", a.Min, a.Max)
	}
	if b := c.Sensors[1]; !math.IsInf(b.Min, -1) || b.Max != 90 {
		t.Errorf("B: got min %g max %g, want -Inf 90", b.Min, b.Max)
	}
}

func TestWarnings(t *testing.T) {
	src := `network: ../network/two-loop.geojson
step: 2h
mqtt:
  username: ops
sensors:
  - {id: F-in, quantity: flow, at: P-1, topic: t/F-in}
  - {id: F-2, quantity: flow, at: P-2, topic: t/F-2}
  - {id: F-3, quantity: flow, at: P-3, topic: t/F-3}
zones:
  - id: west
    inlets: [F-2, F-3]
  - id: east
    outlets: [F-3]
`
	c, probs := Parse([]byte(src), filepath.Join(testdata, "warn.yaml"))
	if c == nil {
		t.Fatalf("warnings only, want a Config; got %v", probs)
	}
	want := []string{
		"warn.yaml:2: step: warning: 2h0m0s is longer than the network's pattern step 1h0m0s",
		"warn.yaml:4: mqtt: username: warning: not used: without url",
		"warn.yaml:11: zone west: inlets: warning: sensor F-2 is on link P-2, which does not cross the zone boundary",
		"warn.yaml:11: zone west: inlets: warning: sensor F-3 on link P-3 measures flow out of zone west",
		"warn.yaml:13: zone east: outlets: warning: sensor F-3 on link P-3 measures flow into zone east",
		"warn.yaml:12: zone east: inlets: warning: no inlet flow sensors",
	}
	if len(probs) != len(want) {
		t.Errorf("got %d problems, want %d: %v", len(probs), len(want), probs)
	}
	for _, w := range want {
		found := false
		for _, p := range probs {
			found = found || strings.Contains(p.String(), w)
		}
		if !found {
			t.Errorf("missing %q in %v", w, probs)
		}
	}
}

func TestCheckTopicFilter(t *testing.T) {
	// Cases from the rules of MQTT 3.1.1 (OASIS 2014) §4.7.1 and its
	// non-normative examples ("sport/tennis/#", "sport/+/player1", "+",
	// "#" valid; "sport/tennis#", "sport/tennis/#/ranking", "sport+"
	// invalid), plus our {sensor} level.
	cases := []struct {
		topic string
		ok    bool
	}{
		{"sport/tennis/player1", true},
		{"sport/tennis/#", true},
		{"#", true},
		{"+", true},
		{"+/tennis/#", true},
		{"sport/+/player1", true},
		{"/finance", true}, // §4.7.1.1: leading empty level
		{"a//b", true},
		{"plant/{sensor}", true},
		{"plant/{sensor}/value/#", true},
		{"sport/tennis#", false},
		{"sport/tennis/#/ranking", false},
		{"sport+", false},
		{"", false},
		{"$SYS/broker", false},
		{"a/{sensor}/{sensor}", false},
		{"a/{sensor", false},
		{"a/pre{sensor}", false},
		{"a/\x00", false},
		{"a/\xff", false},
	}
	for _, c := range cases {
		err := CheckTopicFilter(c.topic)
		if (err == nil) != c.ok {
			t.Errorf("CheckTopicFilter(%q): got %v, want ok=%v", c.topic, err, c.ok)
		}
	}
}

func TestNightWindow(t *testing.T) {
	cases := []struct {
		in      string
		start   time.Duration
		end     time.Duration
		length  time.Duration
		wantErr bool
	}{
		{"02:00-04:00", 2 * time.Hour, 4 * time.Hour, 2 * time.Hour, false},
		{"23:30-03:30", 23*time.Hour + 30*time.Minute, 3*time.Hour + 30*time.Minute, 4 * time.Hour, false},
		{"22:00-24:00", 22 * time.Hour, 24 * time.Hour, 2 * time.Hour, false},
		{" 01:15 - 01:45 ", time.Hour + 15*time.Minute, time.Hour + 45*time.Minute, 30 * time.Minute, false},
		{"2:00-4:00", 0, 0, 0, true},
		{"02:00", 0, 0, 0, true},
		{"02:60-04:00", 0, 0, 0, true},
		{"24:00-02:00", 0, 0, 0, true},
		{"00:00-24:00", 0, 0, 0, true},
		{"04:00-04:00", 0, 0, 0, true},
	}
	for _, c := range cases {
		w, err := ParseNightWindow(c.in)
		if (err != nil) != c.wantErr {
			t.Errorf("%q: got error %v, want error %v", c.in, err, c.wantErr)
			continue
		}
		if err == nil && (w.Start != c.start || w.End != c.end || w.Length() != c.length) {
			t.Errorf("%q: got %v-%v (%v), want %v-%v (%v)", c.in, w.Start, w.End, w.Length(), c.start, c.end, c.length)
		}
	}
	berlin, err := time.LoadLocation("Europe/Berlin")
	if err != nil {
		t.Fatal(err)
	}
	w, _ := ParseNightWindow("23:30-03:30")
	// 2026-01-15 01:00 UTC is 02:00 in Berlin (UTC+1 in winter, from the
	// tz database): inside; 2026-07-15 01:00 UTC is 03:00 (UTC+2): inside;
	// 2026-07-15 02:00 UTC is 04:00: outside.
	for _, c := range []struct {
		t    time.Time
		want bool
	}{
		{time.Date(2026, 1, 15, 1, 0, 0, 0, time.UTC), true},
		{time.Date(2026, 7, 15, 1, 0, 0, 0, time.UTC), true},
		{time.Date(2026, 7, 15, 2, 0, 0, 0, time.UTC), false},
		{time.Date(2026, 1, 15, 22, 29, 59, 0, time.UTC), false},
		{time.Date(2026, 1, 15, 22, 30, 0, 0, time.UTC), true},
	} {
		if got := w.Contains(c.t, berlin); got != c.want {
			t.Errorf("Contains(%v in Berlin): got %v, want %v", c.t, got, c.want)
		}
	}
}

func TestMergeKeys(t *testing.T) {
	// YAML merge keys (<<) are not misspelt keys.
	src := `network: ../network/two-loop.geojson
common: &p {quantity: pressure, topic: "t/{sensor}", unit: bar}
sensors:
  - <<: *p
    id: PT-1
    at: J-1
`
	_, probs := Parse([]byte(src), filepath.Join(testdata, "merge.yaml"))
	// "common" is not a configuration key; the merge in the sensor is fine.
	if len(probs) != 1 || !strings.Contains(probs[0].String(), "merge.yaml:2: common: unknown key in the configuration") {
		t.Fatalf("got %v, want only the unknown key common", probs)
	}
	c, err := Load([]byte(strings.Replace(src, "common: &p", "alerts: &p", 1)), filepath.Join(testdata, "merge.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	if s := c.Sensors[0]; s.Quantity != telemetry.Pressure || s.Unit != "bar" || s.Topic != "t/{sensor}" {
		t.Errorf("merged sensor: got %+v", s)
	}
}

func TestCheckURL(t *testing.T) {
	cases := []struct {
		url     string
		schemes []string
		mqtt    bool
		ok      bool
	}{
		{"tcp://127.0.0.1:1883", mqttSchemes, true, true},
		{"ssl://broker.example.org:8883", mqttSchemes, true, true},
		{"wss://broker.example.org/mqtt", mqttSchemes, true, true},
		{"tcp://[::1]:1883", mqttSchemes, true, true},
		{"tcp://broker.example.org", mqttSchemes, true, false},
		{"tcp://:1883", mqttSchemes, true, false},
		{"tcp://host:99999", mqttSchemes, true, false},
		{"tcp://user:pw@host:1883", mqttSchemes, true, false},
		{"tcp://host:1883/path", mqttSchemes, true, false},
		{"mqtt://host:1883", mqttSchemes, true, false},
		{"host:1883", mqttSchemes, true, false},
		{"http://127.0.0.1:8086", []string{"http", "https"}, false, true},
		{"https://store.example.org", []string{"http", "https"}, false, true},
		{"https://store.example.org/influx", []string{"http", "https"}, false, true},
		{"ftp://store.example.org", []string{"http", "https"}, false, false},
	}
	for _, c := range cases {
		err := checkURL(c.url, c.schemes, c.mqtt)
		if (err == nil) != c.ok {
			t.Errorf("checkURL(%q): got %v, want ok=%v", c.url, err, c.ok)
		}
	}
}

// A unit whose SI prefix letter is in the wrong case is an error that
// names the place and the spelling meant (m is milli, M is mega: 10^9
// apart, BIPM SI Brochure 9th ed. 2019 §3); harmless case variants are
// taken and stored as the unit's symbol.
func TestUnitCase(t *testing.T) {
	src := `network: ../network/two-loop.geojson
sensors:
  - {id: P-1, quantity: pressure, at: J-1, topic: t/P-1, unit: mpa}
  - {id: P-2, quantity: pressure, at: J-2, topic: t/P-2, unit: KPA}
  - {id: F-1, quantity: flow, at: P-1, topic: t/F-1, unit: LPS}
  - {id: F-2, quantity: flow, at: P-2, topic: t/F-2, unit: ml/d}
  - {id: F-3, quantity: flow, at: P-3, topic: t/F-3, unit: M3/H}
`
	path := filepath.Join(testdata, "units.yaml")
	c, probs := Inspect([]byte(src), path)
	var got []string
	for _, p := range probs {
		if p.Severity == Error {
			got = append(got, p.String())
		}
	}
	want := []string{
		`units.yaml:3: sensor P-1: unit: "mpa" is not a pressure unit (SI prefixes are case-sensitive: m is milli, M is mega; did you mean "MPa"?)`,
		`units.yaml:6: sensor F-2: unit: "ml/d" is not a flow unit (SI prefixes are case-sensitive: m is milli, M is mega; did you mean "ML/d"?)`,
	}
	if len(got) != len(want) {
		t.Fatalf("got %d errors, want %d:\n  %s", len(got), len(want), strings.Join(got, "\n  "))
	}
	for i := range want {
		if !strings.HasSuffix(got[i], want[i]) {
			t.Errorf("error %d:\n got %s\nwant ...%s", i, got[i], want[i])
		}
	}
	if c == nil {
		t.Fatal("Inspect returned no configuration")
	}
	for id, unit := range map[string]string{"P-2": "kPa", "F-1": "L/s", "F-3": "m3/h"} {
		found := false
		for _, s := range c.Sensors {
			if s.ID == id {
				found = true
				if s.Unit != unit {
					t.Errorf("sensor %s: unit %q, want %q", id, s.Unit, unit)
				}
			}
		}
		if !found {
			t.Errorf("sensor %s: not in the configuration", id)
		}
	}
}
