package decode

import (
	"math"
	"strings"
	"testing"
	"time"
)

func mustTime(t *testing.T, s string) time.Time {
	t.Helper()
	tm, err := time.Parse(time.RFC3339Nano, s)
	if err != nil {
		t.Fatal(err)
	}
	return tm.UTC()
}

func TestDecoders(t *testing.T) {
	fields := func(spec Spec) Decoder {
		d, err := New(spec)
		if err != nil {
			t.Fatalf("New(%+v): %v", spec, err)
		}
		return d
	}
	nested := fields(Spec{Format: "json", Value: "data.p1", Time: "data.ts", Unit: "meta.u"})
	arr := fields(Spec{Format: "json", Value: "readings[1].v", Time: "readings[1].t", TimeFormat: "unix_ms"})
	dotted := fields(Spec{Format: "json", Value: "readings.0.v"})
	top := fields(Spec{Format: "json", Value: "[2]"})
	epoch := fields(Spec{Format: "json", Value: "v", Time: "t", TimeFormat: "unix"})
	rfc := fields(Spec{Format: "json", Value: "v", Time: "t", TimeFormat: "rfc3339"})
	cases := []struct {
		name    string
		dec     Decoder
		payload string
		value   float64
		time    string // "" = none
		unit    string
		err     string // substring; "" = success
	}{
		{"bare", Auto{}, "3.41", 3.41, "", "", ""},
		{"bare spaces", Auto{}, " \n-0.5e2\t", -50, "", "", ""},
		{"bare NaN decodes (rejected later)", Auto{}, "NaN", math.NaN(), "", "", ""},
		{"bare huge is Inf (rejected later)", Number{}, "1e400", math.Inf(1), "", "", ""},
		{"bare empty", Auto{}, "  ", 0, "", "", "empty"},
		{"bare junk", Auto{}, "3.41 bar", 0, "", "", "not a number"},
		{"object", Auto{}, `{"value": 3.41, "time": "2026-03-02T01:10:00Z", "unit": "bar"}`, 3.41, "2026-03-02T01:10:00Z", "bar", ""},
		{"object value only", Object{}, `{"value":2}`, 2, "", "", ""},
		{"object other members ignored", Auto{}, `{"id":"x","value":7,"extra":{"a":[1,2,{"value":9}]},"ok":true,"n":null}`, 7, "", "", ""},
		{"object string value", Auto{}, `{"value":" 12.5 "}`, 12.5, "", "", ""},
		{"object offset time", Auto{}, `{"value":1,"time":"2026-03-02T03:10:00.250+02:00"}`, 1, "2026-03-02T01:10:00.25Z", "", ""},
		{"object epoch seconds", Auto{}, `{"value":1,"time":1772413800}`, 1, "2026-03-02T01:10:00Z", "", ""},
		{"object epoch ms", Auto{}, `{"value":1,"time":1772413800500}`, 1, "2026-03-02T01:10:00.5Z", "", ""},
		{"object null time and unit", Auto{}, `{"value":1,"time":null,"unit":null}`, 1, "", "", ""},
		{"object escaped unit", Auto{}, `{"value":1,"unit":"m\u00b3/h"}`, 1, "", "m³/h", ""},
		{"object escaped key", Auto{}, `{"val\u0075e":4}`, 4, "", "", ""},
		{"object duplicate key: last wins (as encoding/json)", Auto{}, `{"value":1,"value":2}`, 2, "", "", ""},
		{"object no value", Auto{}, `{"v":1}`, 0, "", "", "no value"},
		{"object null value", Auto{}, `{"value":null}`, 0, "", "", "null"},
		{"object bool value", Auto{}, `{"value":true}`, 0, "", "", "boolean"},
		{"object bad time", Auto{}, `{"value":1,"time":"yesterday"}`, 0, "", "", "RFC 3339"},
		{"object bad time type", Auto{}, `{"value":1,"time":[1]}`, 0, "", "", "array"},
		{"object unit not string", Auto{}, `{"value":1,"unit":5}`, 0, "", "", "unit"},
		{"object truncated", Auto{}, `{"value":1`, 0, "", "", "end of input"},
		{"object trailing data", Auto{}, `{"value":1} x`, 0, "", "", "after the top-level"},
		{"object trailing comma", Auto{}, `{"value":1,}`, 0, "", "", "member name"},
		{"object bad number", Auto{}, `{"value":01}`, 0, "", "", "expected"},
		{"object control char", Auto{}, "{\"value\":1,\"unit\":\"b\x01\"}", 0, "", "", "control"},
		{"object too deep", Auto{}, `{"a":` + strings.Repeat("[", 300) + strings.Repeat("]", 300) + `,"value":1}`, 0, "", "", "too deep"},
		{"nested paths", nested, `{"meta":{"u":"kPa"},"data":{"p1":350.5,"ts":"2026-03-02T01:10:00Z"}}`, 350.5, "2026-03-02T01:10:00Z", "kPa", ""},
		{"nested missing value", nested, `{"data":{"p2":1}}`, 0, "", "", "no value"},
		{"array index", arr, `{"readings":[{"v":1,"t":0},{"v":2.5,"t":1772413800000}]}`, 2.5, "2026-03-02T01:10:00Z", "", ""},
		{"dotted index", dotted, `{"readings":[{"v":8}]}`, 8, "", "", ""},
		{"dotted index also a key", dotted, `{"readings":{"0":{"v":9}}}`, 9, "", "", ""},
		{"top-level array", top, `[1, 2, 3.5]`, 3.5, "", "", ""},
		{"unix format, small number", epoch, `{"v":1,"t":1.5}`, 1, "1970-01-01T00:00:01.5Z", "", ""},
		{"unix format rejects string", epoch, `{"v":1,"t":"2026-03-02T01:10:00Z"}`, 0, "", "", "epoch"},
		{"rfc3339 format rejects number", rfc, `{"v":1,"t":5}`, 0, "", "", "rfc3339"},
		{"epoch out of range", Auto{}, `{"value":1,"time":1e300}`, 0, "", "", "out of range"},
	}
	for _, c := range cases {
		var s Sample
		err := c.dec.Decode([]byte(c.payload), &s)
		if c.err != "" {
			if err == nil || !strings.Contains(err.Error(), c.err) {
				t.Errorf("%s: Decode(%q) error = %v, want one containing %q", c.name, c.payload, err, c.err)
			}
			continue
		}
		if err != nil {
			t.Errorf("%s: Decode(%q): %v", c.name, c.payload, err)
			continue
		}
		if !(s.Value == c.value || math.IsNaN(c.value) && math.IsNaN(s.Value)) {
			t.Errorf("%s: value = %v, want %v", c.name, s.Value, c.value)
		}
		var want time.Time
		if c.time != "" {
			want = mustTime(t, c.time)
		}
		if !s.Time.Equal(want) {
			t.Errorf("%s: time = %v, want %v", c.name, s.Time, want)
		}
		if string(s.Unit) != c.unit {
			t.Errorf("%s: unit = %q, want %q", c.name, s.Unit, c.unit)
		}
	}
}

func TestSpecErrors(t *testing.T) {
	cases := []struct {
		spec Spec
		err  string
	}{
		{Spec{Format: "xml"}, "format"},
		{Spec{Format: "json"}, "value path is required"},
		{Spec{Format: "json", Value: "a..b"}, "empty segment"},
		{Spec{Format: "json", Value: "a."}, "ends with"},
		{Spec{Format: "json", Value: "a[x]"}, "index"},
		{Spec{Format: "json", Value: "a[1"}, "without ']'"},
		{Spec{Format: "json", Value: "a[1]b"}, "after ']'"},
		{Spec{Format: "json", Value: "v", Time: "t", TimeFormat: "julian"}, "time format"},
	}
	for _, c := range cases {
		_, err := New(c.spec)
		if err == nil || !strings.Contains(err.Error(), c.err) {
			t.Errorf("New(%+v) error = %v, want one containing %q", c.spec, err, c.err)
		}
	}
}

// TestRFC3339 uses the examples of RFC 3339 §5.8 and compares with
// time.Parse, an independent parser.
func TestRFC3339(t *testing.T) {
	good := []struct{ in, want string }{
		{"1985-04-12T23:20:50.52Z", "1985-04-12T23:20:50.52Z"},                // RFC 3339 §5.8
		{"1996-12-19T16:39:57-08:00", "1996-12-20T00:39:57Z"},                 // RFC 3339 §5.8
		{"1937-01-01T12:00:27.87+00:20", "1937-01-01T11:40:27.87Z"},           // RFC 3339 §5.8
		{"2026-03-02t01:10:00z", "2026-03-02T01:10:00Z"},                      // §5.6: T and Z case-insensitive
		{"2026-03-02 01:10:00Z", "2026-03-02T01:10:00Z"},                      // §5.6 NOTE: space allowed
		{"2024-02-29T00:00:00Z", "2024-02-29T00:00:00Z"},                      // leap year
		{"2026-03-02T01:10:00.1234567891Z", "2026-03-02T01:10:00.123456789Z"}, // truncated as time.Parse
	}
	for _, c := range good {
		got, err := parseRFC3339([]byte(c.in))
		if err != nil {
			t.Errorf("parseRFC3339(%q): %v", c.in, err)
			continue
		}
		if want := mustTime(t, c.want); !got.Equal(want) {
			t.Errorf("parseRFC3339(%q) = %v, want %v", c.in, got, want)
		}
	}
	bad := []string{
		"1990-12-31T23:59:60Z",      // RFC 3339 §5.8 leap second: rejected, as time.Parse does
		"2023-02-29T00:00:00Z",      // not a leap year
		"2026-13-01T00:00:00Z",      // month
		"2026-03-02T24:00:00Z",      // hour
		"2026-03-02T01:10:00",       // no offset
		"2026-03-02T01:10:00+0100",  // offset without colon
		"2026-03-02T01:10:00+24:00", // offset hour
		"2026-03-02T01:10:00.Z",     // empty fraction
		"2026-03-02",                // date only
		"+2026-03-02T01:10:00Z",
	}
	for _, in := range bad {
		if got, err := parseRFC3339([]byte(in)); err == nil {
			t.Errorf("parseRFC3339(%q) = %v, want an error", in, got)
		}
	}
}

func TestDecodeNoAlloc(t *testing.T) {
	payloads := map[string]Decoder{
		`{"value": 3.41, "time": "2026-03-02T01:10:00Z", "unit": "bar"}`: Auto{},
		`{"value": 3.41, "time": 1772413800123}`:                         Auto{},
		`12.75`:                                                          Auto{},
	}
	for p, d := range payloads {
		b := []byte(p)
		s := new(Sample) // a Sample behind an interface call escapes; the pipeline reuses one
		n := testing.AllocsPerRun(200, func() {
			*s = Sample{}
			if err := d.Decode(b, s); err != nil {
				t.Fatal(err)
			}
		})
		if n != 0 {
			t.Errorf("Decode(%s) allocates %v times, want 0", p, n)
		}
	}
}
