package lineproto

import (
	"errors"
	"math"
	"reflect"
	"strings"
	"testing"
	"time"

	"plumbline/model/telemetry"
)

// Examples follow the InfluxDB 1.8 line protocol reference
// (docs.influxdata.com/influxdb/v1.8/write_protocols/line_protocol_reference/):
// the weather example, escaping of commas, spaces and equals signs in
// names and tags, quotes and backslashes in string fields, the i suffix
// for integers and the boolean spellings.
func TestParse(t *testing.T) {
	ts := time.Unix(0, 1465839830100400200).UTC()
	tests := []struct {
		line string
		want Point
	}{
		{`weather,location=us-midwest temperature=82 1465839830100400200`,
			Point{"weather", []Tag{{"location", "us-midwest"}}, []Field{{"temperature", 82.0}}, ts}},
		{`weather,location\ place=us\,midwest temp\=rature=82,n=3i,ok=t,s="a \"b\" \\c, d" 1465839830100400200`,
			Point{"weather", []Tag{{"location place", "us,midwest"}}, []Field{
				{"temp=rature", 82.0}, {"n", int64(3)}, {"ok", true}, {"s", `a "b" \c, d`}}, ts}},
		{`wea\,ther\ x v=-1.5e-3,b=FALSE`,
			Point{"wea,ther x", nil, []Field{{"v", -1.5e-3}, {"b", false}}, time.Time{}}},
		{"reading,sensor=P-1,unit=bar value=3.41 1700000000000000000\r\n",
			Point{"reading", []Tag{{"sensor", "P-1"}, {"unit", "bar"}}, []Field{{"value", 3.41}}, time.Unix(1700000000, 0).UTC()}},
	}
	for _, tc := range tests {
		got, err := Parse([]byte(tc.line))
		if err != nil {
			t.Errorf("Parse(%q): %v", tc.line, err)
			continue
		}
		if !reflect.DeepEqual(got, tc.want) {
			t.Errorf("Parse(%q)\n got %#v\nwant %#v", tc.line, got, tc.want)
		}
	}
}

func TestParseErrors(t *testing.T) {
	tests := []struct{ line, want string }{
		{``, "column 1: empty line"},
		{`m`, "missing fields"},
		{`m,t v=1`, `tag "t" has no value`},
		{`m,t= v=1`, `empty value`},
		{`m v=`, `field "v" has no value`},
		{`m v=abc`, `"abc" is not a number`},
		{`m v=1x2i`, `not an integer`},
		{`m v="open`, `no closing quote`},
		{`m v=1 12ab`, `not an integer of nanoseconds`},
		{`m v=1,v=2`, `given twice`},
		{`m v=NaN`, `not a number`},
		{`m v=1e999`, `not a finite number`},
		{`#c v=1`, `comment`},
	}
	for _, tc := range tests {
		_, err := Parse([]byte(tc.line))
		if err == nil || !strings.Contains(err.Error(), tc.want) || !errors.Is(err, ErrSyntax) {
			t.Errorf("Parse(%q) error = %v, want one containing %q wrapping ErrSyntax", tc.line, err, tc.want)
		}
	}
}

func TestAppendRoundTrip(t *testing.T) {
	p := Point{
		Measurement: "zone balance",
		Tags:        []Tag{{"zone", "north,east"}, {"run", "r=1"}, {"empty", ""}},
		Fields:      []Field{{"inflow_lps", 12.5}, {"n", int64(-7)}, {"note", `say "hi" \o/`}, {"ok", true}},
		Time:        time.Date(2026, 3, 2, 1, 10, 0, 123, time.UTC),
	}
	line, err := p.Line()
	if err != nil {
		t.Fatal(err)
	}
	// Tags sorted by key, the empty one left out.
	want := `zone\ balance,run=r\=1,zone=north\,east inflow_lps=12.5,n=-7i,note="say \"hi\" \\o/",ok=true 1772413800000000123`
	if line != want {
		t.Fatalf("line\n got %s\nwant %s", line, want)
	}
	back, err := Parse([]byte(line))
	if err != nil {
		t.Fatal(err)
	}
	p.Tags = []Tag{{"run", "r=1"}, {"zone", "north,east"}}
	if !reflect.DeepEqual(back, p) {
		t.Fatalf("round trip\n got %#v\nwant %#v", back, p)
	}
}

func TestAppendErrors(t *testing.T) {
	tests := []struct {
		p    Point
		want string
	}{
		{Point{Fields: []Field{{"v", 1.0}}}, "empty measurement"},
		{Point{Measurement: "m"}, "no fields"},
		{Point{Measurement: "m", Fields: []Field{{"v", math.NaN()}}}, "finite"},
		{Point{Measurement: "m", Fields: []Field{{"v", math.Inf(1)}}}, "finite"},
		{Point{Measurement: "m", Fields: []Field{{"v", 1}}}, "unsupported value type int"},
		{Point{Measurement: "m", Tags: []Tag{{"s", "a\nb"}}, Fields: []Field{{"v", 1.0}}}, "not allowed"},
		{Point{Measurement: "m", Tags: []Tag{{"s", `a\`}}, Fields: []Field{{"v", 1.0}}}, "not allowed"},
		{Point{Measurement: "m", Fields: []Field{{"v", "x\ny"}}}, "line break"},
		{Point{Measurement: "#m", Fields: []Field{{"v", 1.0}}}, "comment"},
		{Point{Measurement: "m", Tags: []Tag{{"a", "1"}, {"a", "2"}}, Fields: []Field{{"v", 1.0}}}, "twice"},
		{Point{Measurement: "m", Fields: []Field{{"v", 1.0}}, Time: time.Date(2300, 1, 1, 0, 0, 0, 0, time.UTC)}, "range"},
	}
	for _, tc := range tests {
		dst := []byte("keep")
		got, err := tc.p.Append(dst)
		if err == nil || !strings.Contains(err.Error(), tc.want) || !errors.Is(err, ErrEncode) {
			t.Errorf("Append(%#v) error = %v, want one containing %q", tc.p, err, tc.want)
		}
		if string(got) != "keep" {
			t.Errorf("Append changed dst on error: %q", got)
		}
	}
}

func TestReadingPoint(t *testing.T) {
	r := telemetry.Reading{Sensor: "P-104", Time: time.Date(2026, 3, 2, 1, 10, 0, 0, time.UTC), Value: 34.8, Unit: "bar"}
	p := FromReading(r, telemetry.Pressure, "north")
	line, err := p.Line()
	if err != nil {
		t.Fatal(err)
	}
	want := "reading,quantity=pressure,sensor=P-104,unit=bar,zone=north value=34.8 1772413800000000000"
	if line != want {
		t.Fatalf("line\n got %s\nwant %s", line, want)
	}
	back, err := Parse([]byte(line))
	if err != nil {
		t.Fatal(err)
	}
	got, err := ToReading(&back)
	if err != nil {
		t.Fatal(err)
	}
	if got != r {
		t.Fatalf("ToReading = %+v, want %+v", got, r)
	}
	run := WithRun(p, "replay-7")
	if run.Tag(TagRun) != "replay-7" || p.Tag(TagRun) != "" {
		t.Fatalf("WithRun: got run %q, original %q", run.Tag(TagRun), p.Tag(TagRun))
	}
	for _, bad := range []string{"expected,sensor=S value=1 1", "reading value=1 1", "reading,sensor=S v=1 1", "reading,sensor=S value=1"} {
		p, err := Parse([]byte(bad))
		if err != nil {
			t.Fatal(err)
		}
		if _, err := ToReading(&p); err == nil {
			t.Errorf("ToReading(%q): no error", bad)
		}
	}
}

// FuzzParse checks that Parse never panics and that every line it accepts
// survives a re-encode and re-parse unchanged (tags in canonical order).
func FuzzParse(f *testing.F) {
	for _, s := range []string{
		`weather,location=us-midwest temperature=82 1465839830100400200`,
		`m,a\ b=c\,d f="x \"y\" \\z",i=3i,b=t`,
		"reading,sensor=P-1,unit=bar value=3.41 1700000000000000000",
		`m v=1e-3,w=-2.5E+4`,
	} {
		f.Add([]byte(s))
	}
	f.Fuzz(func(t *testing.T, line []byte) {
		p, err := Parse(line)
		if err != nil {
			return
		}
		enc, err := p.Append(nil)
		if err != nil {
			if !errors.Is(err, ErrEncode) {
				t.Fatalf("encode error %v does not wrap ErrEncode", err)
			}
			return // e.g. a literal backslash or a float that is not finite
		}
		q, err := Parse(enc)
		if err != nil {
			t.Fatalf("re-parse of %q (from %q): %v", enc, line, err)
		}
		enc2, err := q.Append(nil)
		if err != nil || string(enc2) != string(enc) {
			t.Fatalf("re-encode differs:\n%q\n%q (%v)", enc, enc2, err)
		}
	})
}
