package decode

import (
	"bytes"
	"encoding/json"
	"errors"
	"math"
	"strconv"
	"strings"
	"testing"
	"time"
	"unicode/utf8"
)

// Seeds live in testdata/fuzz/FuzzXxx/ (go test -fuzz corpus format).

// FuzzNumber: any payload is decoded without panic; a float formatted by
// strconv comes back bit-identical (round trip).
func FuzzNumber(f *testing.F) {
	f.Fuzz(func(t *testing.T, payload []byte, v float64) {
		var s Sample
		_ = Number{}.Decode(payload, &s)
		_ = Auto{}.Decode(payload, &s)
		text := strconv.FormatFloat(v, 'g', -1, 64)
		s = Sample{}
		if err := (Number{}).Decode([]byte(" "+text+"\n"), &s); err != nil {
			t.Fatalf("Decode(%q): %v", text, err)
		}
		if !(s.Value == v || math.IsNaN(v) && math.IsNaN(s.Value)) || math.Signbit(s.Value) != math.Signbit(v) {
			t.Fatalf("round trip %v → %q → %v", v, text, s.Value)
		}
	})
}

// FuzzObject: the plain object decoder against encoding/json (an
// independent parser): what we accept must be valid JSON with the same
// value, valid JSON we reject must be a content problem, not syntax; and a
// marshalled object round-trips.
func FuzzObject(f *testing.F) {
	f.Fuzz(func(t *testing.T, payload []byte, v float64, sec int64, nsec uint32, unit string) {
		var s Sample
		err := Object{}.Decode(payload, &s)
		valid := json.Valid(payload)
		var se *syntaxError
		switch {
		case err == nil && !valid:
			t.Fatalf("accepted invalid JSON %q", payload)
		case err != nil && valid && errors.As(err, &se) && !strings.Contains(se.msg, "too deep"):
			t.Fatalf("valid JSON %q rejected as syntax: %v", payload, err)
		case err == nil:
			var m map[string]json.RawMessage
			if json.Unmarshal(payload, &m) != nil {
				t.Fatalf("accepted %q, which is not a JSON object", payload)
			}
			want, ok := jsonNumber(m["value"])
			if !ok || !(want == s.Value || math.IsInf(want, 0) && math.IsInf(s.Value, 0) && math.Signbit(want) == math.Signbit(s.Value)) {
				t.Fatalf("%q: value %v, encoding/json says %s", payload, s.Value, m["value"])
			}
			if raw, ok := m["unit"]; ok && s.Unit != nil {
				var u string
				if json.Unmarshal(raw, &u) != nil || u != string(s.Unit) {
					t.Fatalf("%q: unit %q, encoding/json says %s", payload, s.Unit, raw)
				}
			}
		}

		// Round trip.
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return
		}
		tm := time.Unix(sec%(maxEpoch-1), int64(nsec%1e9)).UTC()
		if tm.Year() < 1 || tm.Year() > 9999 {
			return
		}
		obj := map[string]any{"value": v, "time": tm.Format(time.RFC3339Nano)}
		if unit != "" && utf8.ValidString(unit) {
			obj["unit"] = unit
		}
		b, err := json.Marshal(obj)
		if err != nil {
			t.Fatal(err)
		}
		s = Sample{}
		if err := (Auto{}).Decode(b, &s); err != nil {
			t.Fatalf("Decode(%s): %v", b, err)
		}
		if s.Value != v || !s.Time.Equal(tm) || (obj["unit"] != nil && string(s.Unit) != unit) {
			t.Fatalf("round trip %s → %v %v %q", b, s.Value, s.Time, s.Unit)
		}
	})
}

func jsonNumber(raw json.RawMessage) (float64, bool) {
	raw = bytes.TrimSpace(raw)
	if len(raw) > 0 && raw[0] == '"' {
		var s string
		if json.Unmarshal(raw, &s) != nil {
			return 0, false
		}
		v, err := strconv.ParseFloat(strings.TrimSpace(s), 64)
		return v, err == nil
	}
	v, err := strconv.ParseFloat(string(raw), 64)
	var ne *strconv.NumError
	if err != nil && !(errors.As(err, &ne) && ne.Err == strconv.ErrRange) {
		return 0, false
	}
	return v, true
}

// FuzzFields: a configured value path against a reference lookup through
// encoding/json's generic tree.
func FuzzFields(f *testing.F) {
	f.Fuzz(func(t *testing.T, payload []byte, path string) {
		d, err := NewFields(Spec{Value: path})
		if err != nil {
			return
		}
		var s Sample
		err = d.Decode(payload, &s)
		if err != nil {
			return
		}
		dec := json.NewDecoder(bytes.NewReader(payload))
		dec.UseNumber()
		var tree any
		if dec.Decode(&tree) != nil {
			t.Fatalf("accepted %q, encoding/json rejects it", payload)
		}
		segs, _ := ParsePath(path)
		node := tree
		for _, sg := range segs {
			switch n := node.(type) {
			case map[string]any:
				if sg.idxOnly {
					t.Fatalf("%q path %q: index matched an object", payload, path)
				}
				node = n[sg.key]
			case []any:
				if sg.keyOnly || sg.index >= len(n) {
					t.Fatalf("%q path %q: bad index matched", payload, path)
				}
				node = n[sg.index]
			default:
				t.Fatalf("%q path %q: walked into a %T", payload, path, n)
			}
		}
		var want float64
		switch n := node.(type) {
		case json.Number:
			want, _ = jsonNumber(json.RawMessage(n))
		case string:
			want, err = strconv.ParseFloat(strings.TrimSpace(n), 64)
			if err != nil {
				t.Fatalf("%q path %q: string %q taken as %v", payload, path, n, s.Value)
			}
		default:
			t.Fatalf("%q path %q: value %v from a %T", payload, path, s.Value, n)
		}
		if want != s.Value && !(math.IsNaN(want) && math.IsNaN(s.Value)) {
			t.Fatalf("%q path %q: value %v, reference %v", payload, path, s.Value, want)
		}
	})
}

// FuzzRFC3339: our parser against time.Parse (RFC3339Nano layout), and a
// formatted time round-trips.
func FuzzRFC3339(f *testing.F) {
	f.Fuzz(func(t *testing.T, in string, sec int64, nsec uint32, offMin int16) {
		got, err := parseRFC3339([]byte(in))
		if err == nil {
			// Normalise the spellings RFC 3339 allows and Go's layout does not.
			n := []byte(in)
			if n[10] == 't' || n[10] == ' ' {
				n[10] = 'T'
			}
			if n[len(n)-1] == 'z' {
				n[len(n)-1] = 'Z'
			}
			want, err := time.Parse(time.RFC3339Nano, string(n))
			if err != nil {
				t.Fatalf("parseRFC3339(%q) = %v, but time.Parse: %v", in, got, err)
			}
			if !got.Equal(want) {
				t.Fatalf("parseRFC3339(%q) = %v, time.Parse = %v", in, got, want)
			}
		}
		tm := time.Unix(sec%maxEpoch, int64(nsec%1e9))
		zone := time.FixedZone("", int(offMin%(24*60))*60)
		tm = tm.In(zone)
		if tm.Year() < 0 || tm.Year() > 9999 {
			return
		}
		text := tm.Format(time.RFC3339Nano)
		back, err := parseRFC3339([]byte(text))
		if err != nil || !back.Equal(tm) {
			t.Fatalf("round trip %v → %q → %v, %v", tm, text, back, err)
		}
	})
}

// FuzzFilter: the matcher against the reference of topic_test.go, and
// round-trip properties: a valid topic is matched by itself, by "#" (unless
// it starts with '$') and by itself with any level replaced by '+'.
func FuzzFilter(f *testing.F) {
	f.Fuzz(func(t *testing.T, filter, topic string, level uint8) {
		if ValidTopic(topic) != nil {
			return
		}
		if fl, err := CompileFilter(filter); err == nil {
			id, got := fl.Match(topic)
			if want := refMatch(filter, topic); got != want {
				t.Fatalf("%q matches %q = %v, reference %v", filter, topic, got, want)
			}
			if got && fl.HasCapture() {
				if want := strings.Split(topic, "/")[fl.capture]; id != want {
					t.Fatalf("%q on %q captured %q, want %q", filter, topic, id, want)
				}
			}
			if _, err := CompileFilter(fl.Subscription()); err != nil {
				t.Fatalf("subscription %q of %q: %v", fl.Subscription(), filter, err)
			}
		}
		self, err := CompileFilter(topic)
		if err != nil {
			// A topic name is a valid filter unless it has a {sensor} level twice.
			if strings.Count(topic, Capture) < 2 {
				t.Fatalf("topic %q is not a valid filter: %v", topic, err)
			}
			return
		}
		if _, ok := self.Match(topic); !ok {
			t.Fatalf("%q does not match itself", topic)
		}
		hash, _ := CompileFilter("#")
		if _, ok := hash.Match(topic); ok == strings.HasPrefix(topic, "$") {
			t.Fatalf("# matches %q = %v", topic, ok)
		}
		levels := strings.Split(topic, "/")
		k := int(level) % len(levels)
		if k == 0 && strings.HasPrefix(topic, "$") {
			return // §4.7.2
		}
		levels[k] = "+"
		plus, err := CompileFilter(strings.Join(levels, "/"))
		if err != nil {
			if strings.Count(topic, Capture) > 1 {
				return
			}
			t.Fatalf("filter from %q: %v", topic, err)
		}
		if _, ok := plus.Match(topic); !ok {
			t.Fatalf("%q does not match %q", plus, topic)
		}
	})
}
